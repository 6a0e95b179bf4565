# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Alpha-beta smoothing of the lateral offset y [m] and heading error theta [rad].

For each signal: predict ``x_p = x + h*v``; correct ``x = x_p + alpha*(z - x_p)``,
``v = v + beta*(z - x_p)/h`` (common practice, no source: the steady-state form of a
constant-velocity Kalman filter). Both signals share one object so the controller's hot
path pays one call.
"""

from __future__ import annotations

__all__ = ['AlphaBetaPair']


class AlphaBetaPair:
    """Alpha-beta filter state of y and theta: estimates and their rates (per second)."""

    __slots__ = ('y', 'y_rate', 'theta', 'theta_rate', 'primed')

    def __init__(self) -> None:
        """Start empty: the first measurement is taken as is."""
        self.y = self.y_rate = self.theta = self.theta_rate = 0.0
        self.primed = False

    def reset(self) -> None:
        """Forget the estimates."""
        self.y_rate = self.theta_rate = 0.0
        self.primed = False

    def update(self, y: float, theta: float, h: float, alpha: float, beta: float
               ) -> tuple[float, float]:
        """Return the smoothed (y [m], theta [rad]) after measurements taken ``h`` [s] later."""
        if not self.primed or h <= 0.0:
            if not self.primed:
                self.y, self.theta, self.primed = y, theta, True
                self.y_rate = self.theta_rate = 0.0
            return self.y, self.theta
        y_pred = self.y + h * self.y_rate
        r = y - y_pred
        self.y = y_out = y_pred + alpha * r
        self.y_rate += beta * r / h
        th_pred = self.theta + h * self.theta_rate
        r = theta - th_pred
        self.theta = th_out = th_pred + alpha * r
        self.theta_rate += beta * r / h
        return y_out, th_out
