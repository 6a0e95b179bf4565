# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Alpha-beta smoothing of a measured signal (lateral offset [m] or heading error [rad]).

Predict ``x_p = x + h*v``; correct ``x = x_p + alpha*(z - x_p)``, ``v = v + beta*(z - x_p)/h``
(common practice, no source: the steady-state form of a constant-velocity Kalman filter).
"""

from __future__ import annotations

__all__ = ['AlphaBeta']


class AlphaBeta:
    """Alpha-beta filter state: estimate and its rate (units per second)."""

    __slots__ = ('value', 'rate', 'primed')

    def __init__(self) -> None:
        """Start empty: the first measurement is taken as is."""
        self.value = 0.0
        self.rate = 0.0
        self.primed = False

    def reset(self) -> None:
        """Forget the estimate."""
        self.rate = 0.0
        self.primed = False

    def update(self, z: float, h: float, alpha: float, beta: float) -> float:
        """Return the smoothed estimate after measurement ``z`` taken ``h`` [s] later."""
        if not self.primed or h <= 0.0:
            if not self.primed:
                self.value, self.rate, self.primed = z, 0.0, True
            return self.value
        predicted = self.value + h * self.rate
        residual = z - predicted
        self.value = predicted + alpha * residual
        self.rate += beta * residual / h
        return self.value
