# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Record serialized ROS messages into a rosbag2 bag (MCAP storage) with rosbags.

The demo subscribes to the topics it records without deserializing them (rclpy ``raw``
subscriptions hand over the CDR bytes as they came off the wire) and hands those bytes
here with the time it heard them. The recorder keeps them until :meth:`BagRecorder.close`,
which writes them in log-time order: by default the receive times, or the times a timing
rule gives (the demo's: :func:`corridor_pid.demo.logtimes.log_times`, the times at which
the messages were sent on the run's clock). Message definitions come from rosbags'
standard ROS 2 Jazzy type store. A rosbag2 bag is a directory: ``<bag>/metadata.yaml`` and
``<bag>/<bag>.mcap``.

Memory: the messages of the whole run are held until the end (the demo's default run is
about 2 MB of messages; a real-time run of an hour at 50 Hz about 0.3 GB).
"""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence
from pathlib import Path
from typing import Any

from corridor_pid.core.errors import DemoError, MissingExtraError
from corridor_pid.demo.logtimes import HeldMessage, LogTimes

__all__ = ['BagRecorder', 'LogTiming']

LogTiming = Callable[[Sequence[HeldMessage]], LogTimes]
"""A timing rule: the held messages (in the order heard) -> their log times and ranks."""


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
        self._types = dict(topics)
        self._held: list[HeldMessage] = []
        self.timing: LogTimes | None = None
        """How the messages were timed (after :meth:`close`)."""
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
        """Keep one serialized message of ``topic`` received at ``receive_ns`` (ns)."""
        if self.closed:
            return
        self._held.append(HeldMessage(topic, self._types[topic], bytes(data), receive_ns))
        self.counts[topic] += 1

    def close(self, timing: LogTiming | None = None) -> None:
        """Write the messages in log-time order and finish the bag; later writes are ignored.

        Args:
            timing: gives each message its log time; None keeps the receive times. At equal
                log times messages keep the timing's rank order, then the order heard.

        """
        if self.closed:
            return
        self.closed = True
        held, self._held = self._held, []
        try:
            times = (timing(held) if timing is not None
                     else LogTimes([m.receive_ns for m in held], [0] * len(held), 0, len(held)))
            self.timing = times
            order = sorted(range(len(held)), key=lambda i: (times.times[i], times.ranks[i], i))
            for i in order:
                self._writer.write(self._connections[held[i].topic], times.times[i],
                                   held[i].data)
        finally:
            self._writer.close()
