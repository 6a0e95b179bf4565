# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""The closed loop: which settings win, timing of delays, determinism, watchdog stops."""

from __future__ import annotations

from corridor_pid.core.errors import ConfigError
from corridor_pid.sim.loop import simulate, TRACE_COLUMNS, watchdog_period
import numpy as np
import pytest
from sim_helpers import params, scenario


def test_scenario_sets_course_and_cruise_params_set_the_rest() -> None:
    """The mission (course, cruise speed) comes from the scenario, all else from params."""
    sc = scenario(course={'points': [[0.0, 0.0], [30.0, 0.0], [40.0, 3.0]]}, speed=0.8,
                  vehicle__wheelbase=1.1)
    own = params(gains__kp=0.7, vehicle__wheelbase=0.95, speed__cruise=1.2,
                 course__points=[0.0, 0.0, 5.0, 5.0])
    run = simulate(sc, own)
    assert run.config.course.points == (0.0, 0.0, 30.0, 0.0, 40.0, 3.0)
    assert run.config.speed.cruise == 0.8
    assert run.config.gains.kp == 0.7
    assert run.config.vehicle.wheelbase == 0.95      # the controller's belief stays its own
    # The plant runs the scenario's vehicle: steady speed is the mission's cruise.
    assert run.trace['speed'][-1] == pytest.approx(0.8, abs=0.02)


def test_straight_scenario_clears_a_course_in_the_params() -> None:
    """A scenario without course drives the controller along the x-axis."""
    run = simulate(scenario(), params(course__points=[0.0, 0.0, 5.0, 5.0]))
    assert run.config.course.points == ()


def test_cruise_above_the_params_speed_limit_is_refused() -> None:
    """A mission faster than speed.max of the params is a configuration error."""
    with pytest.raises(ConfigError, match=r'speed\.cruise: 1\.4 exceeds speed\.max 1\.2'):
        simulate(scenario(speed=1.4), params(speed__max=1.2))


def test_trace_has_every_documented_column_and_a_row_per_pose_slot() -> None:
    """One row at t = 0 and one per pose slot up to the duration."""
    run = simulate(scenario(pose_delay=0.03), params())
    trace = run.trace
    assert list(trace) == [name for name, _, _ in TRACE_COLUMNS]
    # 50 Hz over 20 s: slot 998 arrives at 19.96 + 0.03 = 19.99; slot 999 after the end.
    assert len(trace['t']) == 1 + 999
    assert trace['t'][0] == 0.0
    assert trace['t'][1] == pytest.approx(0.03)
    assert np.all(np.diff(trace['t']) > 0.0)


def test_same_seed_same_run_other_seed_other_run() -> None:
    """The run is a pure function of its inputs; the seed selects the noise."""
    noisy = scenario(pose_noise={'position': 0.02, 'heading': 0.01, 'seed': 9},
                     pose_delay=0.04, dropouts=[[5.0, 5.5]])
    a, b = simulate(noisy, params()), simulate(noisy, params())
    for name in a.trace:
        assert np.array_equal(a.trace[name], b.trace[name]), name
    assert a.metrics == b.metrics
    other = scenario(pose_noise={'position': 0.02, 'heading': 0.01, 'seed': 10},
                     pose_delay=0.04, dropouts=[[5.0, 5.5]])
    assert not np.array_equal(simulate(other, params()).trace['lateral'], a.trace['lateral'])


def test_result_does_not_depend_on_the_integration_step() -> None:
    """A ten times finer plant step changes the path by far less than a millimetre."""
    sc = scenario(course={'points': [[0.0, 0.0], [8.0, 0.0], [12.0, 1.0], [30.0, 1.0]]})
    coarse = simulate(sc, params(), max_step=0.005)
    fine = simulate(sc, params(), max_step=0.0005)
    np.testing.assert_allclose(coarse.trace['lateral'], fine.trace['lateral'], atol=1e-5)


def test_steering_dead_time_and_pose_delay() -> None:
    """The first pose acts after pose_delay; the wheels move steer_delay after that."""
    sc = scenario(pose_delay=0.04, vehicle__steer_delay=0.1)
    run = simulate(sc, params())
    times = [t for t, result in run.steps if result.computed]
    assert times[0] == pytest.approx(0.04)
    np.testing.assert_allclose(np.diff(times[:50]), 0.02, atol=1e-9)
    # The wheels stay put until the first non-zero command has spent the dead time.
    first = next(t for t, result in run.steps if result.steering != 0.0)
    t, steer = run.trace['t'], run.trace['steer']
    assert np.all(steer[t <= first + 0.1 + 1e-9] == 0.0)
    assert np.all(steer[(t > first + 0.1 + 1e-9) & (t < 1.0)] != 0.0)


def test_dropout_longer_than_the_watchdog_stops_the_vehicle() -> None:
    """No pose for 2 s (watchdog 0.3 s): the cart stops, counts one stop, then resumes."""
    sc = scenario(dropouts=[[8.0, 10.0]])
    run = simulate(sc, params(watchdog__timeout=0.3, speed__max_decel=1.0))
    trace = run.trace
    during = (trace['t'] > 9.7) & (trace['t'] < 10.0)
    assert np.all(trace['state'][during] == 'stopped')
    assert np.all(trace['speed'][during] < 0.05)
    assert run.metrics.watchdog_stops == 1
    assert trace['state'][-1] == 'tracking'
    assert trace['speed'][-1] == pytest.approx(1.0, abs=0.02)


def test_watchdog_stops_within_timeout_and_one_timer_period() -> None:
    """The stop comes no later than timeout + watchdog period after the last pose."""
    sc = scenario(dropouts=[[8.0, 10.0]])
    cfg = params(watchdog__timeout=0.4, diagnostics__rate=2.0)
    run = simulate(sc, cfg)
    assert watchdog_period(cfg) == pytest.approx(0.1)
    last_pose = max(t for t, result in run.steps if result.accepted and t < 8.5)
    first_stop = min(t for t, result in run.steps if result.state.value == 'stopped')
    assert last_pose + 0.4 < first_stop <= last_pose + 0.4 + 0.1 + 1e-9


def test_fixed_rate_mode_computes_on_the_control_timer() -> None:
    """With control.rate the controller computes every 1/rate on the latest pose."""
    run = simulate(scenario(pose_rate=50.0), params(control__rate=20.0))
    computed = [t for t, result in run.steps if result.computed]
    np.testing.assert_allclose(np.diff(computed), 0.05, atol=1e-9)
    # One row at t = 0 and one per control tick up to 20 s.
    assert len(run.trace['t']) == 1 + 400
    assert run.metrics.final_lateral_error < 0.05


def test_dropout_shorter_than_the_watchdog_does_not_stop() -> None:
    """A gap of 0.2 s under a 0.3 s timeout is ridden through."""
    run = simulate(scenario(dropouts=[[8.0, 8.2]]), params(watchdog__timeout=0.3))
    assert run.metrics.watchdog_stops == 0
    assert set(run.trace['state'][1:]) == {'tracking'}


def test_diverged_is_reported_against_the_corridor_width() -> None:
    """A vehicle steered the wrong way leaves the corridor: diverged is true."""
    # kp = 0 and a constant trim steer left: the cart circles off the centreline.
    run = simulate(scenario(), params(gains__kp=0.0, lookahead=0.0, steering__trim=0.1))
    assert run.metrics.diverged is True
    assert simulate(scenario(), params()).metrics.diverged is False
    assert simulate(scenario(corridor_width=None), params()).metrics.diverged is None
