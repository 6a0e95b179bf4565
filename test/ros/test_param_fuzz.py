# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""1,000 random parameter set calls from another process, through rclpy's parameter services.

The calls (seeded, no sleeps) mix unknown names, wrong types, NaN, infinities, negative and
out-of-range values, read-only names, valid live changes, and atomic sets that are partly
valid. After every call all parameters are read back and compared with a model of what
must be there; every refused parameter carries a reason.

The model's expectation for each call comes from two rules: rclpy's own checks (an
undeclared name, a read-only descriptor, a type other than the declared one are refused)
and the node's documented rule for the rest (DESIGN §4: a set is validated as a whole by
the core's one validator and the live stability guard, then applied atomically or refused),
evaluated with the same validator on an in-process copy of the controller. A difference
between the node's answer and the model fails the test, as does any change of state after
a refused call.
"""

from __future__ import annotations

from collections.abc import Sequence
import math
import random
import string
from typing import Any

from corridor_pid.core.config import config_from_params
from corridor_pid.core.controller import Controller
from corridor_pid.core.errors import ConfigError
from corridor_pid.core.params import BOOL, DOUBLE, DOUBLE_ARRAY, INTEGER, ParamSpec, SPECS
from corridor_pid.core.pid import scheduled_gains
from corridor_pid.ros.parameters import LiveRetune
from corridor_pid.ros.testing import wait_until
import pytest
from rclpy.parameter import Parameter
from ros_helpers import node_and_peer, Peer

pytestmark = pytest.mark.dds

SEED = 20261202
CALLS = 1000
NS = '/fuzz'
VALUES = {'pose_qos': 'reliable', 'diagnostics.rate': 10.0, 'watchdog.timeout': 5.0}

LIVE = [spec for spec in SPECS.values() if spec.live]
FIXED = [spec for spec in SPECS.values() if not spec.live]


def _outside(rng: random.Random, spec: ParamSpec) -> float:
    """Return a number outside the spec's range (below low or above high)."""
    low = float(spec.low) if spec.low is not None else None
    high = float(spec.high) if spec.high is not None else None
    if high is not None and (low is None or rng.random() < 0.5):
        return high + rng.choice([1e-3, 0.5, 10.0, 1e6])
    assert low is not None
    return low - rng.choice([1e-3, 0.5, 10.0, 1e6])


def _in_range(rng: random.Random, spec: ParamSpec) -> float:
    low = float(spec.low) if spec.low is not None else -10.0
    high = float(spec.high) if spec.high is not None else low + 20.0
    return rng.uniform(low, high)


