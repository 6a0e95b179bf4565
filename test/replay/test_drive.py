# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Driving the core through a track: commands do not depend on the watchdog tick phase."""

from __future__ import annotations

from pathlib import Path

from corridor_pid.core.timing import watchdog_period
from corridor_pid.replay.bag import opened_bag, pose_connections, raw_streams
from corridor_pid.replay.drive import replayed_run
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
    period = watchdog_period(CONFIG)
    phase = ticks / period  # multiples of the period on the bag clock, as the node's timer
    np.testing.assert_allclose(phase, np.round(phase), atol=1e-4)  # float time at 1.7e9 s
    assert np.all(np.diff(run.time) >= 0.0)
    assert run.pose_index[run.pose_index >= 0].tolist() == list(range(len(track)))
