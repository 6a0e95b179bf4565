# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""The MCAP recorder: bytes serialized by rclpy, read back by rosbags (reference reader)."""

from __future__ import annotations

from pathlib import Path

from corridor_pid.core.errors import DemoError
from corridor_pid.demo.recording import BagRecorder
from geometry_msgs.msg import PoseStamped
import pytest
from rclpy.serialization import serialize_message
from rosbags.rosbag2 import Reader
from rosbags.typesys import get_typestore, Stores
from std_msgs.msg import Float64


def test_rclpy_bytes_come_back_through_rosbags(tmp_path: Path) -> None:
    """What rclpy serializes, rosbags reads from the MCAP bag with the same values."""
    bag = tmp_path / 'run'
    recorder = BagRecorder(bag, {'/pose': 'geometry_msgs/msg/PoseStamped',
                                 '/steering_angle': 'std_msgs/msg/Float64'})
    for k in range(3):
        pose = PoseStamped()
        pose.header.stamp.sec, pose.header.stamp.nanosec = 7, 20_000_000 * k
        pose.header.frame_id = 'map'
        pose.pose.position.x = 0.5 * k
        pose.pose.orientation.w = 1.0
        recorder.write('/pose', 1_000 + k, serialize_message(pose))
        recorder.write('/steering_angle', 1_001 + k, serialize_message(Float64(data=-0.1 * k)))
    recorder.close()
    recorder.write('/pose', 5_000, b'ignored after close')
    assert recorder.counts == {'/pose': 3, '/steering_angle': 3}
    store = get_typestore(Stores.ROS2_JAZZY)
    with Reader(bag) as reader:
        assert {c.topic: c.msgtype for c in reader.connections} == {
            '/pose': 'geometry_msgs/msg/PoseStamped', '/steering_angle': 'std_msgs/msg/Float64'}
        seen = [(conn.topic, ns, store.deserialize_cdr(raw, conn.msgtype))
                for conn, ns, raw in reader.messages()]
    poses = [(ns, msg) for topic, ns, msg in seen if topic == '/pose']
    assert [ns for ns, _ in poses] == [1_000, 1_001, 1_002]
    assert [msg.pose.position.x for _, msg in poses] == [0.0, 0.5, 1.0]
    assert [msg.header.stamp.nanosec for _, msg in poses] == [0, 20_000_000, 40_000_000]
    assert poses[0][1].header.frame_id == 'map'
    steering = [msg.data for topic, _, msg in seen if topic == '/steering_angle']
    assert steering == pytest.approx([0.0, -0.1, -0.2])


def test_existing_bag_folder_is_refused(tmp_path: Path) -> None:
    """A bag is never written over: an existing folder is a DemoError naming it."""
    (tmp_path / 'run').mkdir()
    with pytest.raises(DemoError, match=r"run'.*exists"):
        BagRecorder(tmp_path / 'run', {'/pose': 'geometry_msgs/msg/PoseStamped'})
