# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""The recorded pose stream of a bag as arrays: stamps [s], positions [m], heading [rad].

Two clocks matter in a bag: the header stamp each pose carries (when it was measured) and
the receive time the recorder wrote (when it arrived, on the recording computer's clock).
The replay hands the controller what the node would have had: the header stamp as the
pose's stamp and the receive time as the node clock ``t`` of the step. With
``stamps='receive'`` (poses recorded with empty or unreliable stamps) the receive time is
used for both.
"""

from __future__ import annotations

import struct
from typing import Any, NamedTuple

from corridor_pid.core.errors import ReplayError
from corridor_pid.replay.bag import jazzy_typestore, POSE_KINDS, RawStream
from corridor_pid.replay.cdr import fixed_layout_fields, PoseFields
import numpy as np

__all__ = ['STAMP_SOURCES', 'PoseTrack', 'decoded_pose_fields', 'pose_track', 'seconds_of',
           'yaw_from']

STAMP_SOURCES = ('header', 'receive')
"""Where the pose stamps come from: the message headers or the bag's receive times."""


class PoseTrack(NamedTuple):
    """One pose topic of a bag, decoded (one array element per message, bag order)."""

    topic: str
    kind: str
    """'pose_stamped', 'pose_with_covariance' or 'odometry'."""
    stamps: str
    """'header' or 'receive': the source of ``stamp``."""
    receive_ns: np.ndarray
    """Receive time of each message on the bag clock (ns, int64)."""
    time: np.ndarray
    """Node clock at arrival: the receive time (s)."""
    stamp: np.ndarray
    """Stamp the controller sees: the header stamp, or the receive time (s; as a node
    computes it from a ``builtin_interfaces/Time``)."""
    x: np.ndarray
    """Position x in the pose frame (m)."""
    y: np.ndarray
    """Position y in the pose frame (m)."""
    yaw: np.ndarray
    """Heading from the orientation quaternion (rad, counter-clockwise from x)."""
    frame_ids: list[str]
    speed: np.ndarray | None
    """Forward speed twist.linear.x of an Odometry pose (m/s); None for other kinds."""
    yaw_rate: np.ndarray | None
    """Yaw rate twist.angular.z of an Odometry pose (rad/s); None for other kinds."""

    def __len__(self) -> int:
        """Return the number of poses."""
        return int(self.receive_ns.size)


def yaw_from(qx: np.ndarray, qy: np.ndarray, qz: np.ndarray, qw: np.ndarray) -> np.ndarray:
    """Return the yaw (rad, in (-pi, pi]) of unit quaternions (ZYX Euler angles)."""
    with np.errstate(over='ignore', invalid='ignore'):  # garbage in: NaN out, rejected later
        yaw = np.arctan2(2.0 * (qw * qz + qx * qy), 1.0 - 2.0 * (qy * qy + qz * qz))
    return np.asarray(yaw, dtype=np.float64)


def seconds_of(sec: np.ndarray, nanosec: np.ndarray) -> np.ndarray:
    """Return stamps in seconds from their sec and nanosec fields (s).

    The same arithmetic as a node turning a ``builtin_interfaces/Time`` into seconds
    (``sec + nanosec * 1e-9``), so a stamp here equals the node's to the last bit.
    """
    return np.asarray(sec.astype(np.float64) + nanosec.astype(np.float64) * 1e-9)


def _undecodable(topic: str, index: int, err: BaseException) -> ReplayError:
    reason = ' '.join(str(err).split()).rstrip('.')
    return ReplayError(f'{topic!r}: message {index} cannot be decoded ({reason})')


def decoded_pose_fields(stream: RawStream) -> tuple[PoseFields, list[str]]:
    """Return the pose fields and frame ids of every message, decoded with rosbags.

    The reference decoder (and the fallback of :func:`fixed_layout_fields`).

    Raises:
        ReplayError: a message cannot be decoded.

    """
    from rosbags.serde import SerdeError

    kind = POSE_KINDS[stream.msgtype]
    deserialize = jazzy_typestore().deserialize_cdr
    msgtype = stream.msgtype
    columns: dict[str, list[float]] = {
        name: [] for name in ('sec', 'nanosec', 'x', 'y', 'qx', 'qy', 'qz', 'qw')}
    if kind == 'odometry':
        columns['vx'] = []
        columns['wz'] = []
    frames: list[str] = []
    for index, raw in enumerate(stream.data):
        try:
            msg: Any = deserialize(raw, msgtype)
        except (SerdeError, ValueError, IndexError, OverflowError, struct.error) as err:
            raise _undecodable(stream.topic, index, err) from err
        header = msg.header
        pose = msg.pose if kind == 'pose_stamped' else msg.pose.pose
        columns['sec'].append(header.stamp.sec)
        columns['nanosec'].append(header.stamp.nanosec)
        columns['x'].append(pose.position.x)
        columns['y'].append(pose.position.y)
        q = pose.orientation
        columns['qx'].append(q.x)
        columns['qy'].append(q.y)
        columns['qz'].append(q.z)
        columns['qw'].append(q.w)
        if kind == 'odometry':
            columns['vx'].append(msg.twist.twist.linear.x)
            columns['wz'].append(msg.twist.twist.angular.z)
        frames.append(header.frame_id)
    fields: PoseFields = {}
    for name, values in columns.items():
        dtype = np.int64 if name in ('sec', 'nanosec') else np.float64
        fields[name] = np.asarray(values, dtype=dtype)
    return fields, frames


def _first_not_newer(values: np.ndarray) -> int | None:
    """Return the index of the first value not strictly greater than its predecessor."""
    bad = np.flatnonzero(np.diff(values) <= 0)
    return int(bad[0]) + 1 if bad.size else None


def pose_track(stream: RawStream, stamps: str = 'header') -> PoseTrack:
    """Return the decoded pose track of one pose topic.

    Args:
        stream: the topic's serialized messages (a pose type of ``POSE_KINDS``).
        stamps: 'header' (the message stamps) or 'receive' (the bag's receive times).

    Raises:
        ReplayError: a message cannot be decoded; the header stamps are all zero; the
            stamps (or receive times) are not strictly increasing.

    """
    if stamps not in STAMP_SOURCES:
        raise ReplayError(f'stamps: expected one of {STAMP_SOURCES}, got {stamps!r}')
    kind = POSE_KINDS[stream.msgtype]
    topic = stream.topic
    receive_ns = np.asarray(stream.times, dtype=np.int64)
    if receive_ns.size == 0:
        raise ReplayError(f'pose topic {topic!r} holds no messages')
    fast = fixed_layout_fields(stream.data, kind)
    fields, frames = fast if fast is not None else decoded_pose_fields(stream)
    time = receive_ns * 1e-9
    early = np.flatnonzero(np.diff(receive_ns) < 0)
    if early.size:
        k = int(early[0]) + 1
        raise ReplayError(
            f'{topic!r}: message {k} was received at {float(time[k])!r} s, before the one '
            f'before it ({float(time[k - 1])!r} s); the bag is out of order')
    if stamps == 'receive':
        same = _first_not_newer(receive_ns)
        if same is not None:
            raise ReplayError(
                f'{topic!r}: messages {same - 1} and {same} were received at the same time '
                f'({float(time[same])!r} s); replay with --stamps header')
    if stamps == 'header':
        sec, nanosec = fields['sec'], fields['nanosec']
        if not np.any(sec) and not np.any(nanosec):
            raise ReplayError(
                f'{topic!r}: every header stamp is zero; replay with --stamps receive')
        stamp = seconds_of(sec, nanosec)
        back = _first_not_newer(stamp)
        if back is not None:
            raise ReplayError(
                f'{topic!r}: message {back} has header stamp {float(stamp[back])!r} s, not '
                f'newer than the one before ({float(stamp[back - 1])!r} s); out-of-order stamps '
                '(replay in arrival order with --stamps receive)')
    else:
        stamp = seconds_of(receive_ns // 1_000_000_000, receive_ns % 1_000_000_000)
    speed = fields['vx'] if kind == 'odometry' else None
    yaw_rate = fields['wz'] if kind == 'odometry' else None
    yaw = yaw_from(fields['qx'], fields['qy'], fields['qz'], fields['qw'])
    return PoseTrack(topic, kind, stamps, receive_ns, time, stamp, fields['x'], fields['y'],
                     yaw, frames, speed, yaw_rate)
