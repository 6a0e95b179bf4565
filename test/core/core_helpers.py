# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Small closed-loop and configuration helpers shared by the core tests."""

from __future__ import annotations

import math

from corridor_pid.core.config import Config, config_from_params
from corridor_pid.core.controller import Controller, PoseSample, StepResult


def config(**changes: object) -> Config:
    """Return a validated config from keyword changes spelled with '__' for '.'."""
    return config_from_params({k.replace('__', '.'): v for k, v in changes.items()})


def bicycle_run(cfg: Config, y0: float, duration: float, dt: float = 0.01,
                heading0: float = 0.0) -> list[tuple[float, float, StepResult]]:
    """Return (t, true y, result) of a closed loop with an ideal kinematic bicycle.

    Kinematic bicycle, rear-axle reference (Rajamani 2012, ch. 2): x' = v cos(yaw),
    y' = v sin(yaw), yaw' = v tan(steer) / wheelbase. Explicit Euler at ``dt``.
    """
    ctl = Controller(cfg, enabled=True)
    x, y, yaw = 0.0, y0, heading0
    wb = cfg.vehicle.wheelbase
    out = []
    steps = int(round(duration / dt))
    for k in range(steps):
        t = k * dt
        res = ctl.step(PoseSample(t, x, y, yaw), t)
        out.append((t, y, res))
        v, steer = res.speed, res.steering
        x += v * math.cos(yaw) * dt
        y += v * math.sin(yaw) * dt
        yaw += v * math.tan(steer) / wb * dt
    return out
