# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Properties of Controller.step over random input sequences (hypothesis).

Whatever arrives (NaN, inf, repeated or backwards stamps, jumps, gaps), the command is
finite, inside the angle limit, slewed within the rate limit, the speed stays in
[0, speed.max], and the watchdog stops after its timeout. The example count comes from the
hypothesis profile (CI runs the 'ci' profile of test/conftest.py when it is selected).
"""

from __future__ import annotations

import math

from corridor_pid.core.config import config_from_params
from corridor_pid.core.controller import Controller, PoseSample, State
from hypothesis import given, HealthCheck, settings
from hypothesis import strategies as st

finite = st.floats(min_value=-50.0, max_value=50.0, allow_nan=False)
wild = st.one_of(finite, st.sampled_from([math.nan, math.inf, -math.inf, 1e12, -1e12]))

configs = st.fixed_dictionaries({
    'gains.kp': st.floats(0.0, 20.0), 'gains.ki': st.floats(0.0, 5.0),
    'gains.kd': st.floats(0.0, 5.0), 'lookahead': st.floats(0.0, 5.0),
    'gains.reference_speed': st.sampled_from([0.0, 1.0]),
    'integral.method': st.sampled_from(['tracking', 'conditional', 'off']),
    'derivative.filter_time': st.floats(0.0, 0.5),
    'smoothing.enabled': st.booleans(), 'delay_compensation.enabled': st.booleans(),
    'steering.max_angle': st.floats(0.05, 1.0), 'steering.max_rate': st.floats(0.1, 5.0),
    'watchdog.timeout': st.floats(0.05, 1.0),
    'course.points': st.sampled_from([(), (0.0, 0.0, 10.0, 0.0, 20.0, 8.0, 30.0, 0.0)]),
})

events = st.lists(st.tuples(
    st.floats(0.0, 0.4),                       # node-clock advance [s]
    st.booleans(),                             # pose (True) or timer tick (False)
    st.one_of(st.floats(-2.0, 0.2), st.sampled_from([0.0, -100.0, math.nan])),  # stamp step
    wild, wild, wild,                          # x, y, yaw
), min_size=1, max_size=60)


@settings(suppress_health_check=[HealthCheck.too_slow])
@given(params=configs, seq=events)
def test_commands_stay_finite_and_within_limits(params: dict[str, object],
                                                seq: list[tuple[float, ...]]) -> None:
    """Finite output, |steer| <= max_angle, slew <= max_rate*dt, 0 <= v <= max, watchdog."""
    cfg = config_from_params(params)
    ctl = Controller(cfg, enabled=True)
    t, stamp = 0.0, 0.0
    prev_steer, prev_t = cfg.steering.trim, None
    last_accept_t = None
    lim, rate = cfg.steering.max_angle, cfg.steering.max_rate
    for dt, is_pose, dstamp, x, y, yaw in seq:
        t += dt
        sample = None
        if is_pose:
            stamp = stamp + dstamp if math.isfinite(dstamp) else dstamp
            sample = PoseSample(stamp, x, y, yaw)
            if not math.isfinite(stamp):
                stamp = 0.0
        state_before = ctl.state
        res = ctl.step(sample, t)
        assert math.isfinite(res.steering) and math.isfinite(res.speed)
        assert abs(res.steering) <= lim + 1e-12
        # Computing on each pose, the commands sent are the computed ones and every step
        # while not tracking; the slew bound holds between those.
        sent = res.computed or res.state != State.TRACKING
        if prev_t is not None and sent:
            assert abs(res.steering - prev_steer) <= rate * (t - prev_t) + 1e-9
        assert 0.0 <= res.speed <= cfg.speed.max
        if (state_before == State.TRACKING and last_accept_t is not None
                and t - last_accept_t > cfg.watchdog.timeout):
            assert res.state in (State.STOPPED, State.WAITING, State.FINISHED)
        if res.accepted:
            last_accept_t = t
        if sent:
            prev_steer, prev_t = res.steering, t
