# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Message conversions: pose messages to samples, commands to Twist forms."""

from __future__ import annotations

import math

from corridor_pid.core.errors import ConfigError
from corridor_pid.ros.convert import (
    ackermann_class,
    pose_converter,
    sample_from_odometry,
    sample_from_pose_stamped,
    sample_from_pose_with_covariance,
    stamp_seconds,
    twist_message,
    twist_stamped_message,
    yaw_from_quaternion,
)
from geometry_msgs.msg import PoseStamped, PoseWithCovarianceStamped
from nav_msgs.msg import Odometry
import numpy as np
import pytest
from ros_helpers import quaternion_z, stamp_of


@pytest.mark.parametrize('yaw', [0.0, 0.3, -1.2, math.pi / 2, 3.0, -3.0])
def test_yaw_of_a_pure_z_rotation(yaw: float) -> None:
    """Q = (0, 0, sin(yaw/2), cos(yaw/2)) gives yaw back (unit quaternion, common practice)."""
    z, w = quaternion_z(yaw)
    assert yaw_from_quaternion(0.0, 0.0, z, w) == pytest.approx(yaw, abs=1e-12)


def test_yaw_matches_scipy_for_tilted_poses() -> None:
    """Yaw of the intrinsic z-y-x decomposition, as scipy.spatial.transform gives it."""
    rotation = pytest.importorskip('scipy.spatial.transform').Rotation
    rng = np.random.default_rng(7)
    for quat in rotation.random(200, random_state=rng).as_quat():   # (x, y, z, w)
        expected = rotation.from_quat(quat).as_euler('ZYX')[0]
        assert yaw_from_quaternion(*quat) == pytest.approx(expected, abs=1e-9)


def test_non_finite_quaternion_gives_nan_yaw() -> None:
    """A NaN component propagates, so the controller rejects the pose."""
    assert math.isnan(yaw_from_quaternion(0.0, 0.0, math.nan, 1.0))


def test_stamp_seconds() -> None:
    """Sec + nanosec * 1e-9."""
    assert stamp_seconds(stamp_of(12.25)) == 12.25


def _fill(msg: object, pose: object) -> None:
    msg.header.stamp = stamp_of(3.5)  # type: ignore[attr-defined]
    msg.header.frame_id = 'map'  # type: ignore[attr-defined]
    pose.position.x, pose.position.y = 1.0, -0.4  # type: ignore[attr-defined]
    pose.orientation.z, pose.orientation.w = quaternion_z(0.25)  # type: ignore[attr-defined]


def test_pose_messages_to_samples() -> None:
    """PoseStamped, PoseWithCovarianceStamped and Odometry give the same pose sample."""
    stamped = PoseStamped()
    _fill(stamped, stamped.pose)
    covariance = PoseWithCovarianceStamped()
    _fill(covariance, covariance.pose.pose)
    odometry = Odometry()
    _fill(odometry, odometry.pose.pose)
    odometry.twist.twist.linear.x, odometry.twist.twist.angular.z = 0.8, -0.05
    samples = [sample_from_pose_stamped(stamped), sample_from_pose_with_covariance(covariance),
               sample_from_odometry(odometry)]
    for s in samples:
        assert (s.stamp, s.x, s.y, s.frame_id) == (3.5, 1.0, -0.4, 'map')
        assert s.yaw == pytest.approx(0.25, abs=1e-12)
    assert samples[0].speed is None and samples[1].yaw_rate is None
    assert (samples[2].speed, samples[2].yaw_rate) == (0.8, -0.05)
    assert pose_converter('odometry') == (Odometry, sample_from_odometry)


def test_twist_forms() -> None:
    """linear.x = speed; angular.z = speed tan(steer) / wheelbase (Rajamani 2012, ch. 2)."""
    plain = twist_message(0.2, 1.5, 0.9)
    assert plain.linear.x == 1.5
    assert plain.angular.z == pytest.approx(1.5 * math.tan(0.2) / 0.9, rel=1e-12)
    stamped = twist_stamped_message(-0.2, 1.5, 0.9, stamp_of(2.0), 'base_link')
    assert stamped.header.frame_id == 'base_link' and stamped.header.stamp.sec == 2
    assert stamped.twist.angular.z == pytest.approx(-plain.angular.z, rel=1e-12)


def test_ackermann_output_needs_its_message_package() -> None:
    """ackermann_msgs has no wheel here (DESIGN §7): a ConfigError naming the package."""
    with pytest.raises(ConfigError, match='ackermann_msgs.*not installed'):
        ackermann_class()
