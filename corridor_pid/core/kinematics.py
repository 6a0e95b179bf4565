# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Kinematic bicycle about the rear-axle centre (m, rad, s), shared by core and simulator.

Rajamani, Vehicle Dynamics and Control, 2nd ed. (2012), ch. 2; used by the controller's
delay compensation and by the simulator::

    dx/dt = v cos(yaw),  dy/dt = v sin(yaw),  dyaw/dt = v tan(steer) / wheelbase
"""

from __future__ import annotations

import math

__all__ = ['arc_step', 'turning_radius', 'yaw_rate']


def yaw_rate(speed: float, steer: float, wheelbase: float) -> float:
    """Return the yaw rate v·tan(steer)/wheelbase (rad/s) of the bicycle."""
    return speed * math.tan(steer) / wheelbase


def turning_radius(steer: float, wheelbase: float) -> float:
    """Return the signed rear-axle turning radius wheelbase/tan(steer) (m; inf if straight)."""
    t = math.tan(steer)
    return math.inf if t == 0.0 else wheelbase / t


def arc_step(x: float, y: float, yaw: float, speed: float, steer: float, wheelbase: float,
             dt: float) -> tuple[float, float, float]:
    """Return the pose (m, m, rad) after ``dt`` seconds at constant speed and steering.

    Exact solution of the bicycle equations for constant inputs: a circular arc, or a
    straight line when the steering is zero. The yaw is not wrapped.
    """
    dyaw = speed * math.tan(steer) / wheelbase * dt
    dist = speed * dt
    if abs(dyaw) < 1e-9:
        # Second-order expansion of the arc; exact to rounding for |dyaw| this small.
        mid = yaw + 0.5 * dyaw
        return x + dist * math.cos(mid), y + dist * math.sin(mid), yaw + dyaw
    r = dist / dyaw
    yaw1 = yaw + dyaw
    return (x + r * (math.sin(yaw1) - math.sin(yaw)),
            y - r * (math.cos(yaw1) - math.cos(yaw)), yaw1)
