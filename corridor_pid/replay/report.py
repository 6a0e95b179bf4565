# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Replay a bag through the controller core: read, drive, score, compare, write.

:func:`replay_bag` is what ``corridor-pid replay`` runs; the benchmark times its parts.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
import time

from corridor_pid.core.config import Config
from corridor_pid.replay.bag import (
    clock_connections,
    clock_values,
    opened_bag,
    pose_connections,
    raw_streams,
)
from corridor_pid.replay.commands import command_series, command_topics, CommandSeries
from corridor_pid.replay.compare import command_differences, CommandDifference
from corridor_pid.replay.drive import replayed_run, ReplayedRun
from corridor_pid.replay.output import write_replayed_bag
from corridor_pid.replay.score import recorded_metrics, recorded_path
from corridor_pid.replay.sets import parameter_event_connections, recorded_sets
from corridor_pid.replay.track import pose_track, PoseTrack
from corridor_pid.sim.metrics import Metrics
import numpy as np

__all__ = ['TIMING_PARTS', 'ReplayReport', 'replay_bag']

TIMING_PARTS = ('read', 'decode', 'step', 'score', 'compare', 'write')
"""The parts of a replay whose wall time :attr:`ReplayReport.timings` holds (s)."""


@dataclass(frozen=True)
class ReplayReport:
    """The outcome of one replay: metrics, comparison, and the data behind them."""

    bag: str
    track: PoseTrack
    run: ReplayedRun
    metrics: Metrics
    lateral: np.ndarray
    """Recorded lateral offset of every pose from the params file's course (m)."""
    recorded: list[CommandSeries]
    comparison: list[CommandDifference]
    corridor_width: float | None = None
    """Corridor width the ``diverged`` metric used (m), if any."""
    written: str | None = None
    written_counts: dict[str, int] = field(default_factory=dict)
    timings: dict[str, float] = field(default_factory=dict)
    """Wall time of each part of :data:`TIMING_PARTS` (s)."""
    followed: str | None = None
    """The node whose recorded parameter sets were followed ('' when following found none;
    None when not following)."""

    @property
    def duration(self) -> float:
        """Return the span of the pose stamps (s)."""
        return float(self.track.stamp[-1] - self.track.stamp[0])

    def as_dict(self) -> dict[str, object]:
        """Return the JSON object ``replay --json`` prints: the metrics, then the rest."""
        out: dict[str, object] = dict(self.metrics.as_dict())
        out.update({
            'bag': self.bag,
            'pose_topic': self.track.topic,
            'pose_type': self.track.kind,
            'stamps': self.track.stamps,
            'poses': len(self.track),
            'duration': self.duration,
            'rejected_poses': self.run.rejected,
            'comparison': {d.channel: d.as_dict() for d in self.comparison},
            'written': self.written,
            'ticks': self.run.ticks,
            'recorded_sets': self.recorded_sets(),
        })
        return out

    def recorded_sets(self) -> dict[str, object] | None:
        """Return the followed sets: node and, per set, time [s from the first pose] and values.

        None when the replay did not follow recorded sets.
        """
        if self.followed is None:
            return None
        origin = float(self.track.time[0])
        return {'node': self.followed or None,
                'applied': [{'time': change.time_ns * 1e-9 - origin,
                             'values': {k: list(v) if isinstance(v, tuple) else v
                                        for k, v in change.values.items()}}
                            for change in self.run.sets]}


def replay_bag(bag: str | Path, config: Config, *, pose_topic: str | None = None,
               pose_kind: str | None = None, stamps: str = 'header',
               corridor_width: float | None = None, write: str | Path | None = None,
               tolerances: Mapping[str, float] | None = None,
               tick_period: float | None = None, follow_sets: bool = False,
               sets_node: str | None = None) -> ReplayReport:
    """Return the replay of the bag at ``bag`` through a controller with ``config``.

    Args:
        bag: the rosbag2 bag directory (sqlite3 or MCAP).
        config: controller configuration (the params file's).
        pose_topic: the pose topic; None picks the only pose-typed topic, else ``/pose``.
        pose_kind: expected pose kind ('pose_stamped', 'pose_with_covariance', 'odometry').
        stamps: 'header' or 'receive' (see :mod:`corridor_pid.replay.track`).
        corridor_width: for the ``diverged`` metric (m).
        write: write the source topics plus the replayed commands to this new bag.
        tolerances: divergence tolerance per command channel.
        tick_period: timer period between poses (s); default the node's watchdog period.
            The ticks fall on the recorded ``/clock`` when the bag holds one.
        follow_sets: apply the controller node's recorded parameter sets at their times.
        sets_node: the controller node whose sets to follow (default: the only node whose
            parameter events change controller parameters).

    Raises:
        ReplayError: the bag cannot be read or replayed, a recorded set to follow cannot be
            found or is refused, or ``write`` cannot be written.

    """
    timings: dict[str, float] = {}
    clock = time.perf_counter()

    def lap(part: str) -> None:
        nonlocal clock
        now = time.perf_counter()
        timings[part] = now - clock
        clock = now

    with opened_bag(bag) as reader:
        poses = pose_connections(reader, pose_topic, pose_kind)
        topic = poses[0].topic
        commands = command_topics(reader, topic)
        ros_clock = clock_connections(reader)
        events = parameter_event_connections(reader) if follow_sets else []
        streams = raw_streams(reader, [*poses, *commands.connections(), *ros_clock, *events])
    lap('read')
    track = pose_track(streams[topic], stamps)
    recorded = command_series(streams, commands)
    clock_ns = clock_values(streams[ros_clock[0].topic]) if ros_clock else None
    node, sets = (recorded_sets([streams[events[0].topic]], sets_node) if follow_sets
                  else (None, []))
    del streams
    lap('decode')
    run = replayed_run(track, config, tick_period, clock_ns=clock_ns, sets=sets)
    lap('step')
    path = recorded_path(track, config)
    metrics = recorded_metrics(track, run, config, corridor_width, path)
    lap('score')
    comparison = command_differences(recorded, run, config.vehicle.wheelbase,
                                     float(track.time[0]), tolerances)
    lap('compare')
    written_counts: dict[str, int] = {}
    if write is not None:
        written_counts = write_replayed_bag(bag, write, run, track, config.vehicle.wheelbase)
        lap('write')
    return ReplayReport(str(bag), track, run, metrics, path[0], recorded, comparison,
                        corridor_width, None if write is None else str(write),
                        written_counts, timings,
                        (node or '') if follow_sets else None)
