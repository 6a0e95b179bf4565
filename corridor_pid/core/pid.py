# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""The three-term law with derivative filter and windup guard, and speed scheduling.

Governing equations (continuous form; the discrete updates are backward Euler with the
actual interval ``h`` between accepted samples)::

    P = kp * e
    D = kd * r_f,        Tf * dr_f/dt + r_f = dm/dt        (first-order filter, Tf = filter_time)
    dI/dt = ki * e + (u_lim - u) / Tt                      (method 'tracking', Tt = tracking_time)
    dI/dt = ki * e   only while not saturated or unwinding (method 'conditional')
    |I| <= bound

``m`` is the measured part of the error (or the error itself, ``derivative.source``), ``u``
the unclamped output and ``u_lim`` the limited one. ``I`` is kept in output units [rad], so
a change of ``ki`` never steps the output (Åström & Hägglund, *Advanced PID Control*, 2006).
"""

from __future__ import annotations

import math

from corridor_pid.core.config import Gains, IntegralSettings

__all__ = ['Integrator', 'RateFilter', 'scheduled_gains']


def scheduled_gains(gains: Gains, speed: float) -> tuple[float, float, float]:
    """Return (kp, ki, kd) in force at ``speed`` [m/s].

    With ``reference_speed`` v0 > 0 the gains are scaled so the loop is the same in the
    distance domain: P unchanged, D by v0/v, I by v/v0 (d/dt = v d/ds). The speed is floored
    at v0/4 so the D gain stays bounded while starting from rest.
    """
    ref = gains.reference_speed
    if ref <= 0.0:
        return gains.kp, gains.ki, gains.kd
    v = max(abs(speed), 0.25 * ref)
    return gains.kp, gains.ki * v / ref, gains.kd * ref / v


class RateFilter:
    """First-order low-pass filtered rate of a signal (units of the signal per second)."""

    __slots__ = ('value', 'last', 'primed')

    def __init__(self) -> None:
        """Start empty: the first sample gives a zero rate."""
        self.value = 0.0
        self.last = 0.0
        self.primed = False

    def reset(self) -> None:
        """Forget the history."""
        self.value = 0.0
        self.primed = False

    def update(self, signal: float, h: float, filter_time: float) -> float:
        """Return the filtered rate after ``signal`` arrives ``h`` [s] after the last one."""
        if not self.primed or h <= 0.0:
            self.last = signal
            self.primed = True
            return self.value
        raw = (signal - self.last) / h
        self.last = signal
        self.value = (filter_time * self.value + h * raw) / (filter_time + h)
        return self.value

    def update_rate(self, rate: float, h: float, filter_time: float) -> float:
        """Return the filtered rate when the raw rate is known directly (e.g. kinematics)."""
        if h <= 0.0:
            return self.value
        self.value = (filter_time * self.value + h * rate) / (filter_time + h)
        return self.value


class Integrator:
    """Integral term [rad] with a selectable windup guard."""

    __slots__ = ('value',)

    def __init__(self) -> None:
        """Start at zero."""
        self.value = 0.0

    def update(self, ki: float, error: float, h: float, excess: float,
               settings: IntegralSettings) -> float:
        """Return the integral after ``h`` [s] with ``error`` [m].

        ``excess`` is ``u_lim - u`` [rad] of the last cycle: how far the limits bound the
        command (0 when not saturated).
        """
        if h <= 0.0:
            return self.value
        method = settings.method
        rate = ki * error
        if method == 'tracking' and ki > 0.0:
            # Back-calculation only where there is integral action: with ki = 0 the
            # saturation excess must not wind a term that nothing ever unwinds.
            rate += excess / settings.tracking_time
        elif method == 'conditional' and excess != 0.0 and rate * excess < 0.0:
            rate = 0.0
        value = self.value + h * rate
        bound = settings.bound
        if value > bound:
            value = bound
        elif value < -bound:
            value = -bound
        if math.isfinite(value):
            self.value = value
        return self.value
