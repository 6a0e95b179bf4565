# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""The numpy fast path decodes pose topics exactly as rosbags' deserialiser does."""

from __future__ import annotations

import math

from corridor_pid.replay.bag import POSE_TYPES, RawStream
from corridor_pid.replay.cdr import fixed_layout_fields
from corridor_pid.replay.record import pose_message, RecordedPose
from corridor_pid.replay.track import decoded_pose_fields, yaw_from
from hypothesis import given, settings
from hypothesis import strategies as st
import numpy as np
import pytest
from rosbags.typesys import get_typestore, Stores

# The reference decoder: rosbags with its standard ROS 2 Jazzy type store (PyPI 'rosbags').
JAZZY = get_typestore(Stores.ROS2_JAZZY)

finite = st.floats(-1e6, 1e6, allow_nan=False)
frames = st.text(alphabet='abcdefghijklmnopqrstuvwxyz_/0123456789', max_size=21)


def _stream(kind: str, poses: list[RecordedPose], little_endian: bool = True) -> RawStream:
    msgtype = POSE_TYPES[kind]
    data = [bytes(JAZZY.serialize_cdr(pose_message(p, kind), msgtype,
                                      little_endian=little_endian)) for p in poses]
    return RawStream('/pose', msgtype, [p.receive_ns for p in poses], data)


def _assert_same(fast: tuple[dict[str, np.ndarray], list[str]],
                 reference: tuple[dict[str, np.ndarray], list[str]]) -> None:
    fields, frame_ids = fast
    ref_fields, ref_frames = reference
    assert sorted(fields) == sorted(ref_fields)
    for name, values in fields.items():
        np.testing.assert_array_equal(values, ref_fields[name], err_msg=name)
    assert frame_ids == ref_frames


@pytest.mark.parametrize('kind', sorted(POSE_TYPES))
@settings(max_examples=40, deadline=None)
@given(frame=frames,
       values=st.lists(st.tuples(finite, finite, finite, finite, finite), min_size=1,
                       max_size=6),
       sec=st.integers(0, 2**31 - 1), nanosec=st.integers(0, 999_999_999))
def test_fast_path_equals_rosbags(kind: str, frame: str,
                                  values: list[tuple[float, ...]], sec: int,
                                  nanosec: int) -> None:
    """Every field of every message matches rosbags', whatever the frame id length."""
    stamp = sec * 1_000_000_000 + nanosec
    poses = [RecordedPose(stamp + k, stamp + k, x, y, yaw, frame, v, w)
             for k, (x, y, yaw, v, w) in enumerate(values)]
    stream = _stream(kind, poses)
    fast = fixed_layout_fields(stream.data, kind)
    assert fast is not None
    _assert_same(fast, decoded_pose_fields(stream))


@pytest.mark.parametrize('kind', sorted(POSE_TYPES))
def test_mixed_frame_ids_of_one_length_decode_per_message(kind: str) -> None:
    """Frame ids of equal length but different text keep their own text."""
    poses = [RecordedPose(k, k, 0.0, 0.0, 0.0, name) for k, name in enumerate(['map', 'odo'])]
    stream = _stream(kind, poses)
    fast = fixed_layout_fields(stream.data, kind)
    assert fast is not None
    assert fast[1] == ['map', 'odo']
    _assert_same(fast, decoded_pose_fields(stream))


@pytest.mark.parametrize('kind', sorted(POSE_TYPES))
def test_layouts_that_differ_fall_back(kind: str) -> None:
    """Different frame id lengths or big-endian CDR are left to rosbags (None)."""
    poses = [RecordedPose(1, 1, 1.0, 2.0, 0.3, 'map'), RecordedPose(2, 2, 1.0, 2.0, 0.3, 'odom')]
    assert fixed_layout_fields(_stream(kind, poses).data, kind) is None
    same = [RecordedPose(1, 1, 1.0, 2.0, 0.3, 'map'), RecordedPose(2, 2, 1.5, 2.5, 0.4, 'map')]
    big = _stream(kind, same, little_endian=False)
    assert fixed_layout_fields(big.data, kind) is None
    # rosbags reads the big-endian messages; the values are the ones written.
    fields, frame_ids = decoded_pose_fields(big)
    np.testing.assert_array_equal(fields['x'], [1.0, 1.5])
    assert frame_ids == ['map', 'map']


def test_truncated_or_padded_messages_fall_back() -> None:
    """A size that does not match the layout is never decoded by the fast path."""
    poses = [RecordedPose(1, 1, 1.0, 2.0, 0.3, 'map')]
    raw = _stream('pose_stamped', poses).data[0]
    assert fixed_layout_fields([raw[:-8]], 'pose_stamped') is None
    assert fixed_layout_fields([raw + b'\x00' * 8], 'pose_stamped') is None
    assert fixed_layout_fields([], 'pose_stamped') is None


@settings(max_examples=200, deadline=None)
@given(yaw=st.floats(-math.pi + 1e-9, math.pi), roll=st.floats(-0.3, 0.3),
       pitch=st.floats(-0.3, 0.3))
def test_yaw_matches_scipy_rotation(yaw: float, roll: float, pitch: float) -> None:
    """Yaw of a quaternion equals scipy's intrinsic z-y-x Euler yaw (scipy.spatial)."""
    from scipy.spatial.transform import Rotation

    rot = Rotation.from_euler('ZYX', [yaw, pitch, roll])
    qx, qy, qz, qw = rot.as_quat()  # scalar-last, as in geometry_msgs/Quaternion
    ours = float(yaw_from(np.array([qx]), np.array([qy]), np.array([qz]), np.array([qw]))[0])
    ref = rot.as_euler('ZYX')[0]
    assert math.isclose(math.remainder(ours - ref, 2 * math.pi), 0.0, abs_tol=1e-9)
