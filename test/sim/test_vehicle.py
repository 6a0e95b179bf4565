# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""The kinematic bicycle against its closed-form circle."""

from __future__ import annotations

import math

from corridor_pid.sim.vehicle import arc_step, rk4_step, turning_radius, yaw_rate
import numpy as np
import pytest

WHEELBASE = 0.9


@pytest.mark.parametrize('steer', [0.05, 0.2, -0.35])
def test_constant_steering_runs_on_the_turning_circle(steer: float) -> None:
    """Constant steering keeps the rear axle on a circle of radius wheelbase / tan(steer)."""
    # Rajamani, Vehicle Dynamics and Control, 2nd ed. (2012), ch. 2: R = l / tan(delta).
    radius = WHEELBASE / math.tan(steer)
    assert turning_radius(steer, WHEELBASE) == pytest.approx(radius)
    # Start at the origin heading along x: the centre lies at (0, R) (left for R > 0).
    x, y, yaw = 0.0, 0.0, 0.0
    points = []
    for _ in range(400):
        x, y, yaw = rk4_step(x, y, yaw, WHEELBASE, 0.01, (1.2, 1.2, 1.2), (steer,) * 3)
        points.append((x, y))
    xy = np.array(points)
    distances = np.hypot(xy[:, 0], xy[:, 1] - radius)
    np.testing.assert_allclose(distances, abs(radius), rtol=1e-9)


@pytest.mark.parametrize('speed, steer', [(1.0, 0.2), (0.6, -0.4), (1.8, 0.0)])
def test_yaw_rate_is_speed_times_tan_steer_over_wheelbase(speed: float, steer: float) -> None:
    """The heading turns at v * tan(steer) / wheelbase."""
    # Rajamani, Vehicle Dynamics and Control, 2nd ed. (2012), ch. 2.
    expected = speed * math.tan(steer) / WHEELBASE
    assert yaw_rate(speed, steer, WHEELBASE) == pytest.approx(expected)
    _, _, yaw = arc_step(0.0, 0.0, 0.3, speed, steer, WHEELBASE, 2.0)
    assert (yaw - 0.3) / 2.0 == pytest.approx(expected)


def test_rk4_agrees_with_the_exact_arc_at_constant_inputs() -> None:
    """RK4 with constant inputs reproduces the exact arc to well below a millimetre."""
    exact = arc_step(1.0, -2.0, 0.7, 1.5, 0.3, WHEELBASE, 0.05)
    approx = rk4_step(1.0, -2.0, 0.7, WHEELBASE, 0.05, (1.5,) * 3, (0.3,) * 3)
    np.testing.assert_allclose(approx, exact, atol=1e-9)


def test_signs_follow_rep_103() -> None:
    """Positive steering turns left (counter-clockwise): y and yaw grow from rest on x."""
    # REP 103: x forward, y left, yaw counter-clockwise positive.
    x, y, yaw = arc_step(0.0, 0.0, 0.0, 1.0, 0.2, WHEELBASE, 1.0)
    assert x > 0.0 and y > 0.0 and yaw > 0.0


def test_straight_line_without_steering() -> None:
    """Zero steering drives straight along the heading."""
    x, y, yaw = arc_step(0.0, 0.0, math.pi / 2, 2.0, 0.0, WHEELBASE, 1.5)
    assert (x, y, yaw) == pytest.approx((0.0, 3.0, math.pi / 2))
