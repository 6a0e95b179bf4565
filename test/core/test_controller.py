# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Controller.step: signs, limits, speed policy, states, watchdog, bumpless retune."""

from __future__ import annotations

import math

from core_helpers import bicycle_run, config
from corridor_pid.core.controller import Controller, PoseSample, State
from corridor_pid.core.errors import ConfigError
import pytest


def _tracking(cfg=None) -> Controller:  # type: ignore[no-untyped-def]
    ctl = Controller(cfg or config(), enabled=True)
    return ctl


def test_left_offset_steers_right() -> None:
    """REP 103: y > 0 (left of centre) gives negative (rightward) steering."""
    res = _tracking().step(PoseSample(0.0, 0.0, 0.3, 0.0), 0.0)
    assert res.error < 0.0 and res.unclamped < 0.0


def test_left_heading_steers_right() -> None:
    """REP 103: theta > 0 (heading left of the course) gives negative steering."""
    res = _tracking().step(PoseSample(0.0, 0.0, 0.0, 0.2), 0.0)
    assert res.error < 0.0 and res.unclamped < 0.0


def test_target_offset_moves_the_zero() -> None:
    """Holding target_offset: at y == target_offset and theta == 0 the error is zero."""
    res = _tracking(config(target_offset=-0.4)).step(PoseSample(0.0, 0.0, -0.4, 0.0), 0.0)
    assert res.error == pytest.approx(0.0)


def test_feedforward_on_an_arc() -> None:
    """On a left arc of radius R, feedforward is atan(wheelbase / R) (Rajamani 2012, ch. 2)."""
    radius = 10.0
    pts: list[float] = []
    for k in range(61):
        a = k * 0.025
        pts += [radius * math.sin(a), radius * (1.0 - math.cos(a))]
    ctl = _tracking(config(course__points=pts, lookahead=1.0))
    res = ctl.step(PoseSample(0.0, radius * math.sin(0.5), radius * (1 - math.cos(0.5)), 0.5),
                   0.0)
    assert res.feedforward == pytest.approx(math.atan(0.9 / radius), rel=0.01)


def test_angle_and_rate_limits() -> None:
    """A huge error gives at most max_angle, reached no faster than max_rate."""
    cfg = config(steering__max_angle=0.4, steering__max_rate=0.5)
    ctl = _tracking(cfg)
    steers = [ctl.step(PoseSample(k * 0.1, 0.0, 5.0, 0.0), k * 0.1).steering
              for k in range(20)]
    assert min(steers) == pytest.approx(-0.4)
    for a, b in zip(steers, steers[1:]):
        assert abs(b - a) <= 0.5 * 0.1 + 1e-12
    assert steers[1] == pytest.approx(-0.05)


def test_speed_policy_cruise_lateral_accel_and_slew() -> None:
    """Speed ramps at max_accel to cruise and respects the lateral-acceleration limit."""
    cfg = config(speed__cruise=1.2, speed__max_accel=0.4, speed__max_lateral_accel=0.5,
                 speed__slowdown_error=0.0)
    ctl = _tracking(cfg)
    speeds = [ctl.step(PoseSample(k * 0.1, 0.0, 0.0, 0.0), k * 0.1).speed for k in range(60)]
    assert speeds[1] == pytest.approx(0.04)
    assert max(speeds) == pytest.approx(1.2)
    ctl2 = _tracking(cfg)
    res = None
    for k in range(200):
        res = ctl2.step(PoseSample(k * 0.1, 0.0, 3.0, 0.0), k * 0.1)
    assert res is not None and res.angle_saturated
    limit = math.sqrt(0.5 * 0.9 / abs(math.tan(res.steering)))
    assert res.speed == pytest.approx(min(1.2, limit))
    assert res.speed < 1.2


def test_large_error_slows_down() -> None:
    """speed.slowdown_error halves the speed at that error."""
    cfg = config(speed__slowdown_error=0.5, steering__max_angle=1.4,
                 speed__max_lateral_accel=20.0, speed__max_accel=20.0, gains__kp=0.01,
                 gains__kd=0.0, lookahead=0.0)
    ctl = _tracking(cfg)
    res = ctl.step(PoseSample(0.0, 0.0, 0.5, 0.0), 0.0)
    res = ctl.step(PoseSample(0.1, 0.0, 0.5, 0.0), 0.1)
    assert res.speed == pytest.approx(0.5)


