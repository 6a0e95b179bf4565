# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""The scenario-set optimiser: cost terms, margin floors, determinism, improvement."""

from __future__ import annotations

import dataclasses
import math

from corridor_pid.core.errors import TuningError
from corridor_pid.sim.loop import simulate
from corridor_pid.sim.scenario import Scenario, scenario_from_mapping
from corridor_pid.tuning.guard import guard_verdict
from corridor_pid.tuning.optimize import (
    CostWeights,
    evaluate_candidates,
    floor_violation,
    INFEASIBLE,
    optimize_gains,
    scenario_score,
)
import numpy as np
import pytest
from reference_gains import reference_config
from scipy import integrate


def _cart(y0: float, speed: float, noise: float = 0.0) -> Scenario:
    """Return a short straight-corridor run of our own invention (a linen cart)."""
    return scenario_from_mapping({
        'vehicle': {'wheelbase': 0.9, 'steer_time_constant': 0.1, 'steer_delay': 0.05},
        'steering': {'max_angle': 0.5, 'max_rate': 1.0}, 'speed': speed, 'duration': 15.0,
        'pose_rate': 25.0, 'corridor_width': 2.0, 'start': {'y': y0},
        'pose_noise': {'position': noise, 'heading': noise / 2, 'seed': 3}},
        name=f'cart_{y0}_{speed}')


SET = (_cart(0.3, 1.0, 0.01), _cart(-0.2, 1.4))


def test_tracking_term_is_the_mean_squared_offset() -> None:
    """The tracking term equals (1/T) int y^2 dt by scipy's trapezoid rule."""
    # Source: scipy.integrate.trapezoid as the reference quadrature.
    result = simulate(SET[0], reference_config())
    t, y = result.trace['t'], result.trace['lateral']
    score = scenario_score(result, CostWeights())
    assert score.tracking == pytest.approx(integrate.trapezoid(y * y, t) / (t[-1] - t[0]),
                                           rel=1e-12)
    assert score.cost == pytest.approx(score.tracking + score.effort + score.saturation
                                       + score.overshoot + score.divergence)


def test_divergence_and_overshoot_are_penalised() -> None:
    """A run that leaves the corridor pays the divergence weight."""
    cfg = reference_config().replaced({'gains.kd': 0.0, 'lookahead': 0.0, 'gains.kp': 3.0})
    long_run = dataclasses.replace(_cart(0.3, 1.0), duration=30.0)
    score = scenario_score(simulate(long_run, cfg), CostWeights())
    assert score.metrics['diverged'] is True
    assert score.divergence == CostWeights().divergence


def test_floor_violation_matches_the_guard() -> None:
    """Zero exactly when the guard accepts the gains at every speed given."""
    good = reference_config()
    bad = reference_config().replaced({'gains.ki': 0.3})
    assert floor_violation(good, [1.0, 1.4]) == (0.0, '')
    amount, reason = floor_violation(bad, [1.0, 1.4])
    assert amount > 0.0 and reason == guard_verdict(bad, 1.0).reason


def test_candidates_below_the_floors_are_not_simulated() -> None:
    """A candidate below the floors costs INFEASIBLE plus its shortfall, with the reason."""
    evs = evaluate_candidates(SET, reference_config(), ('kp', 'ki', 'kd'),
                              [{'kp': 0.6, 'ki': 0.0, 'kd': 0.25},
                               {'kp': 0.6, 'ki': 2.0, 'kd': 0.25}])
    assert evs[0].feasible and len(evs[0].scores) == 2 and evs[0].cost < 1.0
    assert not evs[1].feasible and evs[1].scores == ()
    assert evs[1].cost > INFEASIBLE and evs[1].reason.startswith('unstable at 1.00 m/s')


def test_optimiser_improves_meets_floors_and_is_deterministic_across_workers() -> None:
    """Same seed, 1 or 2 workers: same gains; lower cost than the start; floors met."""
    start = reference_config()
    one = optimize_gains(SET, start, ('kp', 'kd'), seed=5, jobs=1, evaluations=30)
    two = optimize_gains(SET, start, ('kp', 'kd'), seed=5, jobs=2, evaluations=30)
    assert one.best.values == two.best.values and one.best.cost == two.best.cost
    assert one.history == two.history
    assert one.best.cost < one.start.cost
    assert one.evaluations <= 30 and one.simulations <= 2 * one.evaluations
    for v in (1.0, 1.4):
        assert guard_verdict(one.config.replaced({'speed.cruise': v}), v).ok


def test_a_different_seed_samples_differently() -> None:
    """The seed reaches the Sobol sample: another seed, another search history."""
    a = optimize_gains(SET, reference_config(), ('kp', 'kd'), seed=1, evaluations=12)
    b = optimize_gains(SET, reference_config(), ('kp', 'kd'), seed=2, evaluations=12)
    assert a.history[0] == b.history[0]  # the start point
    assert a.history[1:] != b.history[1:]


def test_free_integral_and_lookahead_stay_in_range() -> None:
    """Freeing ki and lookahead keeps them inside the search box and validated."""
    r = optimize_gains(SET[:1], reference_config(), ('kp', 'ki', 'kd', 'lookahead'), seed=0,
                       evaluations=24)
    assert 0.0 <= r.config.gains.ki <= 1.0 and 0.2 <= r.config.lookahead <= 5.0
    assert math.isfinite(r.best.cost) and np.isfinite(r.history).all()


@pytest.mark.parametrize(('kwargs', 'match'), [
    ({'free': ('kp', 'gain')}, r"free: \['gain'\] is not a subset"),
    ({'evaluations': 2}, 'evaluations: at least 4 are needed, got 2'),
])
def test_bad_optimiser_arguments(kwargs: dict[str, object], match: str) -> None:
    """Unknown free names and tiny budgets raise TuningError naming the value."""
    with pytest.raises(TuningError, match=match):
        optimize_gains(SET, reference_config(), **kwargs)  # type: ignore[arg-type]
