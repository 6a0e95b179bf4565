# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Decode a whole topic of pose messages at once from their fixed CDR layout (numpy).

A pose topic usually carries the same frame id in every message, so every message has the
same size and every field sits at the same offset. Then the topic decodes as one numpy
structured array instead of message by message. The layout follows the OMG CDR rules that
ROS 2 uses (XCDR1, little endian, encapsulation header ``00 01 00 00``; every primitive
aligned to its own size, counted from the end of the 4-byte encapsulation header)::

    std_msgs/Header   int32 sec @0, uint32 nanosec @4, uint32 len @8, frame_id bytes @12
    PoseStamped       Pose (7 float64: position x y z, orientation x y z w) at align8
    PoseWithCov...    Pose, then float64[36] covariance
    Odometry          string child_frame_id at align4, then PoseWithCovariance, then
                      TwistWithCovariance (linear x y z, angular x y z, float64[36])

:func:`fixed_layout_fields` checks that layout on every message (encapsulation, string
lengths, total size) and returns None whenever it does not hold; the caller then decodes
with rosbags. The tests compare both decoders field by field.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

__all__ = ['PoseFields', 'fixed_layout_fields']

_CDR_LE = b'\x00\x01\x00\x00'
_POSE_SIZE = 7 * 8
_COVARIANCE_SIZE = 36 * 8
_TWIST_SIZE = 6 * 8

PoseFields = dict[str, np.ndarray]
"""Field name -> one value per message: 'sec', 'nanosec', 'x', 'y', 'qx', 'qy', 'qz', 'qw',
and for Odometry 'vx' (twist.linear.x) and 'wz' (twist.angular.z)."""


def _align(offset: int, size: int) -> int:
    return (offset + size - 1) // size * size


def _string_length(block: np.ndarray, offset: int) -> int | None:
    """Return the common uint32 length at ``offset`` of every row (with origin 4), or None."""
    at = 4 + offset
    lengths = block[:, at:at + 4].copy().view('<u4')[:, 0]
    first = int(lengths[0])
    if first < 1 or not np.all(lengths == first):
        return None
    return first


def fixed_layout_fields(data: Sequence[bytes | memoryview], kind: str
                        ) -> tuple[PoseFields, list[str]] | None:
    """Return the fields and frame ids of every message, or None if the layout differs.

    Args:
        data: the CDR bytes of each message of one topic.
        kind: 'pose_stamped', 'pose_with_covariance' or 'odometry'.

    Returns:
        (fields, frame ids), or None when the messages are not all little-endian CDR of one
        size with equal string lengths (the caller then decodes message by message).

    """
    if not data:
        return None
    size = len(data[0])
    if size < 16 or any(len(raw) != size for raw in data):
        return None
    block = np.frombuffer(b''.join(data), dtype=np.uint8).reshape(len(data), size)
    if not np.all(block[:, :4] == np.frombuffer(_CDR_LE, dtype=np.uint8)):
        return None
    frame_len = _string_length(block, 8)
    if frame_len is None:
        return None
    end = 12 + frame_len
    if kind == 'odometry':
        child_at = _align(end, 4)
        if 4 + child_at + 4 > size:
            return None
        child_len = _string_length(block, child_at)
        if child_len is None:
            return None
        end = child_at + 4 + child_len
    pose_at = _align(end, 8)
    tail = {'pose_stamped': 0, 'pose_with_covariance': _COVARIANCE_SIZE,
            'odometry': _COVARIANCE_SIZE + _TWIST_SIZE + _COVARIANCE_SIZE}.get(kind)
    if tail is None or 4 + pose_at + _POSE_SIZE + tail != size:
        return None
    names = ['sec', 'nanosec', 'x', 'y', 'qx', 'qy', 'qz', 'qw']
    formats = ['<i4', '<u4', '<f8', '<f8', '<f8', '<f8', '<f8', '<f8']
    offsets = [4, 8] + [4 + pose_at + 8 * k for k in (0, 1, 3, 4, 5, 6)]
    if kind == 'odometry':
        twist_at = 4 + pose_at + _POSE_SIZE + _COVARIANCE_SIZE
        names += ['vx', 'wz']
        formats += ['<f8', '<f8']
        offsets += [twist_at, twist_at + 40]
    dtype = np.dtype({'names': names, 'formats': formats, 'offsets': offsets,
                      'itemsize': size})
    records = block.reshape(-1).view(dtype)
    fields: PoseFields = {name: np.array(records[name]) for name in names}
    chars = block[:, 16:16 + frame_len]
    if not np.all(chars[:, -1] == 0):
        return None
    if np.all(chars == chars[0]):
        frame = bytes(chars[0, :frame_len - 1]).decode('utf-8', errors='replace')
        frames = [frame] * len(data)
    else:
        frames = [bytes(row[:frame_len - 1]).decode('utf-8', errors='replace')
                  for row in chars]
    return fields, frames
