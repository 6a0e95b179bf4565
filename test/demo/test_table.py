# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""The run table: slot rows joined with the controller's terms and its state changes."""

from __future__ import annotations

import csv
import math
from pathlib import Path

from corridor_pid.demo.table import (
    csv_header,
    EXTRA_COLUMNS,
    run_metrics,
    run_table,
    StateChange,
    write_run_csv,
)
from corridor_pid.demo.world import Phase, STATE_NAMES
from corridor_pid.sim.loop import TRACE_COLUMNS
import numpy as np
import pytest

MAX_ANGLE = 0.5


def row(t: float, stamp: float, lateral: float = 0.1, speed: float = 1.0,
        phase: Phase = Phase.RUNNING) -> tuple[float, ...]:
    """Return a state row with the given time, pose stamp, lateral offset and speed."""
    values = dict.fromkeys(STATE_NAMES, 0.0)
    values.update(time=t, pose_stamp=stamp, lateral=lateral, speed=speed, node_time=t,
                  phase=float(phase))
    return tuple(values[name] for name in STATE_NAMES)


def terms(unclamped: float, steering: float, kp: float = 0.8) -> dict[str, float]:
    """Return the controller's terms of one cycle."""
    return {'error': -0.1, 'p': -0.08, 'i': 0.0, 'd': 0.0, 'feedforward': 0.0, 'blend': 0.0,
            'unclamped': unclamped, 'steering': steering, 'speed': 1.0, 'kp': kp, 'ki': 0.0,
            'kd': 0.05, 'lateral': 0.1, 'heading': 0.0, 'time': 0.0}


def test_columns_extend_the_simulator_trace() -> None:
    """run.csv starts with the offline trace's columns, then the extras, names unique."""
    names = csv_header()
    assert names[:len(TRACE_COLUMNS)] == [name for name, _, _ in TRACE_COLUMNS]
    assert names[len(TRACE_COLUMNS):] == [name for name, _, _ in EXTRA_COLUMNS]
    assert len(set(names)) == len(names)


def test_saturation_flags_follow_the_limit_order_of_the_core() -> None:
    """Angle clamp first, then the rate limit: flags derived from unclamped and steering."""
    rows = [row(0.0, math.nan, phase=Phase.HELD), row(0.02, 0.0), row(0.04, 0.02),
            row(0.06, 0.04), row(0.08, 0.06)]
    answers = {0.0: terms(0.7, 0.5),      # clamped to the angle limit, rate free
               0.02: terms(0.7, 0.48),    # clamped, then rate-limited
               0.04: terms(0.2, 0.2),     # free
               0.06: terms(0.2, 0.25)}    # rate-limited only
    table = run_table(rows, answers, [StateChange(0.0, 'tracking')], MAX_ANGLE)
    c = table.columns
    assert list(c['angle_saturated']) == [0, 1, 1, 0, 0]
    assert list(c['rate_saturated']) == [0, 0, 1, 0, 1]
    assert list(c['computed']) == [0, 1, 1, 1, 1]


def test_lost_slot_carries_the_last_terms_and_state_follows_the_changes() -> None:
    """A lost pose: computed 0, last terms kept; state from the last change at or before t."""
    rows = [row(0.02, 0.0), row(0.04, math.nan), row(0.06, 0.04)]
    answers = {0.0: terms(0.1, 0.1, kp=0.8), 0.04: terms(0.1, 0.1, kp=1.2)}
    changes = [StateChange(0.02, 'tracking'), StateChange(0.05, 'stopped')]
    table = run_table(rows, answers, changes, MAX_ANGLE)
    c = table.columns
    assert list(c['computed']) == [1, 0, 1]
    assert list(c['kp']) == [0.8, 0.8, 1.2]
    assert list(c['state']) == ['tracking', 'tracking', 'stopped']
    assert np.isnan(c['pose_stamp'][1])


def test_start_row_only_when_no_slot_is_at_zero() -> None:
    """The held row at t = 0 opens the table unless a pose slot is at t = 0 itself."""
    held = row(0.0, math.nan, phase=Phase.HELD)
    later_hold = row(0.03, math.nan, phase=Phase.HELD)
    table = run_table([held, row(0.02, 0.0), later_hold, row(0.04, 0.02)], {}, [], MAX_ANGLE,
                      initial_state='waiting')
    assert list(table.columns['t']) == [0.0, 0.02, 0.04]
    assert list(table.columns['state']) == ['waiting'] * 3
    at_zero = run_table([held, row(0.0, 0.0)], {}, [], MAX_ANGLE)
    assert list(at_zero.columns['t']) == [0.0]


def test_csv_round_trip_and_metrics(tmp_path: Path) -> None:
    """The CSV holds every row under the header; empty cells for NaN; metrics on truth."""
    rows = [row(0.02 * k + 0.02, 0.02 * k, lateral=0.3 * (0.9 ** k)) for k in range(50)]
    rows[10] = row(0.22, math.nan, lateral=rows[10][STATE_NAMES.index('lateral')])
    answers = {round(0.02 * k, 6): terms(0.1, 0.1) for k in range(50) if k != 10}
    table = run_table(rows, answers, [StateChange(0.0, 'tracking')], MAX_ANGLE)
    path = tmp_path / 'run.csv'
    write_run_csv(path, table)
    with open(path, encoding='utf-8', newline='') as handle:
        lines = list(csv.reader(handle))
    assert lines[0] == csv_header() and len(lines) == 51
    assert lines[11][csv_header().index('pose_stamp')] == ''
    metrics = run_metrics(table, corridor_width=2.4)
    assert metrics.max_lateral_error == pytest.approx(0.3)
    assert metrics.diverged is False and metrics.watchdog_stops == 0
