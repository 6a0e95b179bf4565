# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Driving the core through a track: tick phase, ticks on a recorded /clock."""

from __future__ import annotations

from pathlib import Path

from corridor_pid.core.timing import watchdog_tick
from corridor_pid.replay.bag import opened_bag, pose_connections, raw_streams
from corridor_pid.replay.drive import clock_ticks, replayed_run
from corridor_pid.replay.record import write_run_bag
from corridor_pid.replay.track import pose_track, PoseTrack
import numpy as np
from replay_helpers import params, recorded_run

CONFIG = params(speed__max_accel=0.3, steering__max_rate=0.4)
"""Slow slew limits, so the limits bind often (ticks used to eat into them)."""


def _track(tmp_path: Path, gap: tuple[float, float] | None) -> PoseTrack:
    bag = tmp_path / 'bag'
    write_run_bag(bag, recorded_run(CONFIG, duration=14.0, y0=0.6, gap=gap).poses)
    with opened_bag(bag) as reader:
        stream = next(iter(raw_streams(reader, pose_connections(reader)).values()))
    return pose_track(stream)


def _pose_commands(track: PoseTrack, period: float) -> tuple[np.ndarray, ...]:
    run = replayed_run(track, CONFIG, period)
    mask = run.computed & run.pose_steps()
    return run.pose_index[mask], run.steering[mask], run.speed[mask], run.rate_saturated[mask]


def test_pose_commands_do_not_depend_on_the_ticks(tmp_path: Path) -> None:
    """Ticks every 13 ms, 75 ms or never: the same command for every pose, bit for bit."""
    track = _track(tmp_path, None)
    index, steering, speed, rate_saturated = _pose_commands(track, 0.013)
    assert index.size == len(track)
    # The rate limit does bind in this run (else the check would be empty).
    assert rate_saturated.any()
    for period in (0.075, 1e9):
        other = _pose_commands(track, period)
        np.testing.assert_array_equal(other[0], index)
        np.testing.assert_array_equal(other[1], steering)
        np.testing.assert_array_equal(other[2], speed)


def test_after_a_watchdog_stop_ticks_matter_only_briefly(tmp_path: Path) -> None:
    """A dropout: equal before it; after it, within one pose interval of slew, then equal.

    While stopped the node sends the ramp down on its timer ticks, so the first commands
    after the recovery are slew-limited from the last tick: their phase shifts those
    commands by at most max_rate (max_accel) times one pose interval, until the limits
    let go.
    """
    track = _track(tmp_path, (4.0, 6.0))
    runs = [_pose_commands(track, period) for period in (0.013, 0.075)]
    index = runs[0][0]
    np.testing.assert_array_equal(runs[1][0], index)
    dt = 0.02  # pose interval of the recording [s]
    before = track.time[index] < track.time[0] + 4.0
    late = track.time[index] > track.time[0] + 11.0  # both ramps done
    for k, limit in ((1, CONFIG.steering.max_rate * dt), (2, CONFIG.speed.max_accel * dt)):
        a, b = runs[0][k], runs[1][k]
        np.testing.assert_array_equal(a[before], b[before])
        assert np.max(np.abs(a - b)) <= limit + 1e-12
        np.testing.assert_array_equal(a[late], b[late])


def test_ticks_fill_the_gaps_only(tmp_path: Path) -> None:
    """Tick steps lie strictly between poses, at the period, from the first pose."""
    track = _track(tmp_path, (4.0, 6.0))
    run = replayed_run(track, CONFIG)
    ticks = run.time[run.pose_index < 0]
    period = watchdog_tick(CONFIG)
    phase = ticks / period  # multiples of the period on the bag clock, as the node's timer
    np.testing.assert_allclose(phase, np.round(phase), atol=1e-4)  # float time at 1.7e9 s
    assert np.all(np.diff(run.time) >= 0.0)
    assert run.pose_index[run.pose_index >= 0].tolist() == list(range(len(track)))


CLOCK_PROBE = [
    20_000_000, 40_000_000, 60_000_000, 80_000_000,      # steps of 20 ms: 75 ms -> 80 ms
    150_000_000,                                         # exactly on a deadline
    160_000_000, 700_000_000,                            # a jump over several deadlines
    750_000_000, 750_000_000, 830_000_000, 1_500_000_000,  # repeat, then a jump onto one
    1_510_000_000, 1_650_000_000,                        # a jump onto the deadline after
    1_660_000_000, 1_800_000_000, 1_801_000_000,         # a jump two deadlines on
]
"""A /clock sequence [ns]: steps, values on deadlines, jumps over and onto deadlines."""


