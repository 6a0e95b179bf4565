# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""The live stability guard: verdicts, reasons, and what the simulator says about them."""

from __future__ import annotations

from pathlib import Path
import subprocess
import sys

from corridor_pid.core.config import Config
from corridor_pid.sim.loop import simulate
from corridor_pid.sim.scenario import Scenario, scenario_from_mapping
from corridor_pid.tuning.guard import guard_verdict
import numpy as np
import pytest
from reference_gains import reference_config

# A delivery cart in a hospital corridor, 1 cm off the centreline: a small perturbation,
# so a linearly unstable loop shows itself by growing away from it.
CART = {'vehicle': {'wheelbase': 0.9, 'steer_time_constant': 0.1, 'steer_delay': 0.05},
        'steering': {'max_angle': 0.5, 'max_rate': 1.0}, 'speed': 1.0, 'duration': 40.0,
        'pose_rate': 50.0, 'corridor_width': 2.4, 'start': {'y': 0.01}}

# Live sets the guard must reject as unstable at 1 m/s (vehicle of the defaults = the cart).
UNSTABLE_SETS = [
    {'gains.ki': 2.0},                                  # integral gain far too high
    {'gains.kd': 0.0, 'lookahead': 0.0},                # no phase lead at all
    {'gains.kp': 4.0, 'gains.kd': 0.0, 'lookahead': 0.1},   # short lookahead, stiff P
]


def _scenario() -> Scenario:
    return scenario_from_mapping(CART)


def _late_amplitude(cfg: Config) -> float:
    """Return max |y| [m] over the last quarter of the simulated run."""
    trace = simulate(_scenario(), cfg).trace
    late = trace['t'] >= 0.75 * CART['duration']  # type: ignore[operator]
    return float(np.max(np.abs(trace['lateral'][late])))


def test_defaults_pass_and_settle_in_the_simulator() -> None:
    """The shipped defaults pass the guard, and the simulated cart settles from 1 cm."""
    cfg = reference_config()
    verdict = guard_verdict(cfg, 1.0)
    assert verdict.ok and verdict.reason == ''
    assert _late_amplitude(cfg) < 0.001


@pytest.mark.parametrize('changes', UNSTABLE_SETS)
def test_a_set_the_guard_rejects_as_unstable_is_unstable_in_the_simulator(
        changes: dict[str, object]) -> None:
    """A rejected live set grows a 1 cm offset at least five-fold in the closed loop."""
    # The simulator is independent of the linear model: nonlinear bicycle (RK4), sampled
    # poses, rate- and angle-limited steering with the scenario's own dead time.
    cfg = reference_config().replaced(changes)
    verdict = guard_verdict(cfg, 1.0)
    assert not verdict.ok
    assert verdict.reason.startswith('unstable at 1.00 m/s: ')
    assert _late_amplitude(cfg) > 5 * 0.01


def test_reason_names_the_failing_margins_and_their_floors() -> None:
    """Below the floor but stable: the reason names phase margin, value and floor."""
    cfg = reference_config().replaced({'gains.ki': 0.3})
    verdict = guard_verdict(cfg, 1.0)
    assert not verdict.ok
    assert verdict.reason == ('below the margin floor at 1.00 m/s: phase margin 29.9 deg < '
                              '45.0 deg')
    assert verdict.margins is not None and verdict.margins.stable


def test_floors_come_from_the_config() -> None:
    """Lowering tuning.min_phase_margin lets the same gains pass."""
    cfg = reference_config().replaced({'gains.ki': 0.3, 'tuning.min_phase_margin': 25.0})
    assert guard_verdict(cfg, 1.0).ok


def test_delay_margin_floor_scales_with_the_declared_dead_time() -> None:
    """A long declared dead time makes the delay-margin floor bind, named in the reason."""
    cfg = reference_config().replaced({'vehicle.steer_delay': 0.6})
    verdict = guard_verdict(cfg, 1.0)
    assert not verdict.ok
    assert 'x vehicle.steer_delay' in verdict.reason


def test_cruise_speed_is_checked_too() -> None:
    """At rest the guard checks the cruise speed the vehicle is about to run at."""
    cfg = reference_config().replaced({'gains.ki': 0.3, 'speed.cruise': 1.2})
    verdict = guard_verdict(cfg, 0.0)
    assert not verdict.ok and 'at 1.20 m/s' in verdict.reason


def test_no_feedback_is_rejected() -> None:
    """All three gains at zero leave the double integrator open: rejected."""
    cfg = reference_config().replaced({'gains.kp': 0.0, 'gains.kd': 0.0})
    verdict = guard_verdict(cfg, 1.0)
    assert not verdict.ok and 'no feedback' in verdict.reason


def test_standing_still_at_zero_cruise_has_nothing_to_check() -> None:
    """With no speed to check, the verdict is ok and carries no margins."""
    cfg = reference_config().replaced({'speed.cruise': 0.0})
    verdict = guard_verdict(cfg, 0.0)
    assert verdict.ok and verdict.margins is None


def test_guard_path_needs_numpy_only() -> None:
    """Importing and running the guard loads neither scipy nor python-control (node path)."""
    code = ('import sys\n'
            'from corridor_pid.core.config import default_config\n'
            'from corridor_pid.tuning.guard import guard_verdict\n'
            'assert guard_verdict(default_config(), 1.0).ok\n'
            "print(sorted(m for m in ('scipy', 'control', 'matplotlib', 'tqdm') "
            'if m in sys.modules))\n')
    root = Path(__file__).resolve().parents[2]  # `python -c` imports from the cwd first
    done = subprocess.run([sys.executable, '-c', code], capture_output=True, text=True,
                          check=True, timeout=120, cwd=root)
    assert done.stdout.strip() == '[]'
