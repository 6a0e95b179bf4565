# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Linearised lateral loop about the centreline at speed v (SI units, radians).

Plant (kinematic bicycle, Rajamani 2012 ch. 2, linearised for small heading error), state
``(y, theta, steer)``::

    dy/dt     = v * theta
    dtheta/dt = v * steer / wheelbase
    dsteer/dt = (u(t - T) - steer) / tau        (first-order actuator lag, dead time T)

measured output ``z = y + L * theta`` (the small-angle form of the controller's
``y + L*sin(theta)``), so from the steering command ``u`` to ``z``::

    P(s) = v * (L*s + v) / (wheelbase * s**2 * (tau*s + 1)) * exp(-s*T)

Controller on ``e = -z`` (``target_offset`` does not enter the loop), parallel PID with the
derivative through a first-order filter of time constant ``Tf`` (``derivative.filter_time``)::

    u = C(s) e,    C(s) = kp + ki/s + kd*s/(Tf*s + 1)

so the loop transfer function, broken at the steering command, is ``L(s) = C(s) * P(s)``
and the closed loop is stable when every root of ``1 + L(s)`` lies in the left half plane.

This module is numpy-only: the node's live guard runs it on the vehicle computer.
Polynomials are numpy coefficient arrays, highest power first (``numpy.polyval`` order).
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property, lru_cache
import math
from typing import TYPE_CHECKING

from corridor_pid.core.errors import TuningError
import numpy as np
import numpy.typing as npt

if TYPE_CHECKING:
    from corridor_pid.core.config import Config

FloatArray = npt.NDArray[np.float64]
ComplexArray = npt.NDArray[np.complex128]

#: Padé order used for closed-loop poles when none is asked for.
DEFAULT_PADE_ORDER = 4


def pade_coefficients(delay: float, order: int) -> tuple[FloatArray, FloatArray]:
    """Return (num, den) of the [order/order] Padé approximant of exp(-s*delay).

    Coefficients are highest power first and normalised so that ``den`` is monic, the form
    python-control's ``pade`` returns.

    Raises:
        TuningError: a negative delay or order.

    """
    if delay < 0.0 or not math.isfinite(delay):
        raise TuningError(f'delay: must be finite and >= 0, got {delay!r}')
    if order < 0:
        raise TuningError(f'pade order: must be >= 0, got {order!r}')
    if delay == 0.0 or order == 0:
        return np.array([1.0]), np.array([1.0])
    n = order
    # c_k = (2n-k)! n! / ((2n)! k! (n-k)!) multiplies (s*delay)^k (den) and (-s*delay)^k (num)
    c = [math.factorial(2 * n - k) * math.factorial(n)
         / (math.factorial(2 * n) * math.factorial(k) * math.factorial(n - k))
         for k in range(n + 1)]
    den = np.array([c[k] * delay ** k for k in range(n, -1, -1)])
    num = np.array([c[k] * (-delay) ** k for k in range(n, -1, -1)])
    lead = den[0]
    return num / lead, den / lead


@lru_cache(maxsize=16)
def _unit_pade_poles(order: int) -> tuple[complex, ...]:
    """Return the poles of the Padé approximant of exp(-s) (delay 1 s)."""
    _, den = pade_coefficients(1.0, order)
    return tuple(complex(r) for r in np.roots(den))


