# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Steering and speed actuators: lag, rate limit, angle limit and dead time."""

from __future__ import annotations

import math

from corridor_pid.sim.actuators import lag_response, lag_responses, SpeedActuator, SteeringActuator
import numpy as np
import pytest
from scipy import signal


def test_steering_lag_reaches_63_percent_at_one_time_constant() -> None:
    """A step command reaches 1 - 1/e (63.2 %) of its size one time constant after it acts."""
    # Definition of a first-order system: y(t) = 1 - exp(-t / tau) for a unit step.
    tau, delay = 0.15, 0.08
    act = SteeringActuator(tau, max_rate=100.0, max_angle=0.6, delay=delay)
    act.command(0.0, 0.3)
    act.apply_due(delay)
    act.advance(tau)
    assert act.angle / 0.3 == pytest.approx(1.0 - math.exp(-1.0), abs=1e-9)
    assert act.angle / 0.3 == pytest.approx(0.632, abs=5e-4)


def test_steering_lag_matches_scipy_step_response() -> None:
    """The lag follows scipy.signal's step response of 1 / (tau s + 1)."""
    # Reference library: scipy.signal.step of the transfer function 1 / (tau s + 1).
    tau = 0.2
    times = np.linspace(0.0, 1.0, 11)
    _, reference = signal.step(([1.0], [tau, 1.0]), T=times)
    ours = [lag_response(0.0, 1.0, tau, math.inf, t) for t in times]
    np.testing.assert_allclose(ours, reference, atol=1e-9)


def test_dead_time_holds_the_old_angle() -> None:
    """Nothing moves before the dead time has passed."""
    act = SteeringActuator(0.1, 1.0, 0.5, delay=0.2)
    act.command(1.0, 0.2)
    act.apply_due(1.19)
    assert act.target == 0.0
    assert act.next_change() == pytest.approx(1.2)
    act.apply_due(1.2)
    assert act.target == 0.2


def test_rate_limit_bounds_the_slope() -> None:
    """A large step ramps at max_rate, then settles as a lag."""
    act = SteeringActuator(0.1, max_rate=0.5, max_angle=0.6, delay=0.0)
    act.command(0.0, 0.4)
    act.apply_due(0.0)
    # The lag would ask 4 rad/s; the limit allows 0.5 rad/s until |error| = rate * tau.
    assert act.ramp_time() == pytest.approx((0.4 - 0.05) / 0.5)
    assert act.angle_after(0.2) == pytest.approx(0.1)
    act.advance(0.7)
    assert act.angle == pytest.approx(0.35)
    act.advance(0.1)
    assert act.angle == pytest.approx(0.4 - 0.05 * math.exp(-1.0))


def test_angle_limit_clamps_the_target() -> None:
    """Commands beyond the mechanical limit end at the limit."""
    act = SteeringActuator(0.05, 10.0, 0.45, 0.0)
    act.command(0.0, -2.0)
    act.apply_due(0.0)
    act.advance(5.0)
    assert act.angle == pytest.approx(-0.45)


def test_pure_rate_limiter_without_lag() -> None:
    """With a zero time constant the angle ramps at max_rate and stops on the target."""
    assert lag_response(0.0, 0.3, 0.0, 1.0, 0.1) == pytest.approx(0.1)
    assert lag_response(0.0, 0.3, 0.0, 1.0, 1.0) == 0.3
    assert lag_response(0.2, -0.1, 0.0, math.inf, 0.01) == -0.1


@pytest.mark.parametrize('start, target, tau, rate, dt', [
    (0.0, 0.4, 0.1, 0.5, 0.3), (0.1, 0.12, 0.1, 0.5, 0.01), (0.3, -0.3, 0.0, 2.0, 0.2),
    (0.0, 1.0, 0.25, math.inf, 0.05),
])
def test_paired_responses_equal_single_ones(
        start: float, target: float, tau: float, rate: float, dt: float) -> None:
    """The half-step and full-step pair agrees with two single evaluations."""
    pair = lag_responses(start, target, tau, rate, dt)
    single = (lag_response(start, target, tau, rate, 0.5 * dt),
              lag_response(start, target, tau, rate, dt))
    assert pair == pytest.approx(single, abs=1e-12)


def test_speed_lag() -> None:
    """The speed follows its command as a first-order lag (instant with no lag)."""
    drive = SpeedActuator(0.5)
    drive.command(1.0)
    drive.advance(0.5)
    assert drive.speed == pytest.approx(1.0 - math.exp(-1.0))
    instant = SpeedActuator(0.0)
    instant.command(0.7)
    assert instant.speeds_after(0.01) == (0.7, 0.7)
