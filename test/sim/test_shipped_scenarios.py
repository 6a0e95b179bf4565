# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Every shipped scenario settles under the shipped default gains."""

from __future__ import annotations

from pathlib import Path

from corridor_pid.core.config import default_config
from corridor_pid.sim.loop import simulate
from corridor_pid.sim.metrics import settling_band
from corridor_pid.sim.scenario import load_scenario
import numpy as np
import pytest

SCENARIO_DIR = Path(__file__).resolve().parents[2] / 'config' / 'scenarios'



def _longest_run(flags: np.ndarray) -> int:
    """Return the length of the longest run of True in ``flags``."""
    best = count = 0
    for flag in flags:
        count = count + 1 if flag else 0
        best = max(best, count)
    return best


@pytest.mark.parametrize('path', sorted(SCENARIO_DIR.glob('*.yaml')), ids=lambda p: p.stem)
def test_shipped_scenario_settles_without_sustained_saturation(path: Path) -> None:
    """No divergence, inside the settling band at the end, no long saturation."""
    scenario = load_scenario(path)
    run = simulate(scenario, default_config())
    m = run.metrics
    trace = run.trace
    assert m.diverged is False
    assert m.final_lateral_error < settling_band(float(trace['lateral'][0]))
    assert m.settling_time < scenario.duration - 1.0
    assert m.steering_saturated_fraction < 0.05
    assert m.steering_rate_saturated_fraction < 0.15
    # Past the first 5 s (turning away from a start offset may saturate), no limit binds
    # for a whole second in a row.
    computed = (trace['computed'] > 0.0) & (trace['t'] > 5.0)
    for column in ('angle_saturated', 'rate_saturated'):
        assert _longest_run(trace[column][computed] > 0.0) < scenario.pose_rate
    assert m.watchdog_stops == (1 if scenario.dropouts else 0)
