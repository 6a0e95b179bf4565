# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""The run metrics on hand-made traces, by their definitions in DESIGN.md section 5."""

from __future__ import annotations

import math

from corridor_pid.sim.metrics import (
    diverged,
    final_lateral_error,
    max_lateral_error,
    mean_speed,
    METRIC_UNITS,
    metrics_from,
    overshoot,
    rms_lateral_error,
    saturated_fraction,
    settling_band,
    settling_time,
    watchdog_stops,
)
import numpy as np
import pytest


def test_rms_max_and_final() -> None:
    """RMS, max and final of |y| over the samples."""
    y = [0.3, -0.4, 0.0, 0.1]
    assert rms_lateral_error(y) == pytest.approx(math.sqrt((0.09 + 0.16 + 0.01) / 4))
    assert max_lateral_error(y) == pytest.approx(0.4)
    assert final_lateral_error(y) == pytest.approx(0.1)


def test_overshoot_is_the_largest_excursion_opposite_the_start() -> None:
    """Starting left (y > 0), the overshoot is the deepest point on the right."""
    assert overshoot([0.4, 0.2, -0.03, -0.08, -0.01, 0.02]) == pytest.approx(0.08)
    assert overshoot([-0.4, -0.1, 0.05, 0.0]) == pytest.approx(0.05)
    assert overshoot([0.4, 0.2, 0.1, 0.0]) == 0.0


def test_overshoot_from_the_centre_uses_the_first_excursion_beyond_5_cm() -> None:
    """With |y(0)| < 1 mm the side of the first excursion beyond 5 cm plays y(0)'s role."""
    # First excursion beyond 5 cm is to the right (-0.06): the overshoot is the left peak.
    assert overshoot([0.0005, -0.02, -0.06, -0.01, 0.03, 0.07, 0.0]) == pytest.approx(0.07)
    # Never beyond 5 cm: no overshoot even though it wanders to both sides.
    assert overshoot([0.0, 0.04, -0.045, 0.01]) == 0.0
    # 1 mm is not "centred": the initial side counts.
    assert overshoot([0.001, -0.02, 0.06]) == pytest.approx(0.02)


def test_settling_band() -> None:
    """The band is max(5 cm, 10 % of |y(0)|)."""
    assert settling_band(0.2) == pytest.approx(0.05)
    assert settling_band(-1.0) == pytest.approx(0.1)


def test_settling_time_is_the_last_exit_interpolated() -> None:
    """The last time |y| is outside the band, interpolated to the band edge."""
    t = [0.0, 1.0, 2.0, 3.0, 4.0, 5.0]
    y = [1.0, 0.5, -0.2, 0.15, 0.05, 0.0]     # band 0.1; last outside at t = 3 (0.15)
    # 0.15 -> 0.05 crosses 0.1 halfway between t = 3 and t = 4.
    assert settling_time(t, y) == pytest.approx(3.5)


def test_settling_time_edge_cases() -> None:
    """0 when never outside the band; the duration when it ends outside."""
    assert settling_time([0.0, 1.0, 2.0], [0.01, 0.04, -0.03]) == 0.0
    assert settling_time([0.0, 1.0, 2.0], [0.3, 0.2, 0.1]) == pytest.approx(2.0)
    # Times count from the first sample.
    assert settling_time([10.0, 11.0, 12.0], [0.3, 0.2, 0.0]) == pytest.approx(1.75)


def test_saturated_fraction_counts_control_cycles_only() -> None:
    """The share is over control cycles; other samples do not count."""
    sat = [True, False, True, True]
    computed = [True, True, False, True]
    assert saturated_fraction(sat, computed) == pytest.approx(2 / 3)
    assert saturated_fraction(sat) == pytest.approx(0.75)
    assert saturated_fraction([True], [False]) == 0.0


def test_watchdog_stops_counts_entries() -> None:
    """Each entry into stopped counts once."""
    states = ['waiting', 'tracking', 'stopped', 'stopped', 'tracking', 'stopped', 'tracking']
    assert watchdog_stops(states) == 2
    assert watchdog_stops(['tracking'] * 3) == 0


def test_diverged_needs_a_width() -> None:
    """Diverged when |y| exceeds half the corridor width; None with no width."""
    assert diverged([0.2, 1.3], 2.4) is True
    assert diverged([0.2, 1.1], 2.4) is False
    assert diverged([5.0], None) is None


def test_metrics_from_gives_every_contract_key() -> None:
    """The bundle has exactly the section 5 keys, each with a unit entry."""
    t = np.linspace(0.0, 2.0, 5)
    m = metrics_from(t, [0.2, 0.1, -0.06, 0.0, 0.0], [0.0, 0.5, 1.0, 1.0, 1.0],
                     ['waiting', 'tracking', 'tracking', 'tracking', 'tracking'],
                     [False, True, False, False, False], [False] * 5,
                     [False, True, True, True, True], corridor_width=2.0)
    d = m.as_dict()
    assert list(d) == list(METRIC_UNITS)
    assert d['overshoot'] == pytest.approx(0.06)
    assert d['steering_saturated_fraction'] == pytest.approx(0.25)
    assert d['mean_speed'] == pytest.approx(mean_speed([0.0, 0.5, 1.0, 1.0, 1.0]))
    assert d['diverged'] is False and d['watchdog_stops'] == 0