def draw_value(rng: random.Random, spec: ParamSpec) -> tuple[object, str]:
    """Return a random value for ``spec`` and the category it was drawn from."""
    kind = spec.kind
    category = rng.choice(['valid', 'valid', 'valid', 'nan', 'inf', 'negative',
                           'out_of_range', 'wrong_type', 'huge', 'boundary', 'unset'])
    if category == 'unset':
        return None, category
    if kind == DOUBLE:
        if category == 'valid':
            return _in_range(rng, spec), category
        if category == 'nan':
            return math.nan, category
        if category == 'inf':
            return rng.choice([math.inf, -math.inf]), category
        if category == 'negative':
            return -rng.choice([1e-9, 0.01, 1.0, 100.0]), category
        if category == 'out_of_range' and (spec.low is not None or spec.high is not None):
            return _outside(rng, spec), category
        if category == 'huge':
            return rng.choice([1e300, -1e300, 1.7976931348623157e308]), category
        if category == 'boundary':
            return float(rng.choice([b for b in (spec.low, spec.high, 0.0) if b is not None])), \
                category
        return rng.choice([1, 0, 'fast', True, [0.5, 1.5], '0.5']), 'wrong_type'
    if kind == INTEGER:
        if category == 'valid':
            return rng.randint(int(spec.low or 0), int(spec.high or 100)), category
        if category in ('negative', 'nan', 'inf'):
            return -rng.randint(1, 10**6), 'negative'
        if category in ('out_of_range', 'huge'):
            return int(spec.high or 0) + rng.randint(1, 10**9), 'out_of_range'
        if category == 'boundary':
            return int(rng.choice([b for b in (spec.low, spec.high) if b is not None])), \
                category
        return rng.choice([2.0, math.nan, 'five', False, [1, 2]]), 'wrong_type'
    if kind == BOOL:
        if category == 'valid':
            return rng.random() < 0.5, category
        return rng.choice([1, 0, 'true', 1.0, math.nan, [True]]), 'wrong_type'
    if kind == DOUBLE_ARRAY:
        if category == 'valid':
            return [rng.uniform(-50.0, 50.0) for _ in range(2 * rng.randint(2, 6))], category
        return rng.choice([[0.0, 0.0, math.nan, 1.0], [1.0, 2.0, 3.0], [1, 2, 3, 4],
                           'x-axis', 3.0]), 'wrong_type'
    # string
    if category == 'valid':
        return rng.choice(spec.choices) if spec.choices else rng.choice(['map', 'odom']), \
            category
    if category in ('nan', 'inf', 'negative', 'out_of_range', 'huge', 'boundary'):
        letters = ''.join(rng.choice(string.ascii_letters) for _ in range(rng.randint(0, 12)))
        return rng.choice([letters, '', ' ', 'TRACKING', 'Reject', 'off ', 'nan']), 'invalid'
    return rng.choice([3, 0.5, True, ['reject']]), 'wrong_type'


def draw_param(rng: random.Random, rclpy_names: Sequence[str]) -> tuple[str, object, str]:
    """Return (name, value, category) of one random parameter in a set call."""
    r = rng.random()
    if r < 0.08:
        stem = rng.choice(['gains.', 'speed.', 'steering.', 'watchdog.', '', 'gains.kp.'])
        tail = ''.join(rng.choice(string.ascii_lowercase + '_') for _ in range(rng.randint(1, 9)))
        name = rng.choice([stem + tail, 'gains.Kp', 'kp', 'gain.kp', 'gains.kd_', 'speed'])
        return name, rng.choice([0.5, 1, 'x', True, math.nan]), 'unknown'
    if r < 0.12:
        return rng.choice(list(rclpy_names)), rng.choice([1, 'yes', 0.0, None]), 'rclpy_own'
    spec = rng.choice(LIVE) if rng.random() < 0.75 else rng.choice(FIXED)
    value, category = draw_value(rng, spec)
    return spec.name, value, category


class Model:
    """What the node's parameters must be, and the rule that says which sets succeed."""

    def __init__(self, values: dict[str, object], descriptors: dict[str, Any]) -> None:
        """Start from the node's values and descriptors as read at the beginning."""
        self.values = dict(values)
        self.types = {name: d.type for name, d in descriptors.items()}
        self.read_only = {name: d.read_only for name, d in descriptors.items()}
        flat = {n: (tuple(v) if isinstance(v, list) else v) for n, v in values.items()
                if n in SPECS and v is not None}
        self.controller = Controller(config_from_params(flat))
        self.retune = LiveRetune(self.controller, lambda: 0.0, lambda: 0.0,
                                 lambda text: None, lambda text: None)

    def rclpy_refuses(self, param: Parameter) -> bool:
        """Return whether rclpy's own checks refuse ``param`` (before the node's callback)."""
        if param.name not in self.types or self.read_only[param.name]:
            return True
        if param.type_ == Parameter.Type.NOT_SET:
            return True          # a declared static parameter cannot be undeclared
        return param.type_.value != self.types[param.name]

    def accepts(self, params: Sequence[Parameter]) -> bool:
        """Return whether one atomic set of ``params`` must succeed; apply it if so."""
        if any(self.rclpy_refuses(p) for p in params):
            return False
        try:
            new = self.retune.changed_config(list(params))
        except ConfigError:
            return False
        self.controller.retune(new, 0.0)
        for p in params:
            self.values[p.name] = p.value if not isinstance(p.value, tuple) else list(p.value)
        return True