def test_states_enable_wait_track_disable() -> None:
    """Disabled -> waiting -> tracking -> disabled, with ramps to zero while not tracking."""
    ctl = Controller(config(), enabled=False)
    assert ctl.step(PoseSample(0.0, 0.0, 0.0, 0.0), 0.0).state == State.DISABLED
    ctl.enable(True, 0.0)
    assert ctl.state == State.WAITING
    for k in range(1, 40):
        res = ctl.step(PoseSample(k * 0.1, 0.0, 0.0, 0.0), k * 0.1)
    assert res.state == State.TRACKING and res.speed > 0.5
    ctl.enable(False, 4.0)
    before = res.speed
    res = ctl.step(None, 4.1)  # 0.2 s after the last command at 3.9 s
    assert res.state == State.DISABLED
    assert res.speed == pytest.approx(before - ctl.config.speed.max_decel * 0.2)


def test_watchdog_stop_ramp_and_recovery() -> None:
    """No pose for the timeout -> stopped, speed ramps from then at max_decel, recovery."""
    cfg = config(watchdog__timeout=0.3, watchdog__recovery_count=3)
    ctl = _tracking(cfg)
    t = 0.0
    for k in range(50):
        t = k * 0.05
        res = ctl.step(PoseSample(t, 0.0, 0.0, 0.0), t)
    v0 = res.speed
    res = ctl.step(None, t + 0.25)
    assert res.state == State.TRACKING
    res = ctl.step(None, t + 0.35)
    assert res.state == State.STOPPED and ctl.watchdog_stops == 1
    # The ramp starts at the stop: the first stop command steps down by one watchdog period
    # (min(timeout/4, 1/diagnostics.rate) = 0.075 s) of deceleration, the next by the time
    # since that command.
    assert res.speed == pytest.approx(v0 - cfg.speed.max_decel * 0.075)
    res = ctl.step(None, t + 0.45)
    assert res.speed == pytest.approx(v0 - cfg.speed.max_decel * (0.075 + 0.1))
    states = [ctl.step(PoseSample(t + 1 + 0.05 * k, 0.0, 0.0, 0.0), t + 1 + 0.05 * k).state
              for k in range(4)]
    assert states == [State.STOPPED, State.STOPPED, State.TRACKING, State.TRACKING]


def test_rejected_poses_are_counted_and_ignored() -> None:
    """NaN, stale stamps and the wrong frame are rejected, counted, and not acted on."""
    ctl = _tracking(config(pose_frame='map'))
    ok = ctl.step(PoseSample(1.0, 0.0, 0.1, 0.0, 'map'), 1.0)
    assert ok.accepted
    bad = [PoseSample(1.1, math.nan, 0.0, 0.0, 'map'),
           PoseSample(1.0, 0.0, 2.0, 0.0, 'map'),
           PoseSample(0.95, 0.0, 2.0, 0.0, 'map'),
           PoseSample(1.2, 0.0, 2.0, 0.0, 'odom'),
           PoseSample(math.inf, 0.0, 2.0, 0.0, 'map')]
    for k, sample in enumerate(bad):
        res = ctl.step(sample, 1.1 + 0.01 * k)
        assert not res.accepted and not res.computed
        assert res.steering == ok.steering
    assert ctl.rejected == len(bad)


def test_backwards_jump_resets_and_waits() -> None:
    """A stamp jump back by more than the timeout resets and enters waiting."""
    ctl = _tracking(config(gains__ki=0.5))
    for k in range(100):
        res = ctl.step(PoseSample(100.0 + 0.05 * k, 0.0, 0.3, 0.0), 0.05 * k)
    assert res.i != 0.0
    res = ctl.step(PoseSample(1.0, 0.0, 0.3, 0.0), 5.0)
    assert res.state == State.WAITING
    res = ctl.step(PoseSample(1.05, 0.0, 0.3, 0.0), 5.05)
    assert res.state == State.TRACKING and res.i == 0.0


