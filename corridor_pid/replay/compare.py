# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Compare the commands a bag recorded with the ones the replayed controller gives.

Each recorded command is paired with the replayed command in force at its receive time:
the output of the last replay step (pose or timer tick) at or before it on the bag clock.
Recorded commands from before the first pose have no partner and are not compared. Per
channel the comparison gives the RMS and the largest absolute difference (recorded minus
replayed) and the first time, in seconds from the first pose, at which the difference
exceeds the channel's tolerance.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import NamedTuple

from corridor_pid.replay.commands import CommandSeries
from corridor_pid.replay.drive import ReplayedRun
import numpy as np

__all__ = ['DEFAULT_TOLERANCES', 'CommandDifference', 'command_differences',
           'replayed_channel']

DEFAULT_TOLERANCES: dict[str, float] = {'steering': 0.01, 'speed': 0.05, 'yaw_rate': 0.02}
"""Difference above which a channel counts as diverged: rad, m/s, rad/s."""


class CommandDifference(NamedTuple):
    """Recorded versus replayed commands on one channel (units of the channel)."""

    channel: str
    topic: str
    compared: int
    """Recorded commands compared."""
    rms_difference: float | None
    max_difference: float | None
    first_divergence_time: float | None
    """Seconds from the first pose to the first difference above ``tolerance``; None if
    the difference never exceeds it."""
    tolerance: float

    def as_dict(self) -> dict[str, object]:
        """Return the comparison as a plain dict (JSON-ready)."""
        return self._asdict()


def replayed_channel(run: ReplayedRun, channel: str, wheelbase: float) -> np.ndarray:
    """Return the replayed command of ``channel`` at every step (rad, m/s or rad/s).

    ``yaw_rate`` is what ``cmd_vel`` carries: speed * tan(steering) / wheelbase.
    """
    if channel == 'steering':
        return run.steering
    if channel == 'speed':
        return run.speed
    if channel == 'yaw_rate':
        return np.asarray(run.speed * np.tan(run.steering) / wheelbase)
    raise ValueError(f'unknown command channel {channel!r}')


def command_differences(recorded: Sequence[CommandSeries], run: ReplayedRun,
                        wheelbase: float, start: float,
                        tolerances: Mapping[str, float] | None = None
                        ) -> list[CommandDifference]:
    """Return the difference of every recorded channel from the replayed commands.

    Args:
        recorded: the recorded command channels.
        run: the replay.
        wheelbase: for the yaw rate of cmd_vel (m).
        start: time of the first pose (s, bag clock), the origin of divergence times.
        tolerances: per channel; :data:`DEFAULT_TOLERANCES` for channels not given.

    """
    limits = dict(DEFAULT_TOLERANCES)
    limits.update(tolerances or {})
    out: list[CommandDifference] = []
    for series in recorded:
        tol = limits[series.channel]
        replayed = replayed_channel(run, series.channel, wheelbase)
        index = np.searchsorted(run.time, series.time, side='right') - 1
        paired = index >= 0
        diff = series.value[paired] - replayed[index[paired]]
        times = series.time[paired]
        if diff.size == 0:
            out.append(CommandDifference(series.channel, series.topic, 0, None, None, None,
                                         tol))
            continue
        magnitude = np.abs(diff)
        over = np.flatnonzero(magnitude > tol)
        first = float(times[over[0]] - start) if over.size else None
        out.append(CommandDifference(
            series.channel, series.topic, int(diff.size),
            float(np.sqrt(np.mean(diff * diff))), float(np.max(magnitude)), first, tol))
    return out