@dataclass(frozen=True)
class RationalLoop:
    """A loop transfer function ``gain * prod(s - z) / prod(s - p) * exp(-s*delay)``.

    Kept in factored form (zeros and poles, repeated poles at the origin exact) so that the
    phase is continuous in frequency and the magnitude is accurate at very low and very high
    frequencies; ``num``/``den`` give the polynomial form.
    """

    gain: float
    zeros: tuple[complex, ...]
    poles: tuple[complex, ...]
    delay: float = 0.0

    @property
    def num(self) -> FloatArray:
        """Numerator coefficients, highest power first."""
        return np.real(self.gain * np.poly(np.array(self.zeros, dtype=complex))) \
            if self.zeros else np.array([self.gain])

    @property
    def den(self) -> FloatArray:
        """Denominator coefficients (monic), highest power first."""
        return np.real(np.poly(np.array(self.poles, dtype=complex))) \
            if self.poles else np.array([1.0])

    def response(self, omega: FloatArray | float) -> ComplexArray:
        """Return L(j*omega) for frequencies omega [rad/s] (exact delay)."""
        return np.asarray(np.exp(self.log_response(omega)), dtype=complex)

    def magnitude(self, omega: FloatArray | float) -> FloatArray:
        """Return |L(j*omega)| for frequencies omega [rad/s]."""
        return np.asarray(np.exp(self.log_response(omega).real), dtype=float)

    def phase(self, omega: FloatArray | float) -> FloatArray:
        """Return the continuous phase of L(j*omega) [rad] for omega > 0 [rad/s]."""
        return np.asarray(self.log_response(omega).imag, dtype=float)

    def log_response(self, omega: FloatArray | float) -> ComplexArray:
        """Return log L(j*omega) = ln|L| + j*phase for omega > 0 [rad/s].

        Each factor contributes its own continuous angle (left-half-plane roots through
        ``j w - r``, right-half-plane ones through ``pi + angle(r - j w)``), so the phase
        needs no unwrapping and stays exact where the delay turns it through many
        revolutions.
        """
        w = np.atleast_1d(np.asarray(omega, dtype=float))
        s = 1j * w[:, None]
        const = complex(math.log(abs(self.gain)), 0.0 if self.gain > 0.0 else math.pi) \
            if self.gain else complex(-math.inf, 0.0)
        total = np.full(w.shape, const, dtype=complex) - 1j * w * self.delay
        roots, weights, right = self._factor_table
        if roots.size:
            with np.errstate(divide='ignore'):
                logs = np.log(np.where(right, roots - s, s - roots)) + 1j * math.pi * right
            total = total + logs @ weights
        return np.asarray(total, dtype=complex)

    @cached_property
    def _factor_table(self) -> tuple[ComplexArray, FloatArray, npt.NDArray[np.bool_]]:
        """Return (roots, +1 for zeros / -1 for poles, right-half-plane mask)."""
        roots = np.array(self.zeros + self.poles, dtype=complex)
        weights = np.concatenate([np.ones(len(self.zeros)), -np.ones(len(self.poles))])
        return roots, weights, roots.real > 0.0

    def with_pade(self, order: int) -> RationalLoop:
        """Return this loop with its delay replaced by a Padé approximant of ``order``."""
        if self.delay == 0.0 or order == 0:
            return RationalLoop(self.gain, self.zeros, self.poles, 0.0)
        poles = tuple(p / self.delay for p in _unit_pade_poles(order))
        # The Padé approximant is all-pass: zeros mirror the poles; gain (-1)^order.
        zeros = tuple(-p for p in poles)
        sign = -1.0 if order % 2 else 1.0
        return RationalLoop(self.gain * sign, self.zeros + zeros, self.poles + poles, 0.0)

    def closed_loop_poles(self, pade_order: int = DEFAULT_PADE_ORDER) -> ComplexArray:
        """Return the roots of 1 + L(s), the delay replaced by a Padé approximant."""
        loop = self.with_pade(pade_order)
        num, den = loop.num, loop.den
        char = np.polyadd(den, num)
        char = np.trim_zeros(char, 'f')
        if char.size <= 1:
            return np.array([], dtype=complex)
        return np.asarray(np.roots(char), dtype=complex)


