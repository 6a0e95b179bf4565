# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Closed-loop behaviour: linearised poles, windup, lookahead and gain effects."""

from __future__ import annotations

import control
from corridor_pid.sim.loop import simulate
import numpy as np
import pytest
from scipy.optimize import curve_fit
from sim_helpers import params, scenario

SPEED, WHEELBASE, STEER_TAU, FILTER = 1.0, 0.9, 0.1, 0.05


def _linear_setup(kp: float, kd: float, lookahead: float, steer_delay: float
                  ) -> tuple[np.ndarray, np.ndarray]:
    """Return (t, y) of a small-error run at constant speed without limits binding."""
    sc = scenario(vehicle__steer_delay=steer_delay, vehicle__speed_time_constant=0.0,
                  vehicle__steer_time_constant=STEER_TAU, steering__max_angle=1.0,
                  steering__max_rate=20.0, start__y=0.05, pose_rate=200.0, duration=30.0)
    cfg = params(gains__kp=kp, gains__kd=kd, lookahead=lookahead,
                 derivative__filter_time=FILTER, speed__max_accel=20.0,
                 speed__slowdown_error=0.0, speed__max_lateral_accel=20.0,
                 steering__max_angle=1.0, steering__max_rate=20.0)
    run = simulate(sc, cfg)
    assert run.metrics.steering_saturated_fraction == 0.0
    return run.trace['t'], run.trace['lateral']


def _dominant_mode(t: np.ndarray, y: np.ndarray, guess: complex) -> complex:
    """Return sigma + j*omega of a damped cosine fitted to y(t) for t > 3 s."""
    def mode(tt: np.ndarray, a: float, s: float, w: float, p: float) -> np.ndarray:
        return a * np.exp(s * tt) * np.cos(w * tt + p)  # type: ignore[no-any-return]

    late = t > 3.0
    fit, _ = curve_fit(mode, t[late], y[late], p0=[0.05, guess.real, guess.imag, 0.0])
    return complex(fit[1], abs(fit[2]))


def test_small_errors_follow_the_dominant_poles_of_the_linearised_loop() -> None:
    """Decay rate and frequency of y match the linear model's dominant pole within 3 %."""
    kp, kd, lookahead = 0.5, 0.1, 0.5
    # Linearised loop about the straight centreline (sin, tan ~ identity), states
    # y, theta, steer, filtered rate r of m = -(y + L theta):
    #   y' = v theta,  theta' = v steer / l,  steer' = (kp m + kd r - steer) / tau,
    #   Tf r' + r = m' = -(v theta + L v steer / l).
    # Poles with numpy's eigenvalues; the 3 % allows for the 200 Hz sampling.
    v, wb, tau, tf = SPEED, WHEELBASE, STEER_TAU, FILTER
    a = np.array([
        [0.0, v, 0.0, 0.0],
        [0.0, 0.0, v / wb, 0.0],
        [-kp / tau, -kp * lookahead / tau, -1.0 / tau, kd / tau],
        [0.0, -v / tf, -lookahead * v / (wb * tf), -1.0 / tf],
    ])
    poles = np.linalg.eigvals(a)
    dominant = max(poles, key=lambda p: p.real)
    assert dominant.imag != 0.0
    t, y = _linear_setup(kp, kd, lookahead, steer_delay=0.0)
    seen = _dominant_mode(t, y, dominant)
    assert seen.real == pytest.approx(dominant.real, rel=0.03)
    assert seen.imag == pytest.approx(abs(dominant.imag), rel=0.03)


def test_steering_dead_time_matches_python_control_with_pade() -> None:
    """With a steering dead time, the dominant pole matches python-control's (Pade 3)."""
    kp, kd, lookahead, delay = 0.6, 0.05, 0.4, 0.15
    # Reference library: python-control. Loop e -> u = C e -> steer = A u -> e = -H steer:
    #   C = kp + kd s / (Tf s + 1),  A = Pade_3(delay) / (tau s + 1),
    #   H = (v / l) (v + L s) / s^2   (y = v^2/(l s^2) steer, theta = v/(l s) steer).
    s = control.tf('s')
    num, den = control.pade(delay, 3)
    c = kp + kd * s / (FILTER * s + 1)
    act = control.tf(num, den) / (STEER_TAU * s + 1)
    h = (SPEED / WHEELBASE) * (SPEED + lookahead * s) / s**2
    poles = control.feedback(c * act * h, 1).poles()
    dominant = max(poles, key=lambda p: p.real)
    t, y = _linear_setup(kp, kd, lookahead, steer_delay=delay)
    seen = _dominant_mode(t, y, dominant)
    assert seen.real == pytest.approx(dominant.real, rel=0.03)
    assert seen.imag == pytest.approx(abs(dominant.imag), rel=0.03)


def test_large_integral_gain_without_windup_guard_overshoots_far_more() -> None:
    """A big ki with no windup guard overshoots several times more than PD."""
    # Common practice, no source: with this error definition, a large integral gain without
    # a windup guard overshoots badly (the saturated approach winds the integral up).
    sc = scenario(start__y=1.2, start__heading=0.2, corridor_width=4.0, duration=40.0)
    common = {'gains__kp': 0.8, 'gains__kd': 0.0, 'lookahead': 1.3, 'integral__bound': 0.5}
    pd = simulate(sc, params(**common)).metrics
    wound = simulate(sc, params(**common, gains__ki=0.3, integral__method='off')).metrics
    guarded = simulate(sc, params(**common, gains__ki=0.3,
                                  integral__method='tracking')).metrics
    assert pd.steering_saturated_fraction > 0.0        # the approach does saturate
    assert wound.overshoot > 2.5 * pd.overshoot
    assert wound.overshoot > 3.0 * guarded.overshoot
    assert wound.settling_time > 1.5 * pd.settling_time


@pytest.mark.parametrize('wheelbases', [2.0, 3.0])
def test_lookahead_of_a_few_wheelbases_settles_smoothly(wheelbases: float) -> None:
    """P control with a lookahead of 2-3 wheelbases settles without overshoot; L = 0 does not."""
    # Common practice, no source: a lookahead of a few wheelbases settles smoothly, and
    # without it the lateral loop (a double integrator) has no damping.
    sc = scenario(start__y=0.5, corridor_width=3.0, duration=40.0)
    smooth = simulate(sc, params(gains__kp=0.8, gains__kd=0.0,
                                 lookahead=wheelbases * WHEELBASE)).metrics
    bare = simulate(sc, params(gains__kp=0.8, gains__kd=0.0, lookahead=0.0)).metrics
    assert smooth.overshoot < 0.05 * 0.5
    assert smooth.settling_time < 10.0
    assert smooth.steering_saturated_fraction == 0.0
    assert bare.overshoot > 0.5
    assert bare.settling_time == pytest.approx(40.0, abs=0.1)


def test_too_low_proportional_gain_stays_off_centre_longer() -> None:
    """A low kp leaves the cart farther from the centreline for longer."""
    # Common practice, no source.
    sc = scenario(start__y=0.5, corridor_width=3.0, duration=40.0)
    low = simulate(sc, params(gains__kp=0.1, gains__kd=0.0, lookahead=1.3)).metrics
    good = simulate(sc, params(gains__kp=0.8, gains__kd=0.0, lookahead=1.3)).metrics
    assert low.rms_lateral_error > 1.5 * good.rms_lateral_error
    assert low.settling_time > 2.0 * good.settling_time
