# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Drive the core controller through a recorded pose track, as the node would have.

The controller is enabled before the first pose (so it tracks from the first accepted one).
Every pose is one ``Controller.step(sample, t)`` with ``t`` its receive time (the node clock
at arrival, see :mod:`corridor_pid.replay.track`). Between poses the node's watchdog timer
ticks ``Controller.step(None, t)``:

- on the recorded ``/clock`` when the bag holds one (the node ran under ``use_sim_time``):
  a timer whose deadlines are the multiples of
  :func:`~corridor_pid.core.timing.watchdog_tick` fires at the first clock value at or
  after each deadline, at that clock value, as an rcl timer does on ROS time (a clock jump
  over several deadlines fires it once, and its next deadline stays on the multiples;
  :func:`clock_ticks`). At equal times the tick comes first: the clock that made it due
  arrived before the pose;
- otherwise at the multiples of the period on the bag clock; at equal times the pose steps
  first, as in the simulator.

While tracking, the commands computed from poses do not depend on the phase of the ticks
(a tick then sends nothing). Right after a watchdog stop they can: the first commands are
slew-limited from the last ramp-down tick, so a node whose timer ran at another phase
differs from the replay by at most one tick interval of slew until the limits let go.

Recorded parameter sets (``replay --follow-recorded-sets``, :mod:`corridor_pid.replay.sets`)
apply at their times through the node's validation path: ``config_from_params(values,
base=<config in force>)`` then ``Controller.retune``. At equal times a set comes after a
tick on the recorded clock and before a pose.
"""

from __future__ import annotations

from collections.abc import Sequence
import math
from typing import NamedTuple

from corridor_pid.core.config import Config, config_from_params
from corridor_pid.core.controller import Controller, PoseSample, StepResult
from corridor_pid.core.errors import ConfigError, ReplayError
from corridor_pid.core.timing import watchdog_tick
from corridor_pid.replay.sets import RecordedSet
from corridor_pid.replay.track import PoseTrack
import numpy as np

__all__ = ['TICK_SOURCES', 'ReplayedRun', 'clock_ticks', 'replayed_run']

TICK_SOURCES = ('period', 'clock')
"""Where the replay's timer ticks fall: multiples of the period, or the recorded /clock."""


class ReplayedRun(NamedTuple):
    """Every controller step of a replay, in order (one array element per step)."""

    time: np.ndarray
    """Node clock of the step (s; the bag's receive-time clock)."""
    pose_index: np.ndarray
    """Index of the pose the step took, -1 for a timer tick."""
    steering: np.ndarray
    """Limited steering command (rad)."""
    speed: np.ndarray
    """Limited speed command (m/s)."""
    state: list[str]
    """Controller state after the step."""
    computed: np.ndarray
    """A new command was computed from a pose in the step."""
    accepted: np.ndarray
    angle_saturated: np.ndarray
    rate_saturated: np.ndarray
    error: np.ndarray
    """Lateral error e of the step (m)."""
    rejected: int
    """Poses the controller rejected (non-finite, wrong frame, stale stamp)."""
    watchdog_stops: int
    """Entries into ``stopped``."""
    tick_period: float
    """Timer period between poses (s)."""
    ticks: str = 'period'
    """'clock' (ticks on the recorded /clock) or 'period' (multiples of the period)."""
    sets: tuple[RecordedSet, ...] = ()
    """The recorded parameter sets applied, in order."""

    def pose_steps(self) -> np.ndarray:
        """Return a boolean mask of the steps that took a pose."""
        return np.asarray(self.pose_index >= 0)


