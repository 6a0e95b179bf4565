# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Message conversions: pose messages -> :class:`PoseSample`, commands -> output messages.

Conventions (REP 103): x forward, y left, yaw counter-clockwise positive, SI units. A pose
message's header stamp becomes ``PoseSample.stamp`` [s]; its frame id is carried so the core
can enforce ``pose_frame``. An Odometry message also gives the forward speed
(``twist.twist.linear.x``, child frame) and the yaw rate (``twist.twist.angular.z``).

Outputs: ``steering_angle`` and ``target_speed`` as ``std_msgs/Float64``; ``cmd_vel`` in the
yaw-rate form (``linear.x`` = speed, ``angular.z`` = speed * tan(steer) / wheelbase, see
:mod:`corridor_pid.core.ackermann`), stamped or plain; ``ackermann_drive`` with the fields
of :func:`corridor_pid.core.ackermann.ackermann_fields`.
"""

from __future__ import annotations

from collections.abc import Callable
import math
from typing import Any

from builtin_interfaces.msg import Time
from corridor_pid.core.ackermann import ackermann_fields, yaw_rate_from
from corridor_pid.core.controller import PoseSample
from corridor_pid.core.errors import ConfigError
from geometry_msgs.msg import PoseStamped, PoseWithCovarianceStamped, Twist, TwistStamped
from nav_msgs.msg import Odometry

__all__ = [
    'POSE_TYPES', 'ackermann_class', 'ackermann_message', 'pose_converter', 'sample_from_odometry',
    'sample_from_pose_stamped', 'sample_from_pose_with_covariance', 'set_stamp', 'set_twist',
    'stamp_seconds', 'twist_message', 'twist_stamped_message', 'yaw_from_quaternion',
]


def stamp_seconds(stamp: Time) -> float:
    """Return a ``builtin_interfaces/Time`` as seconds [s]."""
    return float(stamp.sec + stamp.nanosec * 1e-9)


def yaw_from_quaternion(x: float, y: float, z: float, w: float) -> float:
    """Return the yaw [rad] (rotation about z, in (-pi, pi]) of a unit quaternion.

    The z-y-x (yaw-pitch-roll) decomposition: ``atan2(2 (w z + x y), 1 - 2 (y^2 + z^2))``.
    A non-finite component gives NaN, which the controller rejects.
    """
    return math.atan2(2.0 * (w * z + x * y), 1.0 - 2.0 * (y * y + z * z))


def _sample(header: Any, pose: Any, speed: float | None = None,
            yaw_rate: float | None = None) -> PoseSample:
    q = pose.orientation
    p = pose.position
    return PoseSample(stamp_seconds(header.stamp), p.x, p.y,
                      yaw_from_quaternion(q.x, q.y, q.z, q.w), header.frame_id,
                      speed, yaw_rate)


def sample_from_pose_stamped(msg: PoseStamped) -> PoseSample:
    """Return the sample of a ``geometry_msgs/PoseStamped``."""
    return _sample(msg.header, msg.pose)


def sample_from_pose_with_covariance(msg: PoseWithCovarianceStamped) -> PoseSample:
    """Return the sample of a ``geometry_msgs/PoseWithCovarianceStamped`` (covariance unused)."""
    return _sample(msg.header, msg.pose.pose)


def sample_from_odometry(msg: Odometry) -> PoseSample:
    """Return the sample of a ``nav_msgs/Odometry`` with speed [m/s] and yaw rate [rad/s]."""
    twist = msg.twist.twist
    return _sample(msg.header, msg.pose.pose, twist.linear.x, twist.angular.z)


POSE_TYPES: dict[str, tuple[type, Callable[[Any], PoseSample]]] = {
    'pose_stamped': (PoseStamped, sample_from_pose_stamped),
    'pose_with_covariance': (PoseWithCovarianceStamped, sample_from_pose_with_covariance),
    'odometry': (Odometry, sample_from_odometry),
}
"""``pose_type`` value -> (message class, converter)."""


def pose_converter(pose_type: str) -> tuple[type, Callable[[Any], PoseSample]]:
    """Return the message class and the converter for a ``pose_type`` value."""
    return POSE_TYPES[pose_type]


def set_twist(twist: Twist, steering: float, speed: float, wheelbase: float) -> None:
    """Write a command into ``twist``: linear.x = speed [m/s], angular.z = yaw rate [rad/s]."""
    twist.linear.x = speed
    twist.angular.z = yaw_rate_from(steering, speed, wheelbase)


def set_stamp(stamp: Time, nanoseconds: int) -> None:
    """Write a time in nanoseconds into a ``builtin_interfaces/Time``."""
    stamp.sec, stamp.nanosec = divmod(nanoseconds, 1_000_000_000)


def twist_message(steering: float, speed: float, wheelbase: float) -> Twist:
    """Return the plain ``Twist`` of a command: linear.x [m/s], angular.z [rad/s]."""
    msg = Twist()
    set_twist(msg, steering, speed, wheelbase)
    return msg


def twist_stamped_message(steering: float, speed: float, wheelbase: float, stamp: Time,
                          frame_id: str) -> TwistStamped:
    """Return the ``TwistStamped`` of a command, stamped with the node clock."""
    msg = TwistStamped()
    msg.header.stamp = stamp
    msg.header.frame_id = frame_id
    set_twist(msg.twist, steering, speed, wheelbase)
    return msg


def ackermann_class() -> type:
    """Return ``ackermann_msgs.msg.AckermannDriveStamped``.

    Raises:
        ConfigError: the message package is not installed (``output_type: ackermann``).

    """
    try:
        from ackermann_msgs.msg import AckermannDriveStamped
    except ImportError as err:
        raise ConfigError(
            "output_type: 'ackermann' needs the ackermann_msgs message package, which is "
            'not installed here (install ros-<distro>-ackermann-msgs, or set output_type: '
            "'twist')") from err
    return AckermannDriveStamped  # type: ignore[no-any-return]


def ackermann_message(message_class: type, steering: float, speed: float, wheelbase: float,
                      stamp: Time, frame_id: str) -> Any:
    """Return an ``AckermannDriveStamped`` (class passed in: an optional package)."""
    fields = ackermann_fields(steering, speed, wheelbase)
    msg = message_class()
    msg.header.stamp = stamp
    msg.header.frame_id = frame_id
    drive = msg.drive
    drive.steering_angle = fields.steering_angle
    drive.steering_angle_velocity = fields.steering_angle_velocity
    drive.speed = fields.speed
    drive.acceleration = fields.acceleration
    drive.jerk = fields.jerk
    return msg
