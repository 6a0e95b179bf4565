# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Bag replay: recorded rosbag2 runs (rosbags) through the controller core; no ROS needed.

rosbags (the ``offline`` extra) is imported only when a bag is opened or written.
"""

from __future__ import annotations

from corridor_pid.replay.bench import replay_benchmark, ReplayBenchmark
from corridor_pid.replay.compare import command_differences, CommandDifference
from corridor_pid.replay.drive import replayed_run, ReplayedRun
from corridor_pid.replay.record import RecordedCommand, RecordedPose, write_run_bag
from corridor_pid.replay.report import replay_bag, ReplayReport
from corridor_pid.replay.track import pose_track, PoseTrack

__all__ = [
    'CommandDifference',
    'PoseTrack',
    'RecordedCommand',
    'RecordedPose',
    'ReplayBenchmark',
    'ReplayReport',
    'ReplayedRun',
    'command_differences',
    'pose_track',
    'replay_bag',
    'replay_benchmark',
    'replayed_run',
    'write_run_bag',
]