def _same(a: object, b: object) -> bool:
    if isinstance(a, (list, tuple)) and isinstance(b, (list, tuple)):
        return list(a) == list(b)
    return a == b and type(a) is type(b)


def all_names(peer: Peer) -> list[str]:
    """Return every parameter name the node has declared."""
    future = peer.params.list_parameters([], 0)
    wait_until(future.done, 'list_parameters', process=peer.proc)
    return sorted(future.result().result.names)


def gains_in_force(peer: Peer, model: Model) -> None:
    """Check the controller's gains in force (diagnostics) against the model."""
    status = peer.wait_status(lambda v: True, 'a status')
    cfg = model.controller.config
    kp, ki, kd = scheduled_gains(cfg.gains, 0.0)
    assert (float(status['kp']), float(status['ki']), float(status['kd'])) == (kp, ki, kd)
    assert float(status['lookahead']) == cfg.lookahead
    assert float(status['target_offset']) == cfg.target_offset


def test_thousand_random_parameter_sets(tmp_path: Any, ros_domain_id: int) -> None:
    """Every refused set has a reason and changes nothing; accepted ones match the model."""
    rng = random.Random(SEED)
    with node_and_peer(tmp_path, NS, VALUES) as peer:
        declared = all_names(peer)
        assert set(SPECS) <= set(declared)
        rclpy_names = [n for n in declared if n not in SPECS]
        # rclpy's get_parameters answers nothing at all when one name has no value, so the
        # unset course.points (absent = the x-axis) is read on its own.
        names = [n for n in declared if peer.get_params([n])]
        assert sorted(set(declared) - set(names)) == ['course.points']
        model = Model(peer.get_params(names), peer.describe(declared))
        counts = {'accepted': 0, 'refused': 0}
        for call in range(CALLS):
            atomic = rng.random() < 0.4
            drawn: dict[str, tuple[object, str]] = {}
            for _ in range(rng.randint(1, 4)):
                name, value, category = draw_param(rng, rclpy_names)
                drawn.setdefault(name, (value, category))
            params = [Parameter(name, value=value) for name, (value, _) in drawn.items()]
            what = f'call {call} ({"atomic" if atomic else "one by one"}): ' + ', '.join(
                f'{n}={v!r} [{c}]' for n, (v, c) in drawn.items())
            if atomic:
                expected = [model.accepts(params)]
                got = [peer.set_atomically({p.name: p.value for p in params})]
            else:
                expected = [model.accepts([p]) for p in params]
                got = peer.set_params({p.name: p.value for p in params})
            assert [r.successful for r in got] == expected, (
                what + ' -> ' + '; '.join(r.reason for r in got))
            for result in got:
                counts['accepted' if result.successful else 'refused'] += 1
                assert result.successful or result.reason.strip(), what
            now = peer.get_params(names)
            assert set(now) == set(names), what
            wrong = {n: (now[n], model.values[n]) for n in names
                     if not _same(now[n], model.values[n])}
            assert not wrong, f'{what}: node (got, model) differ: {wrong}'
            if call % 100 == 99:
                gains_in_force(peer, model)
        assert peer.get_params(['course.points']) == {}      # still unset
        # Both kinds occurred, and plenty of each.
        assert counts['accepted'] > 50 and counts['refused'] > 500, counts
        # Still alive and controlling with the parameters the model says.
        gains_in_force(peer, model)
        peer.enable(True)
        for k in range(5):
            terms = peer.step(5000.0 + 0.01 * k, 0.01 * k, 0.1)
        cfg = model.controller.config
        kp, _, _ = scheduled_gains(cfg.gains, terms['speed'])
        assert math.isfinite(terms['steering']) and terms['kp'] == kp
        assert peer.proc.returncode is None
