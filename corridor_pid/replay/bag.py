# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Open rosbag2 bags (a directory; sqlite3 or MCAP storage) with rosbags; pick their topics.

Everything rosbags, sqlite3 or the file system raise while a bag is opened or read is turned
into one :class:`~corridor_pid.core.errors.ReplayError` naming the bag, so a truncated or
corrupt bag gives a one-line message and never a traceback.
"""

from __future__ import annotations

from collections.abc import Iterator, Sequence
import contextlib
import functools
from pathlib import Path
import sqlite3
import struct
from typing import Any, NamedTuple, TYPE_CHECKING

from corridor_pid.core.errors import ReplayError

if TYPE_CHECKING:
    from rosbags.interfaces import Connection
    from rosbags.rosbag2 import Reader
    from rosbags.typesys.store import Typestore

__all__ = [
    'CLOCK_TYPE', 'FLOAT64_TYPE', 'POSE_KINDS', 'POSE_TYPES', 'STORAGES', 'TWIST_STAMPED_TYPE',
    'TWIST_TYPE', 'RawStream', 'bag_errors', 'clock_connections', 'clock_values',
    'command_connections', 'jazzy_typestore',
    'opened_bag', 'pose_connections', 'raw_streams', 'storage_of', 'topic_basename',
]

POSE_TYPES: dict[str, str] = {
    'pose_stamped': 'geometry_msgs/msg/PoseStamped',
    'pose_with_covariance': 'geometry_msgs/msg/PoseWithCovarianceStamped',
    'odometry': 'nav_msgs/msg/Odometry',
}
"""Pose kind (the ``pose_type`` parameter's spelling) -> ROS message type."""

POSE_KINDS: dict[str, str] = {msgtype: kind for kind, msgtype in POSE_TYPES.items()}
"""ROS message type -> pose kind."""

FLOAT64_TYPE = 'std_msgs/msg/Float64'
TWIST_TYPE = 'geometry_msgs/msg/Twist'
TWIST_STAMPED_TYPE = 'geometry_msgs/msg/TwistStamped'
CLOCK_TYPE = 'rosgraph_msgs/msg/Clock'

STORAGES = ('sqlite3', 'mcap')
"""rosbag2 storage identifiers this package reads and writes."""

# What rosbags, sqlite3 and the file system raise on an unreadable, truncated or corrupt bag.
# (ValueError covers undecodable text in the metadata, OverflowError absurd sizes.)
_READ_ERRORS: tuple[type[BaseException], ...] = (
    OSError, sqlite3.Error, struct.error, ValueError, OverflowError, EOFError)


class RawStream(NamedTuple):
    """The serialized messages of one topic, in bag order."""

    topic: str
    msgtype: str
    times: list[int]
    """Receive time of each message (ns, bag clock)."""
    data: list[bytes]
    """CDR bytes of each message."""


@functools.cache
def jazzy_typestore() -> Typestore:
    """Return the rosbags type store of the standard ROS 2 Jazzy message types."""
    from rosbags.typesys import get_typestore, Stores

    return get_typestore(Stores.ROS2_JAZZY)


def _reader_error() -> type[BaseException]:
    from rosbags.rosbag2 import ReaderError

    return ReaderError


@functools.cache
def bag_errors() -> tuple[type[BaseException], ...]:
    """Return the exception types that mean "this bag cannot be read"."""
    import apsw  # rosbags' SQLite binding

    return (_reader_error(), apsw.Error, *_READ_ERRORS)


def _reason(err: BaseException) -> str:
    text = ' '.join(str(err).split()) or type(err).__name__
    return text.rstrip('.')


@contextlib.contextmanager
def opened_bag(path: str | Path) -> Iterator[Reader]:
    """Yield an open rosbags ``Reader`` of the bag at ``path``.

    Raises:
        ReplayError: the path is missing, is not a rosbag2 bag, or the bag is truncated or
            corrupt (also while reading inside the ``with`` block).

    """
    from rosbags.rosbag2 import Reader

    where = Path(path)
    if not where.exists():
        raise ReplayError(f'{str(path)!r}: no such bag (a rosbag2 bag is a directory)')
    if where.is_dir() and not (where / 'metadata.yaml').is_file():
        raise ReplayError(f'{str(path)!r}: not a rosbag2 bag (no metadata.yaml in it)')
    try:
        reader = Reader(where)
        reader.open()
    except bag_errors() as err:
        raise ReplayError(f'{str(path)!r}: cannot open the bag ({_reason(err)})') from err
    try:
        yield reader
    except ReplayError:
        raise
    except bag_errors() as err:
        raise ReplayError(f'{str(path)!r}: cannot read the bag ({_reason(err)})') from err
    finally:
        with contextlib.suppress(*bag_errors()):
            reader.close()


def storage_of(path: str | Path) -> str:
    """Return the storage identifier of the bag directory at ``path`` ('sqlite3' or 'mcap')."""
    where = Path(path)
    if where.is_file():
        return 'mcap' if where.suffix == '.mcap' else 'sqlite3'
    if any(where.glob('*.mcap')):
        return 'mcap'
    return 'sqlite3'


def topic_basename(topic: str) -> str:
    """Return the last name of a topic ('/cart/pose' -> 'pose')."""
    return topic.rstrip('/').rpartition('/')[2]


def _namespace(topic: str) -> str:
    return topic.rstrip('/').rpartition('/')[0]


def _topic_types(reader: Reader) -> dict[str, str]:
    """Return topic -> message type of every topic (the first type of a mixed topic)."""
    types: dict[str, str] = {}
    for conn in reader.connections:
        types.setdefault(conn.topic, conn.msgtype)
    return types


def _counts(reader: Reader) -> dict[str, int]:
    counts: dict[str, int] = {}
    for conn in reader.connections:
        counts[conn.topic] = counts.get(conn.topic, 0) + conn.msgcount
    return counts


def _normalised(topic: str) -> str:
    return topic if topic.startswith('/') else f'/{topic}'


def pose_connections(reader: Reader, topic: str | None = None,
                     pose_kind: str | None = None) -> list[Connection]:
    """Return the connections of the pose topic of an open bag.

    Args:
        reader: the open bag.
        topic: the pose topic (with or without the leading '/'); None picks the only topic
            of a pose type (restricted to ``pose_kind`` when given), else ``/pose``.
        pose_kind: expected kind ('pose_stamped', 'pose_with_covariance', 'odometry');
            None accepts any of the three.

    Raises:
        ReplayError: no such topic, several candidates, a type that is not a pose, a type
            other than ``pose_kind``, or a topic without messages.

    """
    types = _topic_types(reader)
    wanted = POSE_TYPES[pose_kind] if pose_kind is not None else None
    candidates = sorted(t for t, m in types.items()
                        if m == wanted or (wanted is None and m in POSE_KINDS))
    if topic is None:
        if len(candidates) == 1:
            topic = candidates[0]
        elif '/pose' in types:
            topic = '/pose'
        elif not candidates:
            what = (f'of type {wanted}' if wanted
                    else f'of a pose type ({", ".join(POSE_TYPES.values())})')
            raise ReplayError(f'no topic {what} in the bag; topics: {_listing(types)}')
        else:
            raise ReplayError(
                f'several pose topics in the bag ({", ".join(candidates)}); '
                'choose one with --pose-topic')
    else:
        topic = _normalised(topic)
        if topic not in types:
            hint = f'; pose topics: {", ".join(candidates)}' if candidates else ''
            raise ReplayError(f'pose topic {topic!r} is not in the bag{hint}')
    msgtype = types[topic]
    if msgtype not in POSE_KINDS:
        raise ReplayError(
            f'pose topic {topic!r} has type {msgtype!r}; expected one of '
            f'{", ".join(POSE_TYPES.values())}')
    if wanted is not None and msgtype != wanted:
        raise ReplayError(
            f'pose topic {topic!r} has type {msgtype!r}, not {wanted!r} (--pose-type '
            f'{pose_kind})')
    conns = [c for c in reader.connections if c.topic == topic]
    if len({c.msgtype for c in conns}) > 1:
        raise ReplayError(f'pose topic {topic!r} mixes message types '
                          f'{sorted({c.msgtype for c in conns})!r}')
    if _counts(reader)[topic] == 0:
        raise ReplayError(f'pose topic {topic!r} holds no messages')
    return conns


def _listing(types: dict[str, str]) -> str:
    if not types:
        return 'none'
    return ', '.join(f'{t} ({m})' for t, m in sorted(types.items()))


def command_connections(reader: Reader, pose_topic: str, name: str,
                        msgtypes: Sequence[str]) -> list[Connection]:
    """Return the connections of the recorded command topic ``name`` next to the pose topic.

    The topic whose last name is ``name`` and whose type is one of ``msgtypes``; in the pose
    topic's namespace when there is one there, else the only such topic outside ``/replay``.
    Empty when the bag holds none (or several, none of them in the pose topic's namespace).
    """
    types = _topic_types(reader)
    found = sorted(t for t, m in types.items()
                   if topic_basename(t) == name and m in msgtypes
                   and not t.startswith('/replay/'))
    home = f'{_namespace(pose_topic)}/{name}'
    if home in found:
        chosen = home
    elif len(found) == 1:
        chosen = found[0]
    else:
        return []
    return [c for c in reader.connections if c.topic == chosen and c.msgtype in msgtypes]


def clock_connections(reader: Reader) -> list[Connection]:
    """Return the connections of the bag's ROS clock (``/clock`` first; empty: none)."""
    conns = [c for c in reader.connections if c.msgtype == CLOCK_TYPE]
    if not conns:
        return []
    topic = '/clock' if any(c.topic == '/clock' for c in conns) else conns[0].topic
    return [c for c in conns if c.topic == topic]


def clock_values(stream: RawStream) -> list[int]:
    """Return the ROS time [ns] each ``rosgraph_msgs/Clock`` message of ``stream`` carries.

    Raises:
        ReplayError: a message cannot be decoded.

    """
    from rosbags.serde import SerdeError

    deserialize = jazzy_typestore().deserialize_cdr
    values = []
    for index, raw in enumerate(stream.data):
        if len(raw) == 12 and raw[:4] == b'\x00\x01\x00\x00':   # little-endian CDR
            sec, nanosec = struct.unpack_from('<iI', raw, 4)
        else:
            try:
                msg: Any = deserialize(raw, stream.msgtype)
            except (SerdeError, ValueError, IndexError, OverflowError, struct.error) as err:
                reason = ' '.join(str(err).split()).rstrip('.')
                raise ReplayError(f'{stream.topic!r}: message {index} cannot be decoded '
                                  f'({reason})') from err
            sec, nanosec = int(msg.clock.sec), int(msg.clock.nanosec)
        values.append(sec * 1_000_000_000 + nanosec)
    return values


def raw_streams(reader: Reader, connections: Sequence[Connection]) -> dict[str, RawStream]:
    """Return topic -> its serialized messages in bag order, for the given connections."""
    if not connections:
        return {}
    streams: dict[str, RawStream] = {
        c.topic: RawStream(c.topic, c.msgtype, [], []) for c in connections}
    for conn, timestamp, data in reader.messages(connections=list(connections)):
        stream = streams[conn.topic]
        stream.times.append(timestamp)
        stream.data.append(data)
    return streams