def clock_ticks(clock_ns: Sequence[int], period_ns: int) -> list[int]:
    """Return the times [ns] an rcl timer of ``period_ns`` fires on a recorded ROS clock.

    The timer was made at clock 0, so its deadlines are the multiples of the period. At
    each clock value ``c`` (in bag order) that has reached its next deadline it fires once,
    at ``c``, and its next deadline becomes the first multiple after ``c``: a jump of the
    clock over several deadlines fires it once, and it stays on its grid. (ROS 2 Jazzy's
    rcl timer as rclpy 7.1 runs it; see the test that drives rclpy's timer.)
    """
    ticks: list[int] = []
    deadline = period_ns
    for c in clock_ns:
        if c >= deadline:
            ticks.append(c)
            deadline = (c // period_ns + 1) * period_ns
    return ticks


def _period_ticks(first: float, last: float, period: float) -> list[float]:
    """Return the multiples of ``period`` [s] strictly between ``first`` and ``last``."""
    ticks: list[float] = []
    k = math.floor(first / period) + 1
    while (tick := k * period) < last:
        ticks.append(tick)
        k += 1
    return ticks


def _retune(controller: Controller, change: RecordedSet, t: float, origin: float) -> None:
    """Apply one recorded set through the node's validation path (or raise ReplayError)."""
    try:
        controller.retune(config_from_params(change.values, base=controller.config), t)
    except ConfigError as err:
        names = ', '.join(f'{name}={value!r}' for name, value in change.values.items())
        raise ReplayError(
            f'recorded parameter set of {change.node} at {t - origin:.3f} s from the first '
            f'pose ({names}) is refused under these params: {err}') from err


def replayed_run(track: PoseTrack, config: Config, tick_period: float | None = None, *,
                 clock_ns: Sequence[int] | None = None, sets: Sequence[RecordedSet] = ()
                 ) -> ReplayedRun:
    """Return every step of ``config``'s controller driven by the recorded ``track``.

    Args:
        track: the recorded poses.
        config: the controller configuration (course, gains, limits, ...) at the start.
        tick_period: timer period between poses (s); default the node's, see
            :func:`~corridor_pid.core.timing.watchdog_tick`.
        clock_ns: the recorded ``/clock`` values (ns, bag order); None (or empty): ticks
            at the multiples of the period.
        sets: recorded parameter sets to apply at their times (bag order).

    Raises:
        ReplayError: a recorded set that the configuration in force refuses.

    """
    period = watchdog_tick(config) if tick_period is None else tick_period
    controller = Controller(config, enabled=True)
    step = controller.step
    times: list[float] = track.time.tolist()
    stamps: list[float] = track.stamp.tolist()
    xs: list[float] = track.x.tolist()
    ys: list[float] = track.y.tolist()
    yaws: list[float] = track.yaw.tolist()
    frames = track.frame_ids
    n = len(times)
    speeds: list[float | None] = [None] * n if track.speed is None else track.speed.tolist()
    yaw_rates: list[float | None] = (
        [None] * n if track.yaw_rate is None else track.yaw_rate.tolist())
    on_clock = bool(clock_ns is not None and len(clock_ns))
    first, last = (times[0], times[-1]) if n else (0.0, 0.0)
    if on_clock:
        assert clock_ns is not None
        ticks = [ns * 1e-9 for ns in clock_ticks(clock_ns, round(period * 1e9))]
        ticks = [t for t in ticks if first < t <= last]
    else:
        # The node's timer runs on multiples of its period from clock zero (a timer made
        # before the first /clock, under sim time).
        ticks = _period_ticks(first, last, period)
    set_times = [change.time_ns * 1e-9 for change in sets]
    # Order at equal times: on the clock tick < set < pose; else set < pose < tick.
    tick_rank, set_rank, pose_rank = (0, 1, 2) if on_clock else (2, 0, 1)
    results: list[StepResult] = []
    step_times: list[float] = []
    indices: list[int] = []
    applied: list[RecordedSet] = []
    k_tick = k_set = 0
    n_ticks, n_sets = len(ticks), len(sets)
    for i in range(n + 1):
        t = times[i] if i < n else math.inf
        while True:
            tick = ticks[k_tick] if k_tick < n_ticks else math.inf
            at = set_times[k_set] if k_set < n_sets else math.inf
            if k_set < n_sets and (at, set_rank) < min((tick, tick_rank), (t, pose_rank)):
                _retune(controller, sets[k_set], at, first)
                applied.append(sets[k_set])
                k_set += 1
            elif k_tick < n_ticks and (tick, tick_rank) < (t, pose_rank):
                results.append(step(None, tick))
                step_times.append(tick)
                indices.append(-1)
                k_tick += 1
            else:
                break
        if i == n:
            break
        results.append(step(PoseSample(stamps[i], xs[i], ys[i], yaws[i], frames[i],
                                       speeds[i], yaw_rates[i]), t))
        step_times.append(t)
        indices.append(i)
    return ReplayedRun(
        time=np.asarray(step_times, dtype=np.float64),
        pose_index=np.asarray(indices, dtype=np.int64),
        steering=np.fromiter((r.steering for r in results), np.float64, len(results)),
        speed=np.fromiter((r.speed for r in results), np.float64, len(results)),
        state=[r.state.value for r in results],
        computed=np.fromiter((r.computed for r in results), bool, len(results)),
        accepted=np.fromiter((r.accepted for r in results), bool, len(results)),
        angle_saturated=np.fromiter((r.angle_saturated for r in results), bool,
                                    len(results)),
        rate_saturated=np.fromiter((r.rate_saturated for r in results), bool, len(results)),
        error=np.fromiter((r.error for r in results), np.float64, len(results)),
        rejected=controller.rejected,
        watchdog_stops=controller.watchdog_stops,
        tick_period=period,
        ticks='clock' if on_clock else 'period',
        sets=tuple(applied),
    )
