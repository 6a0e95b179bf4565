# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""The replay benchmark measures a bag it makes; no speed is asserted here."""

from __future__ import annotations

from pathlib import Path

from corridor_pid.replay.bench import bench_poses, replay_benchmark
from corridor_pid.replay.report import TIMING_PARTS


def test_benchmark_reports_rate_and_parts(tmp_path: Path) -> None:
    """A small run: counts, the parts of the time, the reference decode, no leftovers."""
    result = replay_benchmark(2000, storage='mcap', workdir=tmp_path)
    assert result.poses == 2000 and result.storage == 'mcap'
    assert result.poses_per_second == 2000 / result.seconds
    assert set(result.parts) == set(TIMING_PARTS) - {'write'}
    assert sum(result.parts.values()) <= result.seconds
    assert result.rosbags_decode_seconds is not None and result.rosbags_decode_seconds > 0.0
    assert result.as_dict()['ok'] == result.ok
    assert list(tmp_path.iterdir()) == []


def test_bench_poses_are_a_weave_about_the_centreline() -> None:
    """100 Hz stamps, 5 ms arrival delay, +/-0.15 m weave plus 1 cm noise."""
    poses = bench_poses(3000)
    stamps = [p.stamp_ns for p in poses]
    assert {b - a for a, b in zip(stamps, stamps[1:])} == {10_000_000}
    assert all(p.receive_ns - p.stamp_ns == 5_000_000 for p in poses)
    assert max(abs(p.y) for p in poses) < 0.2
    assert max(p.y for p in poses) > 0.12
