# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Bags the project writes read back with rosbags' own reader and with ROS's deserialiser.

External checks: rosbags (PyPI) ``Reader`` with the standard ROS 2 Jazzy type store, and
``rclpy.serialization.deserialize_message`` with the ROS message packages' own type
support: message counts and types as written, every message decodes, values as written.
"""

from __future__ import annotations

import math
from pathlib import Path

from corridor_pid.replay.bag import POSE_TYPES, STORAGES
from corridor_pid.replay.output import REPLAY_TOPICS
from corridor_pid.replay.record import write_run_bag
from corridor_pid.replay.report import replay_bag
import pytest
from replay_helpers import params, recorded_run, RecordedRun
from rosbags.rosbag2 import Reader
from rosbags.typesys import get_typestore, Stores

JAZZY = get_typestore(Stores.ROS2_JAZZY)
CONFIG = params()


@pytest.fixture(scope='module')
def run() -> RecordedRun:
    """Return a short recorded run with a dropout."""
    return recorded_run(CONFIG, duration=6.0, gap=(2.0, 3.0))


def _read_back(path: Path) -> dict[str, tuple[str, list[tuple[int, object]]]]:
    """Return topic -> (type, [(time ns, message)]) read with rosbags' own reader."""
    out: dict[str, tuple[str, list[tuple[int, object]]]] = {}
    with Reader(path) as reader:
        for conn in reader.connections:
            out[conn.topic] = (conn.msgtype, [])
        for conn, ns, data in reader.messages():
            out[conn.topic][1].append((ns, JAZZY.deserialize_cdr(data, conn.msgtype)))
        for conn in reader.connections:
            assert conn.msgcount == len(out[conn.topic][1])
    return out


@pytest.mark.parametrize('storage', STORAGES)
@pytest.mark.parametrize('kind', sorted(POSE_TYPES))
def test_recorded_bag_reads_back_as_written(tmp_path: Path, run: RecordedRun, kind: str,
                                            storage: str) -> None:
    """write_run_bag: topics, types, counts and pose values as written (rosbags reader)."""
    bag = tmp_path / 'bag'
    write_run_bag(bag, run.poses, pose_kind=kind, storage=storage, commands=run.commands)
    assert list(bag.glob('*.mcap' if storage == 'mcap' else '*.db3'))
    back = _read_back(bag)
    assert {t: m for t, (m, _) in back.items()} == {
        '/pose': POSE_TYPES[kind], '/steering_angle': 'std_msgs/msg/Float64',
        '/target_speed': 'std_msgs/msg/Float64', '/cmd_vel': 'geometry_msgs/msg/TwistStamped'}
    poses = back['/pose'][1]
    assert len(poses) == len(run.poses)
    assert len(back['/steering_angle'][1]) == len(run.commands)
    for (ns, msg), pose in zip(poses, run.poses):
        assert ns == pose.receive_ns
        header = msg.header  # type: ignore[attr-defined]
        assert header.stamp.sec * 1_000_000_000 + header.stamp.nanosec == pose.stamp_ns
        assert header.frame_id == pose.frame_id
        body = msg.pose if kind == 'pose_stamped' else msg.pose.pose  # type: ignore[attr-defined]
        assert (body.position.x, body.position.y) == (pose.x, pose.y)
        q = body.orientation
        assert math.isclose(2.0 * math.atan2(q.z, q.w), pose.yaw, abs_tol=1e-12)
    steering = [msg.data for _, msg in back['/steering_angle'][1]]  # type: ignore[attr-defined]
    assert steering == [c.steering for c in run.commands]


