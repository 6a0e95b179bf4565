# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Margins and closed-loop poles of the linearised loop against python-control."""

from __future__ import annotations

import dataclasses
import math

import control
from corridor_pid.tuning.linear import LoopModel
from corridor_pid.tuning.margins import model_margins
import numpy as np
import pytest
from tuning_helpers import control_loop, matched, MODELS

REL = 0.01  # the tolerance: 1 %
PADE_ORDERS = (2, 3, 5)


def _control_margins(model: LoopModel, order: int) -> dict[str, float]:
    """Return python-control's margins of ``model``, split as ours are."""
    gms, pms, _, w180, wc, _ = control.stability_margins(control_loop(model, order),
                                                         returnall=True)
    gms, w180 = np.asarray(gms), np.asarray(w180)
    above, below = gms > 1.0, gms < 1.0
    worst = int(np.argmin(pms))
    return {
        'phase_margin': float(pms[worst]),
        'crossover': float(np.asarray(wc)[worst]),
        'upper': float(np.min(gms[above])) if above.any() else math.inf,
        'upper_w': float(w180[above][np.argmin(gms[above])]) if above.any() else math.nan,
        'lower': float(np.max(gms[below])) if below.any() else 0.0,
        'lower_w': float(w180[below][np.argmax(gms[below])]) if below.any() else math.nan,
    }


@pytest.mark.parametrize('order', PADE_ORDERS)
@pytest.mark.parametrize('name', sorted(MODELS))
def test_margins_match_python_control(name: str, order: int) -> None:
    """Phase and both gain margins, and their frequencies, agree with control to 1 %."""
    # Source: python-control `stability_margins(returnall=True)` (the all-crossings form of
    # `control.margin`) on the same loop with the same Padé order for the dead time.
    model = MODELS[name]
    ours = model_margins(model, pade_order=order)
    ref = _control_margins(model, order)
    assert ours.phase_margin == pytest.approx(ref['phase_margin'], rel=REL)
    assert ours.crossover_frequency == pytest.approx(ref['crossover'], rel=REL)
    assert ours.gain_margin_upper == pytest.approx(ref['upper'], rel=REL)
    assert ours.gain_margin_lower == pytest.approx(ref['lower'], rel=REL, abs=1e-12)
    if math.isfinite(ref['upper']):
        assert ours.upper_phase_crossover == pytest.approx(ref['upper_w'], rel=REL)
    if ref['lower'] > 0.0:
        assert ours.lower_phase_crossover == pytest.approx(ref['lower_w'], rel=REL)


@pytest.mark.parametrize('name', sorted(MODELS))
def test_control_margin_agrees_with_the_margin_closest_to_one(name: str) -> None:
    """control.margin's single gain margin is one of our two, the one nearer 0 dB."""
    # Source: python-control `control.margin` (returns the gain margin closest to 1).
    model = MODELS[name]
    gm, pm, _, _ = control.margin(control_loop(model, 3))
    ours = model_margins(model, pade_order=3)
    candidates = [g for g in (ours.gain_margin_upper, ours.gain_margin_lower)
                  if 0.0 < g < math.inf]
    nearest = min(candidates, key=lambda g: abs(math.log(g)))
    assert nearest == pytest.approx(gm, rel=REL)
    assert ours.phase_margin == pytest.approx(pm, rel=REL)


@pytest.mark.parametrize('order', PADE_ORDERS)
@pytest.mark.parametrize('name', sorted(MODELS))
def test_closed_loop_poles_match_python_control(name: str, order: int) -> None:
    """Closed-loop poles agree with control.poles of the feedback loop to 1 %."""
    # Source: python-control `control.poles(control.feedback(L, 1))`, same Padé order.
    model = MODELS[name]
    theirs = control.poles(control.feedback(control_loop(model, order), 1))
    ours = model.closed_loop_poles(order)
    assert matched(ours, np.asarray(theirs), REL)


