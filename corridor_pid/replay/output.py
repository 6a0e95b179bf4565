# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Write a replayed bag: every original topic plus the replayed commands.

The new bag has the storage format of the source (sqlite3 or MCAP) and holds, unchanged,
every message of the source bag, plus under :data:`REPLAY_NAMESPACE`:

- ``/replay/steering_angle`` (``std_msgs/Float64``, rad) and ``/replay/target_speed``
  (``std_msgs/Float64``, m/s): the replayed commands;
- ``/replay/cmd_vel`` (``geometry_msgs/TwistStamped``): speed and yaw rate
  speed * tan(steering) / wheelbase, stamped with the step time;
- ``/replay/lateral_error`` (``std_msgs/Float64``, m): the controller's error e.

One message per replayed pose, and per timer tick while the controller is not tracking
(when the node ramps the vehicle down), at the step's time on the bag clock, so any bag
viewer shows the recorded and the replayed commands side by side. Topics of an earlier
replay under ``/replay/`` are not copied (the new replay replaces them). The bag is written
under a temporary name and renamed when complete: a failure leaves nothing behind.
"""

from __future__ import annotations

from collections.abc import Iterator
import math
import os
from pathlib import Path
import shutil
import struct
from typing import TYPE_CHECKING

from corridor_pid.core.errors import ReplayError
from corridor_pid.replay.bag import (
    bag_errors,
    FLOAT64_TYPE,
    jazzy_typestore,
    opened_bag,
    storage_of,
    TWIST_STAMPED_TYPE,
)
from corridor_pid.replay.compare import replayed_channel
from corridor_pid.replay.drive import ReplayedRun
from corridor_pid.replay.track import PoseTrack
import numpy as np

if TYPE_CHECKING:
    from rosbags.interfaces import Connection
    from rosbags.rosbag2 import Writer

__all__ = ['REPLAY_NAMESPACE', 'REPLAY_TOPICS', 'write_replayed_bag', 'written_steps']

REPLAY_NAMESPACE = '/replay'

REPLAY_TOPICS: dict[str, str] = {
    '/replay/steering_angle': FLOAT64_TYPE,
    '/replay/target_speed': FLOAT64_TYPE,
    '/replay/cmd_vel': TWIST_STAMPED_TYPE,
    '/replay/lateral_error': FLOAT64_TYPE,
}
"""Topic -> message type of the replayed outputs."""

_CDR_LE = b'\x00\x01\x00\x00'


def _float64_cdr(value: float) -> bytes:
    return _CDR_LE + struct.pack('<d', value)


def written_steps(run: ReplayedRun) -> np.ndarray:
    """Return the indices of the steps the written bag carries (poses; ticks off-track)."""
    off_track = np.fromiter((s != 'tracking' for s in run.state), bool, len(run.state))
    return np.flatnonzero((run.pose_index >= 0) | off_track)


def _step_ns(run: ReplayedRun, track: PoseTrack, index: np.ndarray) -> list[int]:
    pose = run.pose_index[index]
    ticks = np.rint(run.time[index] * 1e9).astype(np.int64)
    exact = np.where(pose >= 0, track.receive_ns[np.maximum(pose, 0)], ticks)
    return [int(v) for v in exact]


def _replay_messages(run: ReplayedRun, track: PoseTrack, wheelbase: float
                     ) -> Iterator[tuple[int, str, bytes]]:
    """Yield (time [ns], topic, CDR bytes) of the replayed outputs in time order."""
    store = jazzy_typestore()
    twist_type = store.types[TWIST_STAMPED_TYPE]
    header_type = store.types['std_msgs/msg/Header']
    time_type = store.types['builtin_interfaces/msg/Time']
    vector = store.types['geometry_msgs/msg/Vector3']
    twist = store.types['geometry_msgs/msg/Twist']
    index = written_steps(run)
    steering = run.steering[index].tolist()
    speed = run.speed[index].tolist()
    yaw_rate = replayed_channel(run, 'yaw_rate', wheelbase)[index].tolist()
    error = run.error[index].tolist()
    for k, ns in enumerate(_step_ns(run, track, index)):
        yield ns, '/replay/steering_angle', _float64_cdr(steering[k])
        yield ns, '/replay/target_speed', _float64_cdr(speed[k])
        msg = twist_type(
            header=header_type(stamp=time_type(sec=ns // 1_000_000_000,
                                               nanosec=ns % 1_000_000_000), frame_id=''),
            twist=twist(linear=vector(x=speed[k], y=0.0, z=0.0),
                        angular=vector(x=0.0, y=0.0, z=yaw_rate[k])))
        yield ns, '/replay/cmd_vel', bytes(store.serialize_cdr(msg, TWIST_STAMPED_TYPE))
        yield ns, '/replay/lateral_error', _float64_cdr(error[k] if math.isfinite(
            error[k]) else 0.0)


def write_replayed_bag(source: str | Path, out: str | Path, run: ReplayedRun,
                       track: PoseTrack, wheelbase: float) -> dict[str, int]:
    """Write the source bag plus the replayed outputs to the new bag ``out``.

    Returns:
        Messages written per topic.

    Raises:
        ReplayError: ``out`` exists, the source cannot be read, or writing fails.

    """
    from rosbags.rosbag2 import StoragePlugin, Writer, WriterError  # noqa: F811

    target = Path(out)
    if target.exists():
        raise ReplayError(f'{str(out)!r} exists already; choose a new name for --write')
    if not target.parent.is_dir():
        raise ReplayError(f'{str(out)!r}: folder {str(target.parent)!r} does not exist')
    plugin = StoragePlugin.MCAP if storage_of(source) == 'mcap' else StoragePlugin.SQLITE3
    partial = target.with_name(f'.{target.name}.partial-{os.getpid()}')
    shutil.rmtree(partial, ignore_errors=True)
    store = jazzy_typestore()
    counts: dict[str, int] = {}
    out_conns: dict[int, Connection] = {}
    by_key: dict[tuple[str, str, str], Connection] = {}
    try:
        with opened_bag(source) as reader, Writer(partial, version=9,
                                                  storage_plugin=plugin) as writer:
            for conn in reader.connections:
                if conn.topic.startswith(f'{REPLAY_NAMESPACE}/'):
                    continue
                key = (conn.topic, conn.msgtype, repr(conn.ext))
                if key not in by_key:
                    by_key[key] = _copied_connection(writer, conn)
                out_conns[conn.id] = by_key[key]
            new_conns = {topic: writer.add_connection(topic, msgtype, typestore=store)
                         for topic, msgtype in REPLAY_TOPICS.items()}
            replay = _replay_messages(run, track, wheelbase)
            pending = next(replay, None)
            for conn, timestamp, data in reader.messages(
                    connections=[c for c in reader.connections if c.id in out_conns]):
                while pending is not None and pending[0] <= timestamp:
                    writer.write(new_conns[pending[1]], pending[0], pending[2])
                    counts[pending[1]] = counts.get(pending[1], 0) + 1
                    pending = next(replay, None)
                writer.write(out_conns[conn.id], timestamp, data)
                counts[conn.topic] = counts.get(conn.topic, 0) + 1
            while pending is not None:
                writer.write(new_conns[pending[1]], pending[0], pending[2])
                counts[pending[1]] = counts.get(pending[1], 0) + 1
                pending = next(replay, None)
        partial.rename(target)
    except BaseException as err:
        shutil.rmtree(partial, ignore_errors=True)
        if isinstance(err, (WriterError, *bag_errors())):
            raise ReplayError(f'{str(out)!r}: cannot write the bag ({err})') from err
        raise
    return counts


def _copied_connection(writer: Writer, conn: Connection) -> Connection:
    """Add to ``writer`` a connection like the source's ``conn`` (definition, hash, QoS)."""
    from rosbags.interfaces import ConnectionExtRosbag2, MessageDefinitionFormat

    ext = conn.ext
    fmt = ext.serialization_format if isinstance(ext, ConnectionExtRosbag2) else 'cdr'
    qos = ext.offered_qos_profiles if isinstance(ext, ConnectionExtRosbag2) else []
    if conn.msgdef.format != MessageDefinitionFormat.NONE and conn.msgdef.data and conn.digest:
        return writer.add_connection(conn.topic, conn.msgtype, msgdef=conn.msgdef.data,
                                     rihs01=conn.digest, serialization_format=fmt,
                                     offered_qos_profiles=qos)
    store = jazzy_typestore()
    if conn.msgtype in store.fielddefs:
        return writer.add_connection(conn.topic, conn.msgtype, typestore=store,
                                     serialization_format=fmt, offered_qos_profiles=qos)
    raise ReplayError(f'topic {conn.topic!r}: type {conn.msgtype!r} has no definition in '
                      'the bag and is not a standard Jazzy type; cannot copy it')
