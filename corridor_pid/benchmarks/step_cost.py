# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Cost of one ``Controller.step`` against a bare three-term PID loop, in the same process.

The bare loop is the least a Python controller object does per sample: a method call that
computes P, I and D on a scalar error with dt from the stamps (:class:`BarePid`). The ratio
says what the rest of the step (projection, filters, limits, speed policy, states, the
result record) costs on this computer.
"""

from __future__ import annotations

import math
import time
from typing import NamedTuple

from corridor_pid.core.config import config_from_params
from corridor_pid.core.controller import Controller, PoseSample


class StepCost(NamedTuple):
    """Per-call costs [s] and their ratios to the bare loop."""

    bare: float
    straight: float
    polyline: float

    @property
    def straight_ratio(self) -> float:
        """Full step on a straight course / bare loop."""
        return self.straight / self.bare

    @property
    def polyline_ratio(self) -> float:
        """Full step on a 200-vertex polyline / bare loop."""
        return self.polyline / self.bare


class BarePid:
    """The plainest three-term controller: P, I and D on a scalar error, dt from stamps."""

    __slots__ = ('kp', 'ki', 'kd', 'integral', 'last_error', 'last_t')

    def __init__(self, kp: float, ki: float, kd: float) -> None:
        """Store the gains; no limits, no filter."""
        self.kp, self.ki, self.kd = kp, ki, kd
        self.integral = 0.0
        self.last_error = 0.0
        self.last_t: float | None = None

    def update(self, error: float, t: float) -> float:
        """Return kp*e + ki*integral(e) + kd*de/dt for the error [m] at time t [s]."""
        last_t = self.last_t
        derivative = 0.0
        if last_t is not None and t > last_t:
            dt = t - last_t
            self.integral += error * dt
            derivative = (error - self.last_error) / dt
        self.last_t, self.last_error = t, error
        return self.kp * error + self.ki * self.integral + self.kd * derivative


def _bare_pid_cost(n: int) -> float:
    """Return the time per sample [s] of the bare PID over n samples at 100 Hz."""
    pid = BarePid(0.6, 0.1, 0.2)
    samples = [(0.3 * math.sin(0.01 * k), 0.01 * k) for k in range(n)]
    update = pid.update
    start = time.perf_counter()
    out = 0.0
    for e, t in samples:
        out = update(e, t)
    elapsed = time.perf_counter() - start
    assert math.isfinite(out)
    return elapsed / n


def polyline_points(vertices: int = 200, spacing: float = 1.0) -> list[float]:
    """Return a gentle S-weaving polyline of ``vertices`` points, flat [x0, y0, ...] (m)."""
    pts: list[float] = []
    for k in range(vertices):
        x = k * spacing
        pts += [x, 3.0 * math.sin(x / 25.0)]
    return pts


def _step_cost(points: list[float], n: int) -> float:
    """Return the time per ``Controller.step`` [s] following the course at 100 Hz."""
    cfg = config_from_params({'course.points': points, 'speed.cruise': 1.0})
    ctl = Controller(cfg, enabled=True)
    course = ctl.course
    length = course.length if math.isfinite(course.length) else 1e9
    samples = []
    for k in range(n):
        s = (0.01 * k) % max(length - 1.0, 1.0)
        x, y, yaw = course.global_pose(s, 0.05 * math.sin(0.02 * k), 0.01)
        samples.append(PoseSample(0.01 * k, x, y, yaw))
    step = ctl.step
    start = time.perf_counter()
    for sample in samples:
        step(sample, sample.stamp)
    return (time.perf_counter() - start) / n


def measure_step_cost(n: int = 20000, repeats: int = 5) -> StepCost:
    """Return the best-of-``repeats`` per-call costs of the bare loop and the full step."""
    bare = min(_bare_pid_cost(n) for _ in range(repeats))
    straight = min(_step_cost([], n) for _ in range(repeats))
    poly = polyline_points()
    polyline = min(_step_cost(poly, n) for _ in range(repeats))
    return StepCost(bare, straight, polyline)