def test_clock_ticks_are_where_an_rcl_timer_fires_on_ros_time() -> None:
    """Ticks on a recorded clock = the firings of rcl's own timer driven by that ROS time.

    Reference: ROS 2 Jazzy's rcl timer (rcl_timer_call, rcl_timer_is_ready in
    rcl/src/rcl/timer.c) run through the installed rclpy: a 75 ms timer of a node on ROS
    time, the clock set to each value in turn and the executor spun until nothing is
    ready; each firing noted at the clock's now.
    """
    import rclpy
    from rclpy.clock_type import ClockType
    from rclpy.context import Context
    from rclpy.executors import SingleThreadedExecutor
    from rclpy.parameter import Parameter
    from rclpy.time import Time

    context = Context()
    rclpy.init(context=context)
    try:
        node = rclpy.create_node(
            'tick_probe', context=context, parameter_overrides=[
                Parameter('use_sim_time', Parameter.Type.BOOL, True)])
        clock = node.get_clock()
        fired: list[int] = []
        node.create_timer(0.075, lambda: fired.append(clock.now().nanoseconds))
        executor = SingleThreadedExecutor(context=context)
        executor.add_node(node)
        for ns in CLOCK_PROBE:
            clock.set_ros_time_override(Time(nanoseconds=ns, clock_type=ClockType.ROS_TIME))
            before = -1
            while before != len(fired):   # spin until no more firings at this clock
                before = len(fired)
                for _ in range(3):
                    executor.spin_once(timeout_sec=0.0)
        executor.shutdown()
        node.destroy_node()
    finally:
        rclpy.try_shutdown(context=context)
    assert fired == clock_ticks(CLOCK_PROBE, 75_000_000)
    assert fired == [80_000_000, 150_000_000, 700_000_000, 750_000_000, 830_000_000,
                     1_500_000_000, 1_650_000_000, 1_800_000_000]


def test_recorded_clock_places_the_ticks_and_so_the_ramp(tmp_path: Path) -> None:
    """A bag with /clock every 20 ms: the stop and every ramp step fall on clock values."""
    from rosbags.typesys import get_typestore, Stores

    store = get_typestore(Stores.ROS2_JAZZY)
    recorded = recorded_run(CONFIG, duration=10.0, y0=0.6, gap=(4.0, 6.0))
    clock_type = store.types['rosgraph_msgs/msg/Clock']
    time_type = store.types['builtin_interfaces/msg/Time']
    first, last = recorded.poses[0].receive_ns, recorded.poses[-1].receive_ns
    # A simulator's clock: every 20 ms, 7 ms after each pose slot (so off the multiples).
    values = list(range(first + 7_000_000, last, 20_000_000))
    bag = tmp_path / 'clock'
    write_run_bag(bag, recorded.poses, others=[
        (ns, '/clock', clock_type(clock=time_type(sec=ns // 1_000_000_000,
                                                  nanosec=ns % 1_000_000_000)))
        for ns in values])
    with opened_bag(bag) as reader:
        stream = next(iter(raw_streams(reader, pose_connections(reader)).values()))
    track = pose_track(stream)
    from corridor_pid.replay.report import replay_bag

    report = replay_bag(bag, CONFIG)
    run = report.run
    assert run.ticks == 'clock' and run.watchdog_stops == 1
    tick_ns = np.rint(run.time[run.pose_index < 0] * 1e9).astype(np.int64)
    expected = [ns for ns in clock_ticks(values, round(watchdog_tick(CONFIG) * 1e9))
                if first < ns <= last]
    assert tick_ns.tolist() == expected
    assert set(tick_ns.tolist()) <= set(values)
    # The same poses without the clock: ticks on the multiples, so the ramp differs.
    plain = replayed_run(track, CONFIG)
    assert plain.ticks == 'period' and plain.watchdog_stops == 1
    stopped = np.array([s == 'stopped' for s in run.state])
    assert stopped.any()
    assert not np.array_equal(run.time[stopped], plain.time[[s == 'stopped'
                                                              for s in plain.state]])
