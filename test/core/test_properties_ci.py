# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Properties of Controller.step at the edges of float arithmetic (hypothesis).

test_properties.py keeps positions within +/-1e12 m; here poses are finite but absurd
(up to 1.8e308 m, stamps 5e-324 s apart or 1e300 s ahead: a corrupt localization message
or a teleport). The rule (controller docstring): a pose that makes the law overflow is
rejected like a non-finite one and counted; the command stays finite and within its limits,
and such poses never feed the watchdog. The example count comes from the hypothesis
profile (10,000 per property under CI).
"""

from __future__ import annotations

import math
import sys

from corridor_pid.core.config import config_from_params
from corridor_pid.core.controller import Controller, PoseSample, State
from hypothesis import given, HealthCheck, settings
from hypothesis import strategies as st
from test_properties import configs

BIG = sys.float_info.max

absurd = st.one_of(
    st.floats(-50.0, 50.0),
    st.sampled_from([BIG, -BIG, 1e308, -1e300, 1e200, 1e154, 5e-324]),
    st.floats(allow_nan=False, allow_infinity=False),
)

events = st.lists(st.tuples(
    st.floats(0.0, 0.4),                       # node-clock advance [s]
    st.booleans(),                             # pose (True) or timer tick (False)
    st.one_of(st.floats(-2.0, 0.2), st.sampled_from([5e-324, 1e-9, 1e300]),
              st.floats(allow_nan=False, allow_infinity=False)),  # stamp step [s]
    absurd, absurd, absurd,                    # x, y [m], yaw [rad]
), min_size=1, max_size=40)


@settings(suppress_health_check=[HealthCheck.too_slow])
@given(params=configs, seq=events)
def test_absurd_finite_poses_never_give_a_non_finite_command(
        params: dict[str, object], seq: list[tuple[float, ...]]) -> None:
    """Finite, limited command and finite terms whatever finite pose arrives."""
    cfg = config_from_params(params)
    ctl = Controller(cfg, enabled=True)
    t, stamp = 0.0, 0.0
    for dt, is_pose, dstamp, x, y, yaw in seq:
        t += dt
        sample = None
        if is_pose:
            stamp = stamp + dstamp
            if not math.isfinite(stamp):
                stamp = 0.0
            sample = PoseSample(stamp, x, y, yaw)
        res = ctl.step(sample, t)
        assert math.isfinite(res.steering) and math.isfinite(res.speed)
        assert abs(res.steering) <= cfg.steering.max_angle + 1e-12
        assert 0.0 <= res.speed <= cfg.speed.max
        if res.computed:
            for value in (res.unclamped, res.p, res.i, res.d, res.feedforward, res.blend):
                assert math.isfinite(value)


@given(kd=st.floats(0.01, 5.0), y=st.sampled_from([BIG, -BIG, 1e308, -1e308]))
def test_overflowing_pose_is_rejected_counted_and_the_next_sane_pose_resumes(
        kd: float, y: float) -> None:
    """A 1e308 m teleport 10 ms after a sane pose is rejected; the command holds; then resumes."""
    ctl = Controller(config_from_params({'gains.kd': kd}), enabled=True)
    first = ctl.step(PoseSample(0.0, 0.0, 0.1, 0.0), 0.0)
    second = ctl.step(PoseSample(0.01, 0.01, 0.1, 0.0), 0.01)
    assert first.computed and second.computed
    jump = ctl.step(PoseSample(0.02, 0.02, y, 0.0), 0.02)
    assert not jump.accepted and not jump.computed
    assert jump.state == State.TRACKING
    assert jump.steering == second.steering and ctl.rejected == 1
    after = ctl.step(PoseSample(0.03, 0.03, 0.1, 0.0), 0.03)
    assert after.accepted and after.computed and math.isfinite(after.unclamped)
