# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Output mappings: the yaw-rate form of cmd_vel and the Ackermann drive fields."""

from __future__ import annotations

import math

from corridor_pid.core.ackermann import ackermann_fields, AckermannFields, yaw_rate_from
import pytest


def test_yaw_rate_is_speed_over_turning_radius() -> None:
    """Yaw rate = v / R with R = wheelbase / tan(steer) (Rajamani 2012, ch. 2)."""
    wheelbase, steer, speed = 1.2, 0.25, 1.5
    radius = wheelbase / math.tan(steer)
    assert yaw_rate_from(steer, speed, wheelbase) == pytest.approx(speed / radius, rel=1e-12)


def test_yaw_rate_worked_example() -> None:
    """Worked example by hand: L = 2 m, delta = 45 deg -> R = 2 m; v = 1 m/s -> 0.5 rad/s."""
    assert yaw_rate_from(math.pi / 4.0, 1.0, 2.0) == pytest.approx(0.5, rel=1e-12)


@pytest.mark.parametrize(('steer', 'sign'), [(0.2, 1.0), (-0.2, -1.0), (0.0, 0.0)])
def test_yaw_rate_sign_follows_rep_103(steer: float, sign: float) -> None:
    """REP 103: positive steering turns left, i.e. a positive (counter-clockwise) yaw rate."""
    rate = yaw_rate_from(steer, 0.8, 0.9)
    assert math.copysign(1.0, rate) * (rate != 0.0) == sign


def test_yaw_rate_is_zero_at_standstill() -> None:
    """A stopped vehicle does not turn whatever the steering angle."""
    assert yaw_rate_from(0.4, 0.0, 0.9) == 0.0


@pytest.mark.parametrize('wheelbase', [0.0, -1.0, math.nan, math.inf])
def test_bad_wheelbase_is_refused(wheelbase: float) -> None:
    """A wheelbase that is not a positive finite length is refused, naming the value."""
    with pytest.raises(ValueError, match='wheelbase'):
        yaw_rate_from(0.1, 1.0, wheelbase)
    with pytest.raises(ValueError, match='wheelbase'):
        ackermann_fields(0.1, 1.0, wheelbase)


def test_ackermann_fields_carry_angle_and_speed() -> None:
    """The drive gets the virtual angle and the speed as they are; limits are 0 ("as given").

    Field meanings as in the AckermannDrive message definition of the ackermann_msgs package
    (from memory of that definition: a zero steering_angle_velocity, acceleration or jerk
    means "no limit requested").
    """
    fields = ackermann_fields(-0.3, 1.25, 0.9)
    assert fields == AckermannFields(-0.3, 0.0, 1.25, 0.0, 0.0)
    assert fields._fields == (
        'steering_angle', 'steering_angle_velocity', 'speed', 'acceleration', 'jerk')


def test_ackermann_and_twist_describe_the_same_turn() -> None:
    """Both outputs give the same turning radius R = v / yaw_rate = L / tan(delta)."""
    wheelbase, steer, speed = 0.9, 0.35, 1.1
    fields = ackermann_fields(steer, speed, wheelbase)
    radius_from_twist = speed / yaw_rate_from(steer, speed, wheelbase)
    radius_from_ackermann = wheelbase / math.tan(fields.steering_angle)
    assert radius_from_twist == pytest.approx(radius_from_ackermann, rel=1e-12)
