# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Loop models used across the tuning tests and their python-control twins."""

from __future__ import annotations

import control
from corridor_pid.tuning.linear import LoopModel
import numpy as np

# Vehicle and gain sets of our own invention (a hospital delivery cart and a row robot),
# chosen to cover: no integral, integral (conditionally stable), no lookahead, no filter,
# no actuator lag, a long dead time.
MODELS: dict[str, LoopModel] = {
    'defaults': LoopModel(speed=1.0, wheelbase=0.9, steer_time_constant=0.1,
                          steer_delay=0.05, kp=0.6, ki=0.0, kd=0.25, lookahead=1.0,
                          filter_time=0.05),
    'integral': LoopModel(speed=1.0, wheelbase=0.9, steer_time_constant=0.1,
                          steer_delay=0.05, kp=0.6, ki=0.3, kd=0.25, lookahead=1.0,
                          filter_time=0.05),
    'fast_cart': LoopModel(speed=2.5, wheelbase=1.2, steer_time_constant=0.15,
                           steer_delay=0.08, kp=0.4, ki=0.1, kd=0.15, lookahead=2.0,
                           filter_time=0.03),
    'no_lookahead': LoopModel(speed=0.8, wheelbase=0.6, steer_time_constant=0.05,
                              steer_delay=0.03, kp=0.5, ki=0.05, kd=0.6, lookahead=0.0,
                              filter_time=0.02),
    'no_filter_no_lag': LoopModel(speed=1.2, wheelbase=0.9, steer_time_constant=0.0,
                                  steer_delay=0.06, kp=0.8, ki=0.2, kd=0.3, lookahead=1.5,
                                  filter_time=0.0),
    'long_delay': LoopModel(speed=1.5, wheelbase=1.0, steer_time_constant=0.2,
                            steer_delay=0.25, kp=0.3, ki=0.02, kd=0.2, lookahead=3.0,
                            filter_time=0.1),
}


def control_loop(model: LoopModel, pade_order: int) -> control.TransferFunction:
    """Return L(s) of ``model`` assembled from python-control's own primitives."""
    s = control.tf('s')
    c = model.kp + model.kd * s / (model.filter_time * s + 1.0)
    if model.ki > 0.0:
        c = c + model.ki / s
    v, wb, length = model.speed, model.wheelbase, model.lookahead
    plant = v * (length * s + v) / (wb * s * s) / (model.steer_time_constant * s + 1.0)
    num, den = control.pade(model.steer_delay, pade_order)
    return c * plant * control.tf(num, den)


def matched(ours: np.ndarray, theirs: np.ndarray, rel: float) -> bool:
    """Return True if the two root sets agree one to one within ``rel`` of each magnitude."""
    if ours.size != theirs.size:
        return False
    left = list(theirs)
    for p in ours:
        dist = [abs(p - q) for q in left]
        k = int(np.argmin(dist))
        if dist[k] > rel * max(abs(p), 1e-9):
            return False
        left.pop(k)
    return True
