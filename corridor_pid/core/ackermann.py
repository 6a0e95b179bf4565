# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Output mappings of the command (steering [rad], speed [m/s]) for the drive interfaces.

Kinematic bicycle (Rajamani, *Vehicle Dynamics and Control*, 2nd ed., ch. 2): with the
steering angle ``delta`` of the virtual front wheel and the wheelbase ``l``, the rear axle
turns on the radius ``R = l / tan(delta)``, so the yaw rate at speed ``v`` is::

    yaw_rate = v / R = v * tan(delta) / l        [rad/s], positive counter-clockwise (REP 103)

This is the ``angular.z`` of ``cmd_vel``. The Ackermann drive message carries the virtual
angle itself (``steering_angle``) and the speed; the node already limits the angle rate and
the acceleration, so the rate fields are 0, which the message defines as "follow the
command as published" (no further limiting by the drive).
"""

from __future__ import annotations

import math
from typing import NamedTuple

from corridor_pid.core.kinematics import yaw_rate

__all__ = ['AckermannFields', 'ackermann_fields', 'yaw_rate_from']


class AckermannFields(NamedTuple):
    """The fields of an Ackermann drive command, in the message's units."""

    steering_angle: float
    """Virtual (bicycle-model) front-wheel angle [rad], positive left."""
    steering_angle_velocity: float
    """Steering rate limit for the drive [rad/s]; 0 = as commanded."""
    speed: float
    """Forward speed of the rear axle [m/s]."""
    acceleration: float
    """Acceleration limit for the drive [m/s^2]; 0 = as commanded."""
    jerk: float
    """Jerk limit for the drive [m/s^3]; 0 = as commanded."""


def _checked_wheelbase(wheelbase: float) -> float:
    if not (math.isfinite(wheelbase) and wheelbase > 0.0):
        raise ValueError(f'wheelbase: must be a finite length > 0 m, got {wheelbase!r}')
    return wheelbase


def yaw_rate_from(steering: float, speed: float, wheelbase: float) -> float:
    """Return the bicycle-model yaw rate [rad/s] for ``steering`` [rad] at ``speed`` [m/s].

    Args:
        steering: virtual front-wheel angle [rad], positive left (|steering| < pi/2).
        speed: rear-axle speed [m/s].
        wheelbase: rear to front axle [m], > 0.

    Raises:
        ValueError: for a wheelbase that is not a positive finite length.

    """
    return yaw_rate(speed, steering, _checked_wheelbase(wheelbase))


def ackermann_fields(steering: float, speed: float, wheelbase: float) -> AckermannFields:
    """Return the Ackermann drive fields for a command (steering [rad], speed [m/s]).

    The wheelbase [m] is the one the yaw-rate form of ``cmd_vel`` uses; it is checked here so
    both outputs describe the same vehicle.

    Raises:
        ValueError: for a wheelbase that is not a positive finite length.

    """
    _checked_wheelbase(wheelbase)
    return AckermannFields(steering, 0.0, speed, 0.0, 0.0)
