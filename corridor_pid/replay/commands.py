# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""The commands a bag recorded (what the vehicle was told), as time series.

The node publishes ``steering_angle`` and ``target_speed`` (``std_msgs/Float64``: rad, m/s)
and ``cmd_vel`` (``geometry_msgs/Twist`` or ``TwistStamped``: linear.x = speed [m/s],
angular.z = speed * tan(steering) / wheelbase [rad/s]). A bag may hold any of them; each
becomes one channel: ``steering`` [rad], ``speed`` [m/s] (from ``target_speed``, else from
``cmd_vel``) and ``yaw_rate`` [rad/s] (from ``cmd_vel``).
"""

from __future__ import annotations

import struct
from typing import Any, NamedTuple, TYPE_CHECKING

from corridor_pid.core.errors import ReplayError
from corridor_pid.replay.bag import (
    command_connections,
    FLOAT64_TYPE,
    jazzy_typestore,
    RawStream,
    TWIST_STAMPED_TYPE,
    TWIST_TYPE,
)
import numpy as np

if TYPE_CHECKING:
    from rosbags.interfaces import Connection
    from rosbags.rosbag2 import Reader

__all__ = ['CHANNELS', 'CommandSeries', 'CommandTopics', 'command_series', 'command_topics']

CHANNELS: dict[str, str] = {'steering': 'rad', 'speed': 'm/s', 'yaw_rate': 'rad/s'}
"""Command channel -> unit."""

_FLOAT64_SIZE = 12  # 4-byte encapsulation header + one float64


class CommandSeries(NamedTuple):
    """One recorded command channel."""

    channel: str
    """'steering', 'speed' or 'yaw_rate'."""
    topic: str
    time: np.ndarray
    """Receive time of each command (s, bag clock)."""
    value: np.ndarray
    """The commanded value (unit per :data:`CHANNELS`)."""


def _float64_values(stream: RawStream) -> np.ndarray:
    data = stream.data
    if data and all(len(raw) == _FLOAT64_SIZE and raw[:4] == b'\x00\x01\x00\x00'
                    for raw in data):
        block = np.frombuffer(b''.join(data), dtype=np.uint8).reshape(len(data), -1)
        return np.asarray(block[:, 4:].copy().view('<f8')[:, 0], dtype=np.float64)
    return np.asarray([msg.data for msg in _messages(stream)], dtype=np.float64)


def _messages(stream: RawStream) -> list[Any]:
    from rosbags.serde import SerdeError

    deserialize = jazzy_typestore().deserialize_cdr
    out = []
    for index, raw in enumerate(stream.data):
        try:
            out.append(deserialize(raw, stream.msgtype))
        except (SerdeError, ValueError, IndexError, OverflowError, struct.error) as err:
            reason = ' '.join(str(err).split()).rstrip('.')
            raise ReplayError(
                f'{stream.topic!r}: message {index} cannot be decoded ({reason})') from err
    return out


class CommandTopics(NamedTuple):
    """The connections of the recorded command topics (empty lists where absent)."""

    steering: list[Connection]
    speed: list[Connection]
    cmd_vel: list[Connection]

    def connections(self) -> list[Connection]:
        """Return every connection of the command topics."""
        return [*self.steering, *self.speed, *self.cmd_vel]


def command_topics(reader: Reader, pose_topic: str) -> CommandTopics:
    """Return the command topics the bag recorded next to ``pose_topic`` (maybe none)."""
    cmd_vel = command_connections(reader, pose_topic, 'cmd_vel',
                                  (TWIST_TYPE, TWIST_STAMPED_TYPE))
    if len({c.msgtype for c in cmd_vel}) > 1:
        cmd_vel = []
    return CommandTopics(
        command_connections(reader, pose_topic, 'steering_angle', (FLOAT64_TYPE,)),
        command_connections(reader, pose_topic, 'target_speed', (FLOAT64_TYPE,)),
        cmd_vel)


def _topic(conns: list[Connection]) -> str | None:
    return conns[0].topic if conns else None


def command_series(streams: dict[str, RawStream], topics: CommandTopics
                   ) -> list[CommandSeries]:
    """Return the recorded command channels from the raw streams of the command topics."""
    series: list[CommandSeries] = []
    speed_topic = _topic(topics.speed)
    for channel, topic in (('steering', _topic(topics.steering)), ('speed', speed_topic)):
        if topic is not None and streams[topic].data:
            stream = streams[topic]
            series.append(CommandSeries(channel, topic, np.asarray(stream.times) * 1e-9,
                                        _float64_values(stream)))
    cmd_vel_topic = _topic(topics.cmd_vel)
    if cmd_vel_topic is not None and streams[cmd_vel_topic].data:
        stream = streams[cmd_vel_topic]
        stamped = stream.msgtype == TWIST_STAMPED_TYPE
        twists = [m.twist if stamped else m for m in _messages(stream)]
        times = np.asarray(stream.times) * 1e-9
        if speed_topic is None:
            series.append(CommandSeries('speed', cmd_vel_topic, times, np.asarray(
                [tw.linear.x for tw in twists], dtype=np.float64)))
        series.append(CommandSeries('yaw_rate', cmd_vel_topic, times, np.asarray(
            [tw.angular.z for tw in twists], dtype=np.float64)))
    return series