def test_end_of_course_finishes_and_ramps_down() -> None:
    """Past the last vertex the controller finishes and the speed ramps to zero."""
    ctl = _tracking(config(course__points=[0.0, 0.0, 5.0, 0.0]))
    for k in range(40):
        ctl.step(PoseSample(0.1 * k, 0.1 * k, 0.0, 0.0), 0.1 * k)
    res = ctl.step(PoseSample(4.0, 5.5, 0.0, 0.0), 4.0)
    assert res.state == State.FINISHED
    speeds = [ctl.step(PoseSample(4.0 + 0.1 * k, 6.0, 0.0, 0.0), 4.0 + 0.1 * k).speed
              for k in range(1, 30)]
    assert speeds[-1] == 0.0 and all(b <= a for a, b in zip(speeds, speeds[1:]))


def _ramp_pose(k: int) -> PoseSample:
    """Return the k-th pose of a run drifting left at 0.25 m/s and turning slowly."""
    t = 0.02 * k
    return PoseSample(t, t, 0.1 + 0.25 * t, 0.05 + 0.02 * t)


@pytest.mark.parametrize('change', [
    {'gains.kp': 1.2}, {'gains.kd': 0.6}, {'lookahead': 2.5}, {'target_offset': 0.3},
    {'gains.ki': 0.4}, {'gains.kp': 0.2, 'gains.kd': 0.05, 'lookahead': 0.4},
])
def test_retune_is_bumpless_in_the_unclamped_output(change: dict[str, object]) -> None:
    """A live change does not step the unclamped output (Åström & Hägglund 2006, §3.5).

    Three controllers see the same poses: one never changes, one is retuned live before
    pose 50, one starts with the new values. At pose 50 the retuned one must stay close to
    the unchanged one (difference O(dt)), while the fresh one is far from it.
    """
    cfg = config(gains__ki=0.1)
    new = cfg.replaced(change)
    same, live, fresh = _tracking(cfg), _tracking(cfg), _tracking(new)
    for k in range(50):
        for ctl in (same, live, fresh):
            ctl.step(_ramp_pose(k), _ramp_pose(k).stamp)
    live.retune(new, 1.0)
    outputs = [ctl.step(_ramp_pose(50), 1.0).unclamped for ctl in (same, live, fresh)]
    jump_avoided = abs(outputs[0] - outputs[2])
    assert jump_avoided > 0.01
    assert abs(outputs[1] - outputs[0]) < 0.1 * jump_avoided


def test_retune_offset_decays_with_blend_time() -> None:
    """Without integral action the carried offset decays as exp(-t/blend_time)."""
    cfg = config(gains__ki=0.0, retune__blend_time=0.5)
    ctl = _tracking(cfg)
    for k in range(10):
        ctl.step(PoseSample(0.1 * k, 0.0, 0.2, 0.0), 0.1 * k)
    ctl.retune(cfg.replaced({'gains.kp': 2.0}), 1.0)
    first = ctl.step(PoseSample(1.0, 0.0, 0.2, 0.0), 1.0).blend
    for k in range(1, 6):
        later = ctl.step(PoseSample(1.0 + 0.1 * k, 0.0, 0.2, 0.0), 1.0 + 0.1 * k).blend
    assert first != 0.0
    assert later == pytest.approx(first * math.exp(-1.0), rel=1e-6)


def test_read_only_change_is_refused_and_state_kept() -> None:
    """A safety limit cannot change live; the controller keeps its config."""
    cfg = config()
    ctl = _tracking(cfg)
    with pytest.raises(ConfigError, match='steering.max_angle: cannot change while running'):
        ctl.retune(cfg.replaced({'steering.max_angle': 0.3, 'gains.kp': 2.0}))
    assert ctl.config == cfg


def test_closed_loop_integral_without_guard_overshoots_more() -> None:
    """Common practice, no source: large ki without a windup guard overshoots far more."""
    def overshoot(method: str) -> float:
        cfg = config(gains__ki=0.6, integral__method=method, integral__bound=3.0,
                     integral__tracking_time=0.3)
        run = bicycle_run(cfg, y0=1.0, duration=30.0)
        return max(0.0, -min(y for _, y, _ in run))
    guarded, unguarded = overshoot('tracking'), overshoot('off')
    assert unguarded > 2.0 * guarded
    assert unguarded > 0.3


def test_timer_tick_keeps_the_last_command_while_tracking() -> None:
    """A timer tick inside the timeout repeats the last command without computing."""
    ctl = _tracking()
    res = ctl.step(PoseSample(0.0, 0.0, 0.2, 0.0), 0.0)
    tick = ctl.step(None, 0.1)
    assert not tick.computed and tick.steering == res.steering and tick.speed == res.speed
