# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Kinematic bicycle model about the rear-axle centre (m, rad, s; REP 103 signs).

The pose ``(x, y, yaw)`` is that of the rear-axle centre (``base_link``) in the course frame:
x forward, y left, yaw counter-clockwise positive. With speed ``v`` [m/s], steering angle
``delta`` [rad] (positive turns left) and wheelbase ``l`` [m]::

    dx/dt = v cos(yaw),   dy/dt = v sin(yaw),   dyaw/dt = v tan(delta) / l

so at constant inputs the rear axle runs on a circle of radius ``l / tan(delta)``
(Rajamani, *Vehicle Dynamics and Control*, 2nd ed. 2012, ch. 2).
"""

from __future__ import annotations

import math

from corridor_pid.core.kinematics import arc_step, turning_radius, yaw_rate

__all__ = ['arc_step', 'rk4_step', 'turning_radius', 'yaw_rate']


def rk4_step(x: float, y: float, yaw: float, wheelbase: float, dt: float,
             speeds: tuple[float, float, float], steers: tuple[float, float, float]
             ) -> tuple[float, float, float]:
    """Return the pose (m, m, rad) after ``dt`` seconds with time-varying inputs (RK4).

    Args:
        x: rear-axle x at the start of the step (m).
        y: rear-axle y at the start of the step (m).
        yaw: heading at the start of the step (rad).
        wheelbase: rear-to-front axle distance (m).
        dt: step length (s).
        speeds: speed at the start, middle and end of the step (m/s).
        steers: steering angle at the start, middle and end of the step (rad).

    """
    v0, vm, v1 = speeds
    w0 = v0 * math.tan(steers[0]) / wheelbase
    wm = vm * math.tan(steers[1]) / wheelbase
    w1 = v1 * math.tan(steers[2]) / wheelbase
    h2 = 0.5 * dt
    c1, s1 = math.cos(yaw), math.sin(yaw)
    ya = yaw + h2 * w0
    c2, s2 = math.cos(ya), math.sin(ya)
    yb = yaw + h2 * wm
    c3, s3 = math.cos(yb), math.sin(yb)
    yc = yaw + dt * wm
    c4, s4 = math.cos(yc), math.sin(yc)
    k = dt / 6.0
    return (x + k * (v0 * c1 + 2.0 * vm * (c2 + c3) + v1 * c4),
            y + k * (v0 * s1 + 2.0 * vm * (s2 + s3) + v1 * s4),
            yaw + k * (w0 + 4.0 * wm + w1))