@pytest.mark.parametrize('name', ['defaults', 'integral', 'fast_cart', 'long_delay'])
def test_exact_delay_margins_match_a_high_order_pade(name: str) -> None:
    """With the exact e^{-sT}, margins agree with control on a Padé of order 6 to 1 %."""
    # Source: python-control `stability_margins` with `control.pade(T, 6)`; a Padé of that
    # order matches e^{-jwT} in phase far beyond the crossovers of these loops.
    model = MODELS[name]
    ours = model_margins(model)
    ref = _control_margins(model, 6)
    assert ours.phase_margin == pytest.approx(ref['phase_margin'], rel=REL)
    assert ours.gain_margin_upper == pytest.approx(ref['upper'], rel=REL)
    assert ours.gain_margin_lower == pytest.approx(ref['lower'], rel=REL, abs=1e-12)


@pytest.mark.parametrize('name', ['integral', 'fast_cart', 'long_delay'])
def test_gain_margins_bound_the_stable_gain_interval(name: str) -> None:
    """Scaling the loop just inside (outside) either gain margin keeps (loses) stability."""
    # Source: python-control `control.poles` of the scaled feedback loop (Padé order 4).
    # The lateral loop with integral action has three integrators: conditionally stable.
    model = MODELS[name]
    m = model_margins(model, pade_order=4)
    assert m.stable and 0.0 < m.gain_margin_lower < 1.0 < m.gain_margin_upper < math.inf
    loop = control_loop(model, 4)

    def stable(k: float) -> bool:
        return bool(np.all(control.poles(control.feedback(k * loop, 1)).real < 0.0))

    assert stable(1.0)
    assert stable(0.99 * m.gain_margin_upper) and not stable(1.01 * m.gain_margin_upper)
    assert stable(1.01 * m.gain_margin_lower) and not stable(0.99 * m.gain_margin_lower)


@pytest.mark.parametrize('name', ['defaults', 'integral', 'fast_cart', 'long_delay'])
def test_delay_margin_is_the_extra_dead_time_to_instability(name: str) -> None:
    """Adding 98 % of the delay margin keeps the loop stable; 102 % destabilises it."""
    # Source: python-control `control.poles` with `control.pade(T + dT, 6)`.
    model = MODELS[name]
    dm = model_margins(model).delay_margin
    assert 0.0 < dm < math.inf

    def stable(extra: float) -> bool:
        longer = dataclasses.replace(model, steer_delay=model.steer_delay + extra)
        poles = control.poles(control.feedback(control_loop(longer, 6), 1))
        return bool(np.all(poles.real < 0.0))

    assert stable(0.98 * dm)
    assert not stable(1.02 * dm)


def test_defaults_are_stable_with_margins_above_the_floors() -> None:
    """The shipped defaults meet 45 deg, 6 dB and 2 x dead time at 1 m/s."""
    # Common practice, no source: the floors are the usual 45-60 deg and 6 dB guidance.
    m = model_margins(MODELS['defaults'])
    assert m.stable
    assert m.phase_margin >= 45.0
    assert m.gain_margin_upper_db >= 6.0
    assert m.gain_margin_lower == 0.0  # no integral: no lower limit on the gain
    assert m.delay_margin >= 2.0 * MODELS['defaults'].steer_delay


def test_unstable_loop_is_reported_unstable_with_zero_delay_margin() -> None:
    """A large integral gain destabilises the loop; control agrees on a RHP pole."""
    # Common practice, no source: with this error law a large integral gain overshoots
    # badly and, past a point, diverges. Checked against python-control's poles.
    model = dataclasses.replace(MODELS['integral'], ki=3.0)
    m = model_margins(model)
    theirs = control.poles(control.feedback(control_loop(model, 4), 1))
    assert not m.stable and np.any(theirs.real > 0.0)
    assert m.delay_margin == 0.0
    assert m.phase_margin < 0.0
