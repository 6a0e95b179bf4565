# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""The linearised lateral loop: Padé, polynomial and state-space forms against references."""

from __future__ import annotations

import math

import control
from corridor_pid.core.errors import TuningError
from corridor_pid.tuning.linear import LoopModel, pade_coefficients
import numpy as np
import pytest
from reference_gains import reference_config
from scipy import integrate, signal
from tuning_helpers import MODELS


@pytest.mark.parametrize('order', [1, 2, 3, 5, 8])
def test_pade_matches_python_control(order: int) -> None:
    """Our Padé coefficients equal control.pade's."""
    # Source: python-control `control.pade(T, n)`.
    num, den = pade_coefficients(0.07, order)
    ref_num, ref_den = control.pade(0.07, order)
    np.testing.assert_allclose(num, ref_num, rtol=1e-10)
    np.testing.assert_allclose(den, ref_den, rtol=1e-10)


@pytest.mark.parametrize('name', sorted(MODELS))
def test_polynomials_state_space_and_factored_forms_agree(name: str) -> None:
    """P(s) from polynomials, from (A, B, C) and in factored form agree on the jw axis."""
    # Source: scipy.signal `ss2tf` and `freqs` as the reference evaluators.
    model = MODELS[name]
    w = np.logspace(-2, 2, 50)
    pn, pd = model.plant_polynomials()
    a, b, c = model.plant_state_space()
    sn, sd = signal.ss2tf(a, b, c, np.zeros((1, 1)))
    _, h_poly = signal.freqs(pn, pd, w)
    _, h_ss = signal.freqs(sn[0], sd, w)
    h_fact = model.plant_loop().response(w) * np.exp(1j * w * model.steer_delay)
    np.testing.assert_allclose(h_ss, h_poly, rtol=1e-9)
    np.testing.assert_allclose(h_fact, h_poly, rtol=1e-9)
    cn, cd = model.controller_polynomials()
    _, h_c = signal.freqs(cn, cd, w)
    np.testing.assert_allclose(model.controller_loop().response(w), h_c, rtol=1e-9)


@pytest.mark.parametrize('name', sorted(MODELS))
def test_exact_delay_response_is_the_rational_part_times_exp(name: str) -> None:
    """L(jw) = C(jw) P0(jw) e^{-jwT}, and its continuous phase matches np.angle mod 2 pi."""
    # Source: scipy.signal `freqs` for C and P0; e^{-jwT} written out.
    model = MODELS[name]
    w = np.logspace(-2, 2.5, 200)
    cn, cd = model.controller_polynomials()
    pn, pd = model.plant_polynomials()
    _, hc = signal.freqs(cn, cd, w)
    _, hp = signal.freqs(pn, pd, w)
    ref = hc * hp * np.exp(-1j * w * model.steer_delay)
    loop = model.loop()
    np.testing.assert_allclose(loop.response(w), ref, rtol=1e-9)
    wrapped = np.angle(np.exp(1j * (loop.phase(w) - np.angle(ref))))
    np.testing.assert_allclose(wrapped, 0.0, atol=1e-9)
    assert np.all(np.diff(loop.phase(w)) < 0.5)  # continuous: no 2 pi jumps


def test_linear_plant_matches_the_nonlinear_bicycle_for_small_inputs() -> None:
    """A small steering wave: the linear (y, theta) match the kinematic bicycle to 1 %."""
    # Source: Rajamani, Vehicle Dynamics and Control, 2nd ed. (2012), ch. 2 kinematic
    # bicycle (rear-axle reference: x' = v cos(psi), y' = v sin(psi), psi' = v tan(d)/l),
    # integrated with scipy.integrate.solve_ivp; the linear model by scipy.signal.lsim.
    model = MODELS['fast_cart']
    v, wb, tau, delay = model.speed, model.wheelbase, model.steer_time_constant, \
        model.steer_delay

    def command(t: float) -> float:
        return 0.01 * math.sin(1.3 * t) if t >= delay else 0.0

    def rhs(t: float, s: np.ndarray) -> list[float]:
        _, _, psi, steer = s
        return [v * math.cos(psi), v * math.sin(psi), v * math.tan(steer) / wb,
                (command(t) - steer) / tau]

    t = np.linspace(0.0, 6.0, 601)
    sol = integrate.solve_ivp(rhs, (0.0, 6.0), [0.0, 0.0, 0.0, 0.0], t_eval=t, rtol=1e-10,
                              atol=1e-12, max_step=0.005)
    a, b, c = model.plant_state_space()
    u = np.array([command(ti) for ti in t])
    _, _, x = signal.lsim((a, b, np.eye(3), np.zeros((3, 1))), u, t)
    scale_y, scale_th = np.max(np.abs(sol.y[1])), np.max(np.abs(sol.y[2]))
    assert np.max(np.abs(x[:, 0] - sol.y[1])) < 0.01 * scale_y
    assert np.max(np.abs(x[:, 1] - sol.y[2])) < 0.01 * scale_th


def test_from_config_uses_the_scheduled_gains() -> None:
    """With reference_speed > 0 the model carries the gains the controller puts in force."""
    # Common practice, no source: kp unchanged, kd x v0/v, ki x v/v0 (distance domain).
    cfg = reference_config().replaced({'gains.reference_speed': 1.0, 'gains.ki': 0.2})
    fast = LoopModel.from_config(cfg, 2.0)
    assert (fast.kp, fast.ki, fast.kd) == pytest.approx((0.6, 0.4, 0.125))
    plain = LoopModel.from_config(cfg, 2.0, schedule=False)
    assert (plain.kp, plain.ki, plain.kd) == pytest.approx((0.6, 0.2, 0.25))


def test_model_rejects_a_vehicle_at_rest_naming_the_value() -> None:
    """Speed 0 has no lateral dynamics; the error names the key and the value."""
    with pytest.raises(TuningError, match=r'speed: must be > 0 .*0\.0'):
        LoopModel.from_config(reference_config(), 0.0)
