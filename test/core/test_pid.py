# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""The three-term law against scipy.signal, the windup guards, and speed scheduling."""

from __future__ import annotations

import math

from core_helpers import config
from corridor_pid.core.config import Gains, IntegralSettings
from corridor_pid.core.controller import Controller, PoseSample
from corridor_pid.core.pid import Integrator, RateFilter, scheduled_gains
import numpy as np
import pytest
from scipy import signal

KP, KI, KD, TF = 0.8, 0.3, 0.25, 0.05


def _pid_config(method: str = 'off'):  # type: ignore[no-untyped-def]
    """Return a config whose limits never bind on small errors (straight course, L = 0)."""
    return config(gains__kp=KP, gains__ki=KI, gains__kd=KD, derivative__filter_time=TF,
                  derivative__source='error', lookahead=0.0, integral__method=method,
                  integral__bound=1.5, steering__max_angle=1.5, steering__max_rate=20.0,
                  smoothing__enabled=False)


def _controller_output(errors: np.ndarray, h: float) -> np.ndarray:
    """Return P + I + D [rad] of the controller for lateral errors e = -y at period h."""
    ctl = Controller(_pid_config(), enabled=True)
    out = []
    for k, e in enumerate(errors):
        res = ctl.step(PoseSample(k * h, k * h, -float(e), 0.0), k * h)
        out.append(res.p + res.i + res.d)
    return np.array(out)


def test_discrete_law_matches_scipy_backward_difference() -> None:
    """Same numbers as C(s) = kp + ki/s + kd s/(Tf s + 1) discretised by backward difference.

    Reference: scipy.signal.cont2discrete(method='backward_diff') and dlsim; Åström &
    Hägglund, Advanced PID Control (2006), ch. 3, backward-difference approximation.
    """
    h = 0.01
    num = [KP * TF + KD, KP + KI * TF, KI]  # (kp + ki/s + kd s/(Tf s+1)) * s (Tf s + 1)
    den = [TF, 1.0, 0.0]
    numd, dend, _ = signal.cont2discrete((num, den), h, method='backward_diff')
    rng = np.random.default_rng(3)
    errors = np.concatenate([[0.0], 0.05 * rng.standard_normal(300)])
    _, expected = signal.dlsim((np.ravel(numd), dend, h), errors)
    np.testing.assert_allclose(_controller_output(errors, h), np.ravel(expected), atol=1e-9)


def test_step_response_matches_continuous_controller() -> None:
    """A small error step follows the continuous controller's step response to O(h).

    Reference: scipy.signal.step of C(s); the first-order discretisation error is bounded by
    h times the largest derivative of the response, kd/Tf^2 * e0 * h (tolerance from dt).
    """
    h, e0 = 0.001, 0.02
    t = np.arange(0.0, 1.0, h)
    errors = np.where(t > 0.0, e0, 0.0)
    num = [KP * TF + KD, KP + KI * TF, KI]
    den = [TF, 1.0, 0.0]
    _, cont = signal.step(signal.lti(num, den), T=t[1:] - h)
    got = _controller_output(errors, h)[1:]
    tol = KD / TF**2 * e0 * h * 2
    np.testing.assert_allclose(got, e0 * cont, atol=tol)


def _saturated_unwind_time(method: str) -> tuple[float, float]:
    """Return (time to leave saturation for good after the error reverses, Tt) [s].

    A constant error holds the output at the angle limit for 10 s, then reverses sign for
    30 s; the integral bound is set wide (3 rad) so only the windup guard acts.
    """
    kp, ki, kd = 0.5, 0.5, 0.1
    ti, td = kp / ki, kd / kp
    tt = math.sqrt(ti * td)  # Tt = sqrt(Ti*Td): Åström & Murray, Feedback Systems (2021), ch. 11
    cfg = config(gains__kp=kp, gains__ki=ki, gains__kd=kd, lookahead=0.0,
                 integral__method=method, integral__tracking_time=tt, integral__bound=3.0,
                 steering__max_angle=0.5, steering__max_rate=20.0)
    lim = cfg.steering.max_angle
    ctl = Controller(cfg, enabled=True)
    h = 0.01
    for k in range(1000):
        ctl.step(PoseSample(k * h, 0.0, -0.5, 0.0), k * h)  # e = +0.5 m -> saturates left
    last_above = 0.0
    for k in range(1000, 4000):
        res = ctl.step(PoseSample(k * h, 0.0, 0.3, 0.0), k * h)  # e = -0.3 m
        if res.unclamped >= 0.5 * lim:
            last_above = (k - 999) * h
    return last_above, tt


