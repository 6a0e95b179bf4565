# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Relay feedback experiment on the analytic plant, the linear vehicle and the simulator."""

from __future__ import annotations

import math

from corridor_pid.core.config import default_config
from corridor_pid.core.errors import TuningError
from corridor_pid.sim.scenario import scenario_from_mapping
from corridor_pid.tuning.linear import LoopModel
from corridor_pid.tuning.margins import model_margins
from corridor_pid.tuning.relay import (
    linear_vehicle_relay,
    relay_experiment,
    simulated_vehicle_relay,
    state_space_plant,
)
import numpy as np
import pytest
from scipy import signal

# Analytic values for 1/(s+1)^3 from the Routh criterion: 1 + K/(s+1)^3 has its
# imaginary-axis crossing at w = sqrt(3), K = 8.
KU_CUBE, PU_CUBE = 8.0, 2.0 * math.pi / math.sqrt(3.0)


def _cube_plant(dt: float):  # type: ignore[no-untyped-def]
    """Return 1/(s+1)^3 as a step function, discretised by scipy.signal (ZOH)."""
    a, b, c, _, _ = signal.cont2discrete(signal.tf2ss([1.0], [1.0, 3.0, 3.0, 1.0]), dt)
    x = np.zeros((3, 1))

    def step(u: float) -> float:
        nonlocal x
        x = a @ x + b * u
        return float((c @ x)[0, 0])

    return step


@pytest.mark.parametrize('dt', [0.01, 0.002])
def test_relay_on_the_analytic_third_order_plant(dt: float) -> None:
    """Relay on 1/(s+1)^3: Ku within 10 % of 8, Pu within 5 % of 2 pi / sqrt(3)."""
    # Source: Åström & Hägglund, Automatica 20(5), 1984 (Ku ~ 4d / (pi a)); analytic Ku, Pu
    # from the Routh criterion; the plant discretised by scipy.signal.cont2discrete.
    result = relay_experiment(_cube_plant(dt), dt, relay_amplitude=1.0, duration=60.0)
    assert result.ultimate_gain == pytest.approx(KU_CUBE, rel=0.10)
    assert result.ultimate_period == pytest.approx(PU_CUBE, rel=0.05)


def test_relay_amplitude_scales_the_oscillation_not_ku() -> None:
    """On a linear plant Ku and Pu do not depend on the relay amplitude d."""
    # Source: Åström & Hägglund 1984: the limit-cycle amplitude a is proportional to d.
    small = relay_experiment(_cube_plant(0.005), 0.005, 0.2, 60.0)
    large = relay_experiment(_cube_plant(0.005), 0.005, 2.0, 60.0)
    assert large.amplitude == pytest.approx(10.0 * small.amplitude, rel=1e-6)
    assert large.ultimate_gain == pytest.approx(small.ultimate_gain, rel=1e-6)


def test_our_state_space_discretisation_matches_scipy() -> None:
    """state_space_plant reproduces scipy.signal.dlsim on the same ZOH plant."""
    # Source: scipy.signal `cont2discrete` + `dlsim`.
    dt = 0.01
    a, b, c, d = signal.tf2ss([1.0], [1.0, 3.0, 3.0, 1.0])
    ours = state_space_plant(a, b, c, dt)
    u = np.sin(np.arange(300) * 0.05)
    ys = [ours(float(x)) for x in u]
    _, ref, _ = signal.dlsim(signal.cont2discrete((a, b, c, d), dt), u)
    # dlsim returns the output before each input's step; ours after it.
    np.testing.assert_allclose(ys[:-1], ref[1:, 0], rtol=1e-9, atol=1e-12)


def test_relay_on_the_linear_vehicle_is_close_to_its_p_only_margin() -> None:
    """Relay Ku on the linear vehicle is within 15 % of kp x upper gain margin (P only)."""
    # Source: Åström & Hägglund 1984 (describing-function estimate) against our exact
    # margins; the describing function errs by the harmonics, a few percent to ~10 %.
    cfg = default_config()
    result = linear_vehicle_relay(cfg)
    p_only = LoopModel.from_config(cfg.replaced({'gains.kp': 1.0, 'gains.ki': 0.0,
                                                 'gains.kd': 0.0}))
    m = model_margins(p_only)
    assert result.ultimate_gain == pytest.approx(m.gain_margin_upper, rel=0.15)
    assert result.ultimate_period == pytest.approx(2 * math.pi / m.upper_phase_crossover,
                                                   rel=0.10)


def test_relay_in_the_closed_loop_simulator() -> None:
    """The simulated relay settles; sampling and rate limit give a lower Ku than linear."""
    # Common practice, no source: sampling and actuator rate limits add phase lag, so the
    # ultimate gain drops below the continuous-time model's.
    scenario = scenario_from_mapping({
        'vehicle': {'wheelbase': 0.9, 'steer_time_constant': 0.1, 'steer_delay': 0.05},
        'steering': {'max_angle': 0.5, 'max_rate': 1.0}, 'speed': 1.0, 'duration': 20.0,
        'pose_rate': 50.0})
    cfg = default_config()
    sim = simulated_vehicle_relay(scenario, cfg)
    lin = linear_vehicle_relay(cfg)
    assert sim.source == 'simulator' and sim.period_spread < 0.05
    assert 0.5 * lin.ultimate_gain < sim.ultimate_gain < lin.ultimate_gain
    assert sim.ultimate_period > lin.ultimate_period


def test_relay_without_oscillation_says_so() -> None:
    """A plant of the wrong sign runs away under the relay: a one-line TuningError."""
    # Common practice, no source: the relay needs negative feedback to cycle; with the
    # sign reversed the output drifts off and never crosses the setpoint again.
    state = [0.0]

    def plant(u: float) -> float:
        state[0] -= 0.1 * u
        return state[0]

    with pytest.raises(TuningError, match=r'relay: only 0 cycles'):
        relay_experiment(plant, 0.1, 1.0, 30.0)
