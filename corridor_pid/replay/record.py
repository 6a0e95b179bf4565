# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Write a run (poses and the commands sent) as a rosbag2 bag, as a vehicle would record it.

Used to record simulated runs (:func:`sim_recording` turns a
:class:`~corridor_pid.sim.loop.SimResult` into what a bag on the vehicle would hold), by the
benchmark, and by tests. The poses go to one pose
topic (``PoseStamped``, ``PoseWithCovarianceStamped`` or ``Odometry``); the commands to the
node's output topics in the pose topic's namespace: ``steering_angle`` and ``target_speed``
(``std_msgs/Float64``) and ``cmd_vel`` (``TwistStamped`` or ``Twist``). Every message is
built and serialized with rosbags' standard Jazzy type store.
"""

from __future__ import annotations

from collections.abc import Sequence
import math
from pathlib import Path
from typing import Any, NamedTuple, TYPE_CHECKING

from corridor_pid.core.errors import ReplayError
from corridor_pid.replay.bag import (
    FLOAT64_TYPE,
    jazzy_typestore,
    POSE_TYPES,
    STORAGES,
    TWIST_STAMPED_TYPE,
    TWIST_TYPE,
)
import numpy as np

if TYPE_CHECKING:
    from corridor_pid.sim.loop import SimResult

__all__ = ['RecordedCommand', 'RecordedPose', 'pose_message', 'sim_recording', 'write_run_bag']


class RecordedPose(NamedTuple):
    """One pose as recorded: receive time and header stamp (ns), pose (m, rad)."""

    receive_ns: int
    stamp_ns: int
    x: float
    y: float
    yaw: float
    frame_id: str = 'map'
    speed: float = 0.0
    """Odometry twist.linear.x (m/s); ignored by the other pose types."""
    yaw_rate: float = 0.0
    """Odometry twist.angular.z (rad/s); ignored by the other pose types."""


class RecordedCommand(NamedTuple):
    """One command as sent: receive time (ns), steering (rad), speed (m/s)."""

    receive_ns: int
    steering: float
    speed: float


def sim_recording(result: SimResult, start_ns: int = 10_000_000_000
                  ) -> tuple[list[RecordedPose], list[RecordedCommand]]:
    """Return the poses and commands a bag recorded next to the node would hold for a run.

    Every pose the controller took becomes a pose received at its step time with its
    stamp as header stamp; every command the node would have sent becomes a command
    received at the same time: the command of each pose that computed one, and the
    ramp-down of each watchdog tick while stopped. Times are shifted by ``start_ns``
    (the simulator starts at 0; ROS time 0 means "no clock yet"). The Odometry twist of a
    pose is the speed and yaw rate last commanded (the simulated drive follows them).

    Args:
        result: a simulated run (its ``samples`` aligned with its ``steps``).
        start_ns: bag time of the simulator's t = 0 (ns).

    """
    wheelbase = result.config.vehicle.wheelbase
    poses: list[RecordedPose] = []
    commands: list[RecordedCommand] = []
    steer = speed = 0.0
    for (t, step), sample in zip(result.steps, result.samples, strict=True):
        ns = start_ns + round(t * 1e9)
        if sample is not None:
            poses.append(RecordedPose(
                ns, start_ns + round(sample.stamp * 1e9), sample.x, sample.y, sample.yaw,
                sample.frame_id or 'map', speed, speed * math.tan(steer) / wheelbase))
            if not step.computed:
                continue
        elif step.state.value != 'stopped':
            continue
        steer, speed = step.steering, step.speed
        commands.append(RecordedCommand(ns, steer, speed))
    return poses, commands


def _stamp(store: Any, ns: int) -> Any:
    return store.types['builtin_interfaces/msg/Time'](sec=ns // 1_000_000_000,
                                                      nanosec=ns % 1_000_000_000)


def pose_message(pose: RecordedPose, kind: str) -> Any:
    """Return the rosbags message of ``kind`` ('pose_stamped', ...) for ``pose``."""
    store = jazzy_typestore()
    types = store.types
    header = types['std_msgs/msg/Header'](stamp=_stamp(store, pose.stamp_ns),
                                          frame_id=pose.frame_id)
    half = 0.5 * pose.yaw
    geometry = types['geometry_msgs/msg/Pose'](
        position=types['geometry_msgs/msg/Point'](x=pose.x, y=pose.y, z=0.0),
        orientation=types['geometry_msgs/msg/Quaternion'](
            x=0.0, y=0.0, z=math.sin(half), w=math.cos(half)))
    if kind == 'pose_stamped':
        return types[POSE_TYPES[kind]](header=header, pose=geometry)
    with_cov = types['geometry_msgs/msg/PoseWithCovariance'](
        pose=geometry, covariance=np.zeros(36, dtype=np.float64))
    if kind == 'pose_with_covariance':
        return types[POSE_TYPES[kind]](header=header, pose=with_cov)
    vector = types['geometry_msgs/msg/Vector3']
    twist = types['geometry_msgs/msg/TwistWithCovariance'](
        twist=types['geometry_msgs/msg/Twist'](
            linear=vector(x=pose.speed, y=0.0, z=0.0),
            angular=vector(x=0.0, y=0.0, z=pose.yaw_rate)),
        covariance=np.zeros(36, dtype=np.float64))
    return types[POSE_TYPES[kind]](header=header, child_frame_id='base_link', pose=with_cov,
                                   twist=twist)


def _namespace(topic: str) -> str:
    return topic.rstrip('/').rpartition('/')[0]


def write_run_bag(path: str | Path, poses: Sequence[RecordedPose], *,
                  pose_kind: str = 'pose_stamped', storage: str = 'sqlite3',
                  pose_topic: str = '/pose', commands: Sequence[RecordedCommand] = (),
                  cmd_vel: str | None = 'stamped', wheelbase: float = 0.9,
                  others: Sequence[tuple[int, str, Any]] = ()) -> dict[str, int]:
    """Write a new bag with the poses and (optionally) the commands; return counts per topic.

    Args:
        path: the new bag directory (must not exist).
        poses: the poses, in receive order.
        pose_kind: 'pose_stamped', 'pose_with_covariance' or 'odometry'.
        storage: 'sqlite3' or 'mcap'.
        pose_topic: topic of the poses; the command topics go in its namespace.
        commands: commands sent, in receive order; none writes no command topics.
        cmd_vel: 'stamped' (TwistStamped), 'plain' (Twist) or None (no cmd_vel topic).
        wheelbase: for cmd_vel's yaw rate speed * tan(steering) / wheelbase (m).
        others: more messages as (receive time [ns], topic, rosbags message), e.g.
            ``/clock`` or ``/parameter_events``; the type is the message's.

    Raises:
        ReplayError: bad arguments, or the bag cannot be written.

    """
    from rosbags.rosbag2 import StoragePlugin, Writer, WriterError

    if pose_kind not in POSE_TYPES:
        raise ReplayError(f'pose_kind: expected one of {tuple(POSE_TYPES)}, got {pose_kind!r}')
    if storage not in STORAGES:
        raise ReplayError(f'storage: expected one of {STORAGES}, got {storage!r}')
    if cmd_vel not in ('stamped', 'plain', None):
        raise ReplayError(f"cmd_vel: expected 'stamped', 'plain' or None, got {cmd_vel!r}")
    store = jazzy_typestore()
    types = store.types
    serialize = store.serialize_cdr
    plugin = StoragePlugin.MCAP if storage == 'mcap' else StoragePlugin.SQLITE3
    space = _namespace(pose_topic)
    pose_type = POSE_TYPES[pose_kind]
    messages: list[tuple[int, int, str, bytes]] = []
    for k, pose in enumerate(poses):
        messages.append((pose.receive_ns, k, pose_topic,
                         bytes(serialize(pose_message(pose, pose_kind), pose_type))))
    topics = {pose_topic: pose_type}
    if commands:
        topics[f'{space}/steering_angle'] = FLOAT64_TYPE
        topics[f'{space}/target_speed'] = FLOAT64_TYPE
        twist_type = TWIST_STAMPED_TYPE if cmd_vel == 'stamped' else TWIST_TYPE
        if cmd_vel is not None:
            topics[f'{space}/cmd_vel'] = twist_type
        vector = types['geometry_msgs/msg/Vector3']
        float64 = types[FLOAT64_TYPE]
        for k, cmd in enumerate(commands):
            order = len(poses) + 3 * k
            messages.append((cmd.receive_ns, order, f'{space}/steering_angle',
                             bytes(serialize(float64(data=cmd.steering), FLOAT64_TYPE))))
            messages.append((cmd.receive_ns, order + 1, f'{space}/target_speed',
                             bytes(serialize(float64(data=cmd.speed), FLOAT64_TYPE))))
            if cmd_vel is None:
                continue
            twist = types[TWIST_TYPE](
                linear=vector(x=cmd.speed, y=0.0, z=0.0),
                angular=vector(x=0.0, y=0.0,
                               z=cmd.speed * math.tan(cmd.steering) / wheelbase))
            msg = twist if cmd_vel == 'plain' else types[TWIST_STAMPED_TYPE](
                header=types['std_msgs/msg/Header'](stamp=_stamp(store, cmd.receive_ns),
                                                    frame_id='base_link'),
                twist=twist)
            messages.append((cmd.receive_ns, order + 2, f'{space}/cmd_vel',
                             bytes(serialize(msg, twist_type))))
    for k, (ns, topic, msg) in enumerate(others):
        msgtype = msg.__msgtype__
        if topics.setdefault(topic, msgtype) != msgtype:
            raise ReplayError(f'others: topic {topic!r} has type {topics[topic]!r}, not '
                              f'{msgtype!r}')
        messages.append((ns, -len(others) + k, topic, bytes(serialize(msg, msgtype))))
    messages.sort(key=lambda m: (m[0], m[1]))
    counts = dict.fromkeys(topics, 0)
    try:
        with Writer(Path(path), version=9, storage_plugin=plugin) as writer:
            conns = {topic: writer.add_connection(topic, msgtype, typestore=store)
                     for topic, msgtype in topics.items()}
            for ns, _, topic, data in messages:
                writer.write(conns[topic], ns, data)
                counts[topic] += 1
    except WriterError as err:
        raise ReplayError(f'{str(path)!r}: cannot write the bag ({err})') from err
    return counts