def test_tracking_unwinds_within_a_few_tracking_time_constants() -> None:
    """Back-calculation leaves saturation within 3 Tt; with no guard it takes > 10 Tt.

    Source: Åström & Hägglund, Advanced PID Control (2006), §3.5 (back-calculation);
    Tt = sqrt(Ti*Td) from Åström & Murray, Feedback Systems 2nd ed. (2021), ch. 11.
    """
    with_guard, tt = _saturated_unwind_time('tracking')
    assert with_guard <= 3.0 * tt
    without_guard, _ = _saturated_unwind_time('off')
    assert without_guard > 10.0 * tt


def test_conditional_integration_holds_while_saturated() -> None:
    """Conditional integration does not integrate further into saturation."""
    settings = IntegralSettings('conditional', 1.0, 1.0)
    integ = Integrator()
    integ.update(1.0, 0.5, 0.1, 0.0, settings)
    held = integ.value
    assert integ.update(1.0, 0.5, 0.1, -0.2, settings) == held  # saturated high, pushing up
    assert integ.update(1.0, -0.5, 0.1, -0.2, settings) < held  # unwinding is allowed


def test_integral_bound_holds() -> None:
    """The integral never exceeds its bound."""
    settings = IntegralSettings('off', 1.0, 0.1)
    integ = Integrator()
    for _ in range(1000):
        integ.update(5.0, 1.0, 0.1, 0.0, settings)
    assert integ.value == pytest.approx(0.1)


def test_rate_filter_first_sample_and_bad_intervals() -> None:
    """The first sample and non-positive intervals give no derivative kick."""
    rf = RateFilter()
    assert rf.update(5.0, 0.1, 0.0) == 0.0
    assert rf.update(6.0, 0.0, 0.0) == 0.0
    assert rf.update(7.0, -1.0, 0.0) == 0.0
    assert rf.update(8.0, 0.5, 0.0) == pytest.approx((8.0 - 7.0) / 0.5)


def test_scheduling_keeps_distance_domain_gains() -> None:
    """kd*v and ki/v stay constant across speeds; off when reference_speed is 0."""
    g = Gains(1.0, 0.2, 0.4, 1.0)
    for v in (0.5, 1.0, 2.0, 4.0):
        kp, ki, kd = scheduled_gains(g, v)
        assert kp == 1.0
        assert kd * v == pytest.approx(0.4)
        assert ki / v == pytest.approx(0.2)
    assert scheduled_gains(g, 0.0) == scheduled_gains(g, 0.25)
    assert scheduled_gains(Gains(1.0, 0.2, 0.4, 0.0), 3.0) == (1.0, 0.2, 0.4)


def test_tracking_holds_output_just_above_the_limit() -> None:
    """Under saturation, back-calculation settles u - u_lim at ki*e*Tt.

    Source: Åström & Hägglund, Advanced PID Control (2006), §3.5: at equilibrium
    dI/dt = ki*e + (u_lim - u)/Tt = 0. Tolerance from the step h.
    """
    kp, ki, tt = 0.5, 0.5, 0.4
    cfg = config(gains__kp=kp, gains__ki=ki, gains__kd=0.0, lookahead=0.0,
                 integral__method='tracking', integral__tracking_time=tt,
                 integral__bound=3.0, steering__max_angle=0.5, steering__max_rate=20.0)
    ctl = Controller(cfg, enabled=True)
    h, e = 0.01, 0.5
    res = None
    for k in range(2000):
        res = ctl.step(PoseSample(k * h, 0.0, -e, 0.0), k * h)
    assert res is not None and res.angle_saturated
    assert res.unclamped - 0.5 == pytest.approx(ki * e * tt, abs=ki * e * h)
