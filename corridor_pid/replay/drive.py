# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Drive the core controller through a recorded pose track, as the node would have.

The controller is enabled before the first pose (so it tracks from the first accepted one).
Every pose is one ``Controller.step(sample, t)`` with ``t`` its receive time (the node clock
at arrival, see :mod:`corridor_pid.replay.track`). Between poses the node's watchdog timer
ticks ``Controller.step(None, t)`` at the multiples of
:func:`~corridor_pid.core.timing.watchdog_period` on the bag clock (where the node's timer
runs under sim time), so a gap in the poses trips the watchdog as it did on the vehicle.
At equal times the pose steps first, as in the simulator.

While tracking, the commands computed from poses do not depend on the phase of the ticks
(a tick then sends nothing). Right after a watchdog stop they can: the first commands are
slew-limited from the last ramp-down tick, so a node whose timer ran at another phase
differs from the replay by at most one tick interval of slew until the limits let go.
"""

from __future__ import annotations

import math
from typing import NamedTuple

from corridor_pid.core.config import Config
from corridor_pid.core.controller import Controller, PoseSample, StepResult
from corridor_pid.core.timing import watchdog_period
from corridor_pid.replay.track import PoseTrack
import numpy as np

__all__ = ['ReplayedRun', 'replayed_run']


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

    def pose_steps(self) -> np.ndarray:
        """Return a boolean mask of the steps that took a pose."""
        return np.asarray(self.pose_index >= 0)


def replayed_run(track: PoseTrack, config: Config, tick_period: float | None = None
                 ) -> ReplayedRun:
    """Return every step of ``config``'s controller driven by the recorded ``track``.

    Args:
        track: the recorded poses.
        config: the controller configuration (course, gains, limits, ...).
        tick_period: timer period between poses (s); default the node's, see
            :func:`~corridor_pid.core.timing.watchdog_period`.

    """
    period = watchdog_period(config) if tick_period is None else tick_period
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
    results: list[StepResult] = []
    step_times: list[float] = []
    indices: list[int] = []
    # The node's timer runs on multiples of its period from clock zero (a timer made
    # before the first /clock, under sim time); the first tick after the first pose:
    ticks = math.floor(times[0] / period) + 1 if n else 1
    next_tick = ticks * period
    for i in range(n):
        t = times[i]
        while next_tick < t:
            results.append(step(None, next_tick))
            step_times.append(next_tick)
            indices.append(-1)
            ticks += 1
            next_tick = ticks * period
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
    )
