# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Actuator models of the simulated vehicle (rad, m/s, s).

Steering: a command enters a dead-time buffer and reaches the actuator ``delay`` seconds
later; the target is clamped to the mechanical angle limit, and the wheel angle ``a``
follows it as a first-order lag whose rate is bounded::

    da/dt = clip((clip(u, -max_angle, max_angle) - a) / time_constant, -max_rate, max_rate)

(a pure rate limiter when ``time_constant`` is 0). Speed: a first-order lag
``dv/dt = (u - v) / time_constant`` (instant when 0). Between command changes both are
solved in closed form, so the simulation advances them exactly over any step.
"""

from __future__ import annotations

from collections import deque
import math

__all__ = [
    'SpeedActuator', 'SteeringActuator', 'lag_response', 'lag_responses', 'rate_limited_time',
]


def rate_limited_time(start: float, target: float, time_constant: float,
                      max_rate: float) -> float:
    """Return how long (s) the rate limit binds on the way from ``start`` to ``target``.

    The lag asks for the rate ``|target - start| / time_constant``; while that exceeds
    ``max_rate`` the angle ramps at ``max_rate``. Returns 0 when the limit does not bind.
    """
    if max_rate == math.inf:
        return 0.0
    excess = abs(target - start) - max_rate * time_constant
    return excess / max_rate if excess > 0.0 else 0.0


def lag_response(start: float, target: float, time_constant: float, max_rate: float,
                 dt: float) -> float:
    """Return the value after ``dt`` seconds of a rate-limited first-order lag.

    Exact solution of ``da/dt = clip((target - a)/time_constant, -max_rate, max_rate)``
    from ``a(0) = start`` (a pure rate limiter for ``time_constant == 0``; no rate limit
    for ``max_rate == inf``).
    """
    err = target - start
    if err == 0.0:
        return target
    sign = 1.0 if err > 0.0 else -1.0
    ramp = rate_limited_time(start, target, time_constant, max_rate)
    if time_constant <= 0.0:
        return start + sign * max_rate * dt if dt < ramp else target
    if dt <= ramp and ramp > 0.0:
        return start + sign * max_rate * dt
    if ramp > 0.0:
        return target - sign * max_rate * time_constant * math.exp(-(dt - ramp) / time_constant)
    return target - err * math.exp(-dt / time_constant)


def lag_responses(start: float, target: float, time_constant: float, max_rate: float,
                  dt: float) -> tuple[float, float]:
    """Return the :func:`lag_response` values after ``dt / 2`` and after ``dt`` seconds."""
    err = target - start
    if err == 0.0:
        return target, target
    if time_constant > 0.0 and abs(err) <= max_rate * time_constant:  # the rate limit is idle
        half = math.exp(-0.5 * dt / time_constant)
        return target - err * half, target - err * half * half
    return (lag_response(start, target, time_constant, max_rate, 0.5 * dt),
            lag_response(start, target, time_constant, max_rate, dt))


class SteeringActuator:
    """Steering with dead time, angle limit, rate limit and first-order lag (rad, s)."""

    def __init__(self, time_constant: float, max_rate: float, max_angle: float,
                 delay: float, angle: float = 0.0) -> None:
        """Start at ``angle`` [rad] holding it, with an empty dead-time buffer."""
        self.time_constant = time_constant
        self.max_rate = max_rate
        self.max_angle = max_angle
        self.delay = delay
        self.angle = angle
        self.target = angle
        self._queue: deque[tuple[float, float]] = deque()

    def command(self, t: float, value: float) -> None:
        """Send the steering command ``value`` [rad] at time ``t`` [s]; it acts at t+delay."""
        self._queue.append((t + self.delay, value))

    def next_change(self) -> float:
        """Return the time (s) at which the next buffered command reaches the actuator."""
        return self._queue[0][0] if self._queue else math.inf

    def apply_due(self, t: float) -> None:
        """Make every command due at or before ``t`` [s] the current target."""
        queue = self._queue
        while queue and queue[0][0] <= t:
            value = queue.popleft()[1]
            limit = self.max_angle
            self.target = limit if value > limit else -limit if value < -limit else value

    def ramp_time(self) -> float:
        """Return how long (s) the rate limit keeps binding from now with the current target."""
        return rate_limited_time(self.angle, self.target, self.time_constant, self.max_rate)

    def angle_after(self, dt: float) -> float:
        """Return the wheel angle (rad) ``dt`` seconds from now, target held."""
        return lag_response(self.angle, self.target, self.time_constant, self.max_rate, dt)

    def angles_after(self, dt: float) -> tuple[float, float]:
        """Return the wheel angles (rad) ``dt / 2`` and ``dt`` seconds from now, target held."""
        return lag_responses(self.angle, self.target, self.time_constant, self.max_rate, dt)

    def advance(self, dt: float) -> None:
        """Move the wheel angle ``dt`` seconds on."""
        self.angle = self.angle_after(dt)


class SpeedActuator:
    """Drive speed following its command as a first-order lag (m/s, s)."""

    def __init__(self, time_constant: float, speed: float = 0.0) -> None:
        """Start at ``speed`` [m/s] with that as the command."""
        self.time_constant = time_constant
        self.speed = speed
        self.target = speed

    def command(self, value: float) -> None:
        """Set the speed command [m/s]; it acts at once."""
        self.target = value

    def speed_after(self, dt: float) -> float:
        """Return the speed (m/s) ``dt`` seconds from now, command held."""
        return lag_response(self.speed, self.target, self.time_constant, math.inf, dt)

    def speeds_after(self, dt: float) -> tuple[float, float]:
        """Return the speeds (m/s) ``dt / 2`` and ``dt`` seconds from now, command held."""
        return lag_responses(self.speed, self.target, self.time_constant, math.inf, dt)

    def advance(self, dt: float) -> None:
        """Move the speed ``dt`` seconds on."""
        self.speed = self.speed_after(dt)
