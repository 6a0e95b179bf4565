# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Record serialized ROS messages into a rosbag2 bag (MCAP storage) with rosbags.

The demo subscribes to the topics it records without deserializing them (rclpy ``raw``
subscriptions hand over the CDR bytes as they came off the wire) and writes those bytes
here, stamped with the receive time on the demo's clock (simulated time in the fast pace),
as ``ros2 bag record`` would. Message definitions come from rosbags' standard ROS 2 Jazzy
type store. A rosbag2 bag is a directory: ``<bag>/metadata.yaml`` and ``<bag>/<bag>.mcap``.
"""

from __future__ import annotations

from collections.abc import Mapping
from pathlib import Path
from typing import Any

from corridor_pid.core.errors import DemoError, MissingExtraError

__all__ = ['BagRecorder']


class BagRecorder:
    """A new MCAP bag taking raw CDR messages of a fixed set of topics."""

    def __init__(self, path: str | Path, topics: Mapping[str, str]) -> None:
        """Create the bag directory ``path`` (must not exist) for topic -> message type.

        Raises:
            MissingExtraError: rosbags is not installed.
            DemoError: the bag cannot be created.

        """
        try:
            from rosbags.rosbag2 import StoragePlugin, Writer, WriterError
        except ImportError as err:
            raise MissingExtraError('rosbags', 'offline') from err
        from corridor_pid.replay.bag import jazzy_typestore

        self.path = Path(path)
        self.counts: dict[str, int] = dict.fromkeys(topics, 0)
        store = jazzy_typestore()
        try:
            self._writer: Any = Writer(self.path, version=9,
                                       storage_plugin=StoragePlugin.MCAP)
            self._writer.open()
            self._connections = {
                topic: self._writer.add_connection(topic, msgtype, typestore=store)
                for topic, msgtype in topics.items()}
        except (WriterError, OSError, KeyError) as err:
            raise DemoError(f'{str(path)!r}: cannot create the bag ({err})') from err
        self.closed = False

    def write(self, topic: str, receive_ns: int, data: bytes) -> None:
        """Append one serialized message of ``topic`` received at ``receive_ns`` (ns)."""
        if self.closed:
            return
        self._writer.write(self._connections[topic], receive_ns, data)
        self.counts[topic] += 1

    def close(self) -> None:
        """Finish the bag (writes its metadata); later writes are ignored."""
        if not self.closed:
            self.closed = True
            self._writer.close()
