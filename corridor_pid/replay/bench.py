# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Offline replay rate: how fast a long pose bag is read, decoded, replayed and scored.

The goal (``scripts/bench_replay.py``, ``corridor-pid bench``): a one-hour bag of 100 Hz
poses (360,000 ``PoseStamped``) replayed and scored in under 10 s, i.e. at least 36,000
poses/s. The bag is made here: a delivery cart weaving gently about the centreline of a
straight corridor at 1 m/s, with 1 cm of position noise (demo data, invented).

The figure is the wall time of :func:`corridor_pid.replay.report.replay_bag` from the bag on
disk to the metrics, split into its parts (read, decode, step, score, compare), plus, for
reference, what decoding the same messages one by one with rosbags' deserialiser takes
(the numpy fast path of :mod:`corridor_pid.replay.cdr` replaces it).
"""

from __future__ import annotations

from dataclasses import asdict, dataclass, field
import math
from pathlib import Path
import tempfile
import time

from corridor_pid.core.config import Config, default_config
from corridor_pid.replay.bag import opened_bag, pose_connections, raw_streams
from corridor_pid.replay.record import RecordedPose, write_run_bag
from corridor_pid.replay.report import replay_bag
from corridor_pid.replay.track import decoded_pose_fields
import numpy as np

__all__ = ['GOAL_POSES_PER_SECOND', 'ReplayBenchmark', 'bench_poses', 'replay_benchmark']

GOAL_POSES_PER_SECOND = 36_000.0
"""360,000 poses (one hour at 100 Hz) in 10 s."""

BASE_NS = 1_767_225_600_000_000_000
"""Bag clock at the start of the benchmark run (ns)."""


@dataclass(frozen=True)
class ReplayBenchmark:
    """The measured replay rate and where the time goes."""

    poses: int
    storage: str
    seconds: float
    """Wall time of the whole replay, bag on disk to metrics (s)."""
    poses_per_second: float
    parts: dict[str, float] = field(default_factory=dict)
    """Wall time of each part of the replay (s): read, decode, step, score, compare."""
    rosbags_decode_seconds: float | None = None
    """Decoding the same poses one by one with rosbags instead (s), for reference."""
    goal_poses_per_second: float = GOAL_POSES_PER_SECOND

    @property
    def ok(self) -> bool:
        """Return whether the rate meets the goal."""
        return self.poses_per_second >= self.goal_poses_per_second

    def as_dict(self) -> dict[str, object]:
        """Return the figures as a plain dict (JSON-ready)."""
        out = asdict(self)
        out['ok'] = self.ok
        return out


def bench_poses(count: int, rate: float = 100.0, seed: int = 0) -> list[RecordedPose]:
    """Return ``count`` poses of the benchmark run at ``rate`` Hz (demo data, invented).

    A cart at 1 m/s weaving +/-0.15 m about the x-axis with a 20 s period, 1 cm position
    and 0.01 rad heading noise, poses received 5 ms after their stamp.
    """
    rng = np.random.default_rng(seed)
    k = np.arange(count)
    dt_ns = int(round(1e9 / rate))
    stamp_ns = BASE_NS + k * dt_ns
    t = k * (dt_ns * 1e-9)
    omega = 2.0 * math.pi / 20.0
    x = t + rng.normal(0.0, 0.01, count)
    y = 0.15 * np.sin(omega * t) + rng.normal(0.0, 0.01, count)
    yaw = np.arctan(0.15 * omega * np.cos(omega * t)) + rng.normal(0.0, 0.01, count)
    return [RecordedPose(int(s) + 5_000_000, int(s), float(a), float(b), float(c))
            for s, a, b, c in zip(stamp_ns.tolist(), x.tolist(), y.tolist(), yaw.tolist())]


def _rosbags_decode_seconds(bag: Path) -> float:
    with opened_bag(bag) as reader:
        streams = raw_streams(reader, pose_connections(reader))
    stream = next(iter(streams.values()))
    start = time.perf_counter()
    decoded_pose_fields(stream)
    return time.perf_counter() - start


def replay_benchmark(poses: int = 360_000, *, rate: float = 100.0, storage: str = 'sqlite3',
                     config: Config | None = None, workdir: str | Path | None = None,
                     reference: bool = True) -> ReplayBenchmark:
    """Return the replay rate of a ``poses``-long pose bag made for the purpose.

    Args:
        poses: number of poses in the bag (360,000 = one hour at 100 Hz).
        rate: pose rate (Hz).
        storage: 'sqlite3' or 'mcap'.
        config: controller configuration (default: the built-in defaults).
        workdir: folder for the temporary bag (default: the system's temporary folder).
        reference: also time rosbags' per-message deserialiser on the same poses.

    """
    cfg = default_config() if config is None else config
    with tempfile.TemporaryDirectory(dir=workdir, prefix='corridor_pid-bench-') as tmp:
        bag = Path(tmp) / 'run'
        write_run_bag(bag, bench_poses(poses, rate), storage=storage)
        start = time.perf_counter()
        report = replay_bag(bag, cfg)
        seconds = time.perf_counter() - start
        reference_seconds = _rosbags_decode_seconds(bag) if reference else None
    return ReplayBenchmark(poses, storage, seconds, poses / seconds, dict(report.timings),
                           reference_seconds)
