# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Simulated pose sensor: rate, seeded Gaussian noise, transport delay, dropouts (m, rad, s).

Sample ``k`` is taken at ``t_k = k / rate`` from the true rear-axle pose. It carries the stamp
``t_k``, position noise ``N(0, position^2)`` on x and y and heading noise ``N(0, heading^2)``
on yaw (all drawn up front from ``numpy.random.default_rng(seed)``, so a seed fixes the run),
and arrives at the controller at ``t_k + delay``. A sample whose time ``t_k`` lies in a dropout
window ``[t0, t1)`` is lost: it never arrives.
"""

from __future__ import annotations

from collections.abc import Sequence
import math

from corridor_pid.core.controller import PoseSample
from corridor_pid.core.course import wrap_angle
import numpy as np

__all__ = ['PoseSensor']


class PoseSensor:
    """Schedule and noise of a pose source sampling at a fixed rate."""

    def __init__(self, rate: float, duration: float, position_noise: float = 0.0,
                 heading_noise: float = 0.0, seed: int = 0, delay: float = 0.0,
                 dropouts: Sequence[tuple[float, float]] = (), frame_id: str = '') -> None:
        """Draw the noise of every sample taken in [0, duration] (rate Hz, noise m / rad)."""
        self.rate = rate
        self.delay = delay
        self.frame_id = frame_id
        count = math.floor(duration * rate + 1e-9) + 1
        self.times: list[float] = [k / rate for k in range(count)]
        rng = np.random.default_rng(seed)
        draws = rng.standard_normal((count, 3))
        draws[:, :2] *= position_noise
        draws[:, 2] *= heading_noise
        self.noise: list[list[float]] = draws.tolist()
        self.lost: list[bool] = [
            any(t0 <= t < t1 for t0, t1 in dropouts) for t in self.times]

    def __len__(self) -> int:
        """Return the number of samples taken over the run (lost ones included)."""
        return len(self.times)

    def arrival(self, k: int) -> float:
        """Return the time (s) at which sample ``k`` reaches the controller."""
        return self.times[k] + self.delay

    def measure(self, k: int, x: float, y: float, yaw: float) -> PoseSample:
        """Return sample ``k`` of the true pose (x [m], y [m], yaw [rad]) with its noise."""
        nx, ny, nyaw = self.noise[k]
        return PoseSample(self.times[k], x + nx, y + ny, wrap_angle(yaw + nyaw),
                          self.frame_id)
