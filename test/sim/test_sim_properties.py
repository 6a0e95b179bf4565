# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Properties of the actuator solution, the metrics and the scenario validator (hypothesis)."""

from __future__ import annotations

import math
from typing import Any

from corridor_pid.core.errors import ScenarioError
from corridor_pid.sim.actuators import lag_response
from corridor_pid.sim.metrics import max_lateral_error, overshoot, rms_lateral_error, settling_time
from corridor_pid.sim.scenario import scenario_from_mapping
from hypothesis import given, settings
from hypothesis import strategies as st
import numpy as np
import pytest

angles = st.floats(-0.6, 0.6)
taus = st.floats(0.0, 0.5)
rates = st.one_of(st.floats(0.05, 5.0), st.just(math.inf))
steps = st.floats(0.0, 1.0)


@given(angles, angles, taus, rates, steps, steps)
def test_lag_solution_composes_exactly(start: float, target: float, tau: float, rate: float,
                                       h1: float, h2: float) -> None:
    """Advancing h1 then h2 equals advancing h1 + h2: the solution is exact, not stepped."""
    if tau == 0.0 and rate == math.inf:
        tau = 0.1
    one = lag_response(lag_response(start, target, tau, rate, h1), target, tau, rate, h2)
    both = lag_response(start, target, tau, rate, h1 + h2)
    assert one == pytest.approx(both, abs=1e-9)


@given(angles, angles, taus, rates, steps)
def test_lag_approaches_without_overshoot_within_the_rate(
        start: float, target: float, tau: float, rate: float, h: float) -> None:
    """The angle moves toward the target, never past it, never faster than max_rate."""
    if tau == 0.0 and rate == math.inf:
        tau = 0.1
    value = lag_response(start, target, tau, rate, h)
    assert min(start, target) - 1e-12 <= value <= max(start, target) + 1e-12
    if rate < math.inf:
        assert abs(value - start) <= rate * h + 1e-12


lateral = st.lists(st.floats(-2.0, 2.0), min_size=2, max_size=60)


@given(lateral)
def test_metric_invariants(y: list[float]) -> None:
    """RMS <= max; overshoot >= 0 and at most the max; settling time within the run."""
    t = np.arange(len(y)) * 0.1
    assert rms_lateral_error(y) <= max_lateral_error(y) + 1e-12
    assert 0.0 <= overshoot(y) <= max_lateral_error(y)
    assert 0.0 <= settling_time(t, y) <= t[-1] + 1e-12


junk = st.recursive(
    st.one_of(st.none(), st.booleans(), st.integers(-5, 5), st.floats(allow_nan=True),
              st.text(max_size=5)),
    lambda inner: st.one_of(st.lists(inner, max_size=4),
                            st.dictionaries(st.sampled_from(
                                ['vehicle', 'wheelbase', 'steering', 'max_angle', 'speed',
                                 'course', 'points', 'dropouts', 'start', 'x', 'pose_rate',
                                 'duration', 'pose_noise', 'seed']), inner, max_size=5)),
    max_leaves=12)


@settings(max_examples=300)
@given(junk)
def test_validator_raises_only_one_line_scenario_errors(data: Any) -> None:
    """Whatever the YAML holds, the validator answers with a one-line ScenarioError."""
    try:
        scenario_from_mapping(data)
    except ScenarioError as err:
        assert '\n' not in str(err)