@pytest.mark.parametrize('storage', STORAGES)
def test_replayed_bag_holds_the_source_and_the_replay(tmp_path: Path, run: RecordedRun,
                                                      storage: str) -> None:
    """--write: every source message unchanged, plus the replayed topics (rosbags reader)."""
    bag = tmp_path / 'bag'
    write_run_bag(bag, run.poses, storage=storage, commands=run.commands)
    out = tmp_path / 'out'
    report = replay_bag(bag, CONFIG, write=out)
    assert report.written == str(out)
    assert list(out.glob('*.mcap' if storage == 'mcap' else '*.db3'))
    with Reader(bag) as reader:
        source = {(c.topic, ns, bytes(data)) for c, ns, data in reader.messages()}
    with Reader(out) as reader:
        types = {c.topic: c.msgtype for c in reader.connections}
        written = [(c.topic, ns, bytes(data)) for c, ns, data in reader.messages()]
    assert source <= set(written)
    for topic, msgtype in REPLAY_TOPICS.items():
        assert types[topic] == msgtype
    back = _read_back(out)
    steering = back['/replay/steering_angle'][1]
    assert len(steering) == report.written_counts['/replay/steering_angle']
    # One replayed message per pose, plus the ramp-down ticks of the dropout.
    assert len(run.poses) < len(steering) < len(run.poses) + 40
    # The replayed steering at each pose's receive time is the one recorded for it.
    recorded = {c.receive_ns: c.steering for c in run.commands}
    at_poses = [(ns, msg.data)  # type: ignore[attr-defined]
                for ns, msg in steering if ns in recorded]
    assert len(at_poses) == len(run.commands)
    assert all(abs(value - recorded[ns]) < 1e-12 for ns, value in at_poses)
    times = [ns for _, ns, _ in written]
    assert times == sorted(times)


def test_replayed_bag_decodes_with_ros_type_support(tmp_path: Path, run: RecordedRun) -> None:
    """Every written message decodes with rclpy's deserialiser to the rosbags values."""
    from geometry_msgs.msg import PoseStamped, TwistStamped
    from rclpy import serialization
    from std_msgs.msg import Float64

    classes = {'geometry_msgs/msg/PoseStamped': PoseStamped,
               'geometry_msgs/msg/TwistStamped': TwistStamped,
               'std_msgs/msg/Float64': Float64}
    bag = tmp_path / 'bag'
    write_run_bag(bag, run.poses, commands=run.commands)
    out = tmp_path / 'out'
    replay_bag(bag, CONFIG, write=out)
    counts: dict[str, int] = {}
    with Reader(out) as reader:
        for conn, _, data in reader.messages():
            ours = JAZZY.deserialize_cdr(data, conn.msgtype)
            ros = serialization.deserialize_message(bytes(data), classes[conn.msgtype])
            if conn.msgtype == 'std_msgs/msg/Float64':
                assert ros.data == ours.data  # type: ignore[attr-defined]
            elif conn.msgtype == 'geometry_msgs/msg/TwistStamped':
                assert ros.twist.linear.x == ours.twist.linear.x  # type: ignore[attr-defined]
                assert ros.twist.angular.z == ours.twist.angular.z  # type: ignore[attr-defined]
                assert ros.header.stamp.sec == ours.header.stamp.sec  # type: ignore[attr-defined]
            else:
                assert ros.pose.position.x == ours.pose.position.x  # type: ignore[attr-defined]
                assert ros.header.frame_id == ours.header.frame_id  # type: ignore[attr-defined]
            counts[conn.topic] = counts.get(conn.topic, 0) + 1
    assert counts['/pose'] == len(run.poses)
    assert counts['/replay/cmd_vel'] == counts['/replay/steering_angle']


def test_replaying_a_replayed_bag_replaces_the_old_replay(tmp_path: Path,
                                                          run: RecordedRun) -> None:
    """A written bag replays again; its old /replay topics are not copied twice."""
    bag = tmp_path / 'bag'
    write_run_bag(bag, run.poses, commands=run.commands)
    first = tmp_path / 'first'
    replay_bag(bag, CONFIG, write=first)
    second = tmp_path / 'second'
    report = replay_bag(first, params(gains__kp=1.0), write=second)
    assert all(d.topic.startswith('/') and not d.topic.startswith('/replay')
               for d in report.comparison)
    with Reader(second) as reader:
        topics = sorted(c.topic for c in reader.connections)
    assert topics.count('/replay/steering_angle') == 1
    assert len(_read_back(second)['/replay/steering_angle'][1]) == len(
        _read_back(first)['/replay/steering_angle'][1])