@dataclass(frozen=True)
class LoopModel:
    """Parameters of the linearised lateral loop at one speed (SI units).

    Attributes:
        speed: forward speed v [m/s], > 0.
        wheelbase: rear to front axle [m], > 0.
        steer_time_constant: actuator lag tau [s] (0 = none).
        steer_delay: dead time T [s] of the actuator and pose pipeline.
        kp: proportional gain [rad/m].
        ki: integral gain [rad/(m*s)].
        kd: derivative gain [rad*s/m].
        lookahead: L [m] in z = y + L*theta.
        filter_time: derivative filter time constant Tf [s] (0 = unfiltered).

    """

    speed: float
    wheelbase: float
    steer_time_constant: float
    steer_delay: float
    kp: float
    ki: float
    kd: float
    lookahead: float
    filter_time: float

    def __post_init__(self) -> None:
        """Reject values the linear model has no meaning for."""
        for name in ('speed', 'wheelbase'):
            value = getattr(self, name)
            if not (math.isfinite(value) and value > 0.0):
                raise TuningError(f'{name}: must be > 0 for the linear loop, got {value!r}')
        for name in ('steer_time_constant', 'steer_delay', 'kp', 'ki', 'kd', 'lookahead',
                     'filter_time'):
            value = getattr(self, name)
            if not (math.isfinite(value) and value >= 0.0):
                raise TuningError(f'{name}: must be finite and >= 0, got {value!r}')

    @classmethod
    def from_config(cls, config: Config, speed: float | None = None,
                    schedule: bool = True) -> LoopModel:
        """Return the loop of ``config`` at ``speed`` [m/s] (default: its cruise speed).

        With ``schedule`` (the default) the gains are those the controller puts in force at
        that speed (``gains.reference_speed > 0`` scales them); without, the stated gains.
        """
        v = config.speed.cruise if speed is None else speed
        gains = config.gains
        kp, ki, kd = gains.kp, gains.ki, gains.kd
        if schedule and gains.reference_speed > 0.0:
            from corridor_pid.core.pid import scheduled_gains
            kp, ki, kd = scheduled_gains(gains, v)
        return cls(speed=v, wheelbase=config.vehicle.wheelbase,
                   steer_time_constant=config.vehicle.steer_time_constant,
                   steer_delay=config.vehicle.steer_delay, kp=kp, ki=ki, kd=kd,
                   lookahead=config.lookahead, filter_time=config.derivative.filter_time)

    # --- polynomial and factored forms -------------------------------------------------

    def controller_polynomials(self) -> tuple[FloatArray, FloatArray]:
        """Return (num, den) of C(s) = kp + ki/s + kd*s/(Tf*s + 1), highest power first.

        The pole at the origin appears only when ki > 0, the filter pole only when Tf > 0.
        """
        tf = self.filter_time
        filt = np.array([tf, 1.0]) if tf > 0.0 else np.array([1.0])
        # kp*(Tf s + 1) + kd*s, times s when ki > 0, plus ki*(Tf s + 1)
        pd = np.polyadd(self.kp * filt, self.kd * np.array([1.0, 0.0]))
        if self.ki > 0.0:
            num = np.polyadd(np.polymul(pd, [1.0, 0.0]), self.ki * filt)
            den = np.polymul(filt, [1.0, 0.0])
        else:
            num, den = pd, filt
        return _trimmed(num), _trimmed(den)

    def plant_polynomials(self) -> tuple[FloatArray, FloatArray]:
        """Return (num, den) of P(s) without its delay: v(Ls + v) / (W s^2 (tau s + 1))."""
        v, length = self.speed, self.lookahead
        num = np.array([v * length, v * v]) if length > 0.0 else np.array([v * v])
        lag = np.array([self.steer_time_constant, 1.0]) if self.steer_time_constant > 0.0 \
            else np.array([1.0])
        den = np.polymul([self.wheelbase, 0.0, 0.0], lag)
        return _trimmed(num), _trimmed(den)

    def plant_state_space(self) -> tuple[FloatArray, FloatArray, FloatArray]:
        """Return (A, B, C) of the delay-free plant, state (y, theta, steer), output z.

        With tau = 0 the steering follows the command at once and the state is (y, theta).
        """
        v, wb, tau, length = self.speed, self.wheelbase, self.steer_time_constant, \
            self.lookahead
        if tau > 0.0:
            a = np.array([[0.0, v, 0.0], [0.0, 0.0, v / wb], [0.0, 0.0, -1.0 / tau]])
            b = np.array([[0.0], [0.0], [1.0 / tau]])
            c = np.array([[1.0, length, 0.0]])
        else:
            a = np.array([[0.0, v], [0.0, 0.0]])
            b = np.array([[0.0], [v / wb]])
            c = np.array([[1.0, length]])
        return a, b, c

    def controller_loop(self) -> RationalLoop:
        """Return C(s) in factored form."""
        num, den = self.controller_polynomials()
        return _factored(num, den, 0.0)

    def plant_loop(self) -> RationalLoop:
        """Return P(s) in factored form, exact delay."""
        v, wb, tau, length = self.speed, self.wheelbase, self.steer_time_constant, \
            self.lookahead
        zeros: tuple[complex, ...] = (complex(-v / length),) if length > 0.0 else ()
        gain = v * length / wb if length > 0.0 else v * v / wb
        poles: tuple[complex, ...] = (0j, 0j)
        if tau > 0.0:
            poles += (complex(-1.0 / tau),)
            gain /= tau
        return RationalLoop(gain, zeros, poles, self.steer_delay)

    def loop(self) -> RationalLoop:
        """Return the loop L(s) = C(s) P(s) with the exact delay, in factored form."""
        c, p = self.controller_loop(), self.plant_loop()
        return RationalLoop(c.gain * p.gain, c.zeros + p.zeros, c.poles + p.poles, p.delay)

    def loop_polynomials(self, pade_order: int) -> tuple[FloatArray, FloatArray]:
        """Return (num, den) of L(s) with the delay replaced by a Padé approximant."""
        cn, cd = self.controller_polynomials()
        pn, pd = self.plant_polynomials()
        dn, dd = pade_coefficients(self.steer_delay, pade_order)
        return (np.polymul(np.polymul(cn, pn), dn), np.polymul(np.polymul(cd, pd), dd))

    def closed_loop_poles(self, pade_order: int = DEFAULT_PADE_ORDER) -> ComplexArray:
        """Return the closed-loop poles [1/s], the delay replaced by a Padé approximant."""
        return self.loop().closed_loop_poles(pade_order)


def _trimmed(poly: npt.ArrayLike) -> FloatArray:
    arr = np.trim_zeros(np.asarray(poly, dtype=float), 'f')
    return arr if arr.size else np.array([0.0])


def _factored(num: FloatArray, den: FloatArray, delay: float) -> RationalLoop:
    """Return the factored form of num/den (leading coefficients taken into the gain)."""
    zeros = tuple(complex(r) for r in np.roots(num)) if num.size > 1 else ()
    poles = tuple(complex(r) for r in np.roots(den)) if den.size > 1 else ()
    return RationalLoop(float(num[0] / den[0]), zeros, poles, delay)
