# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""The demo's run table: true state, controller terms, commands and state per pose slot.

Built after the run from what the demo heard on the topics:

- the simulated vehicle's ``~/state`` rows (:data:`corridor_pid.demo.world.SIM_STATE_FIELDS`),
  one per pose slot: the truth (pose, lateral and heading error, wheel angle, speed) and
  the commands in force;
- the controller's ``~/terms`` (one per computed cycle, keyed by the stamp of the pose it
  answered): the error, the P, I, D, feedforward and bumpless terms, the gains in force;
- the controller's ``/diagnostics`` (at once on every state change): the state.

The columns are :data:`RUN_COLUMNS`: the offline simulator's trace columns
(:data:`corridor_pid.sim.loop.TRACE_COLUMNS`, so ``simulate --csv`` and the demo's CSV line
up) followed by :data:`EXTRA_COLUMNS`. A slot whose pose was lost (outage) or not answered
carries the last terms forward with ``computed`` 0.
"""

from __future__ import annotations

import bisect
from collections.abc import Mapping, Sequence
import csv
import math
from pathlib import Path
from typing import NamedTuple

from corridor_pid.demo.world import Phase, STATE_NAMES
from corridor_pid.sim.loop import TRACE_COLUMNS
from corridor_pid.sim.metrics import Metrics, metrics_from
import numpy as np

__all__ = [
    'EXTRA_COLUMNS', 'RUN_COLUMNS', 'RunTable', 'StateChange', 'TERM_NAMES', 'csv_header',
    'run_metrics', 'run_table', 'write_run_csv',
]

EXTRA_COLUMNS: tuple[tuple[str, str, str], ...] = (
    ('blend', 'rad', 'bumpless-retune offset'),
    ('unclamped', 'rad', 'controller output before the angle and rate limits'),
    ('kp', 'rad/m', 'proportional gain in force'),
    ('ki', 'rad/(m s)', 'integral gain in force'),
    ('kd', 'rad s/m', 'derivative gain in force'),
    ('pose_stamp', 's', 'header stamp of the pose sent in this slot (empty: lost)'),
    ('node_time', 's', "controller's clock when it answered that pose (empty: no answer)"),
)
"""Columns of the demo's CSV after the simulator's trace columns: name, unit, meaning."""

RUN_COLUMNS: tuple[tuple[str, str, str], ...] = TRACE_COLUMNS + EXTRA_COLUMNS
"""Every column of ``run.csv``, in order: name, unit, meaning. The CSV's header line is
the names (:func:`csv_header`)."""

TERM_NAMES = ('error', 'p', 'i', 'd', 'feedforward', 'blend', 'unclamped', 'steering',
              'speed', 'kp', 'ki', 'kd', 'lateral', 'heading', 'time')
"""Fields of the controller's ``~/terms`` the table uses."""


class StateChange(NamedTuple):
    """The controller's state from a given simulated time [s] on."""

    time: float
    state: str


class RunTable(NamedTuple):
    """The run table: columns of :data:`RUN_COLUMNS` by name (``state`` as strings)."""

    columns: dict[str, np.ndarray]

    def __len__(self) -> int:
        """Return the number of rows."""
        return len(self.columns['t'])


def csv_header() -> list[str]:
    """Return the header line of ``run.csv`` (the names of :data:`RUN_COLUMNS`)."""
    return [name for name, _, _ in RUN_COLUMNS]


def _slot_rows(state_rows: Sequence[Sequence[float]]) -> list[Sequence[float]]:
    """Return the rows of the trace: the start (when no slot is at t = 0) and every slot."""
    phase = STATE_NAMES.index('phase')
    slots = [r for r in state_rows if r[phase] == Phase.RUNNING]
    first = [r for r in state_rows if r[phase] == Phase.HELD and r[0] == 0.0][:1]
    if first and (not slots or slots[0][0] > 0.0):
        return first + slots
    return slots


def run_table(state_rows: Sequence[Sequence[float]],
              terms: Mapping[float, Mapping[str, float]],
              states: Sequence[StateChange], max_angle: float,
              initial_state: str = 'disabled') -> RunTable:
    """Return the run table of the heard messages (see the module docstring).

    Args:
        state_rows: the simulated vehicle's state rows, in order.
        terms: pose stamp [s] (rounded to 1 us) -> the controller's terms by name.
        states: the controller's state changes, by simulated time.
        max_angle: the controller's steering angle limit [rad] (saturation flags).
        initial_state: the state before the first change heard.

    """
    index = {name: i for i, name in enumerate(STATE_NAMES)}
    rows = _slot_rows(state_rows)
    change_times = [c.time for c in states]
    out: dict[str, list[float]] = {name: [] for name, _, _ in RUN_COLUMNS if name != 'state'}
    state_column: list[str] = []
    last: Mapping[str, float] | None = None
    for row in rows:
        t = row[index['time']]
        for name in ('x', 'y', 'yaw', 'lateral', 'heading_error', 'progress', 'steer',
                     'speed', 'steer_command', 'speed_command', 'pose_stamp', 'node_time'):
            out[name].append(row[index[name]])
        out['t'].append(t)
        stamp = row[index['pose_stamp']]
        answer = terms.get(round(stamp, 6)) if math.isfinite(stamp) else None
        computed = answer is not None
        if answer is not None:
            last = answer
        source = last or {}
        out['measured_lateral'].append(source.get('lateral', 0.0))
        for name in ('error', 'p', 'i', 'd', 'feedforward', 'blend', 'unclamped', 'kp', 'ki',
                     'kd'):
            out[name].append(source.get(name, 0.0))
        angle_sat = rate_sat = False
        if answer is not None:
            u = answer['unclamped']
            clamped = min(max(u, -max_angle), max_angle)
            angle_sat = clamped != u
            rate_sat = answer['steering'] != clamped
        out['computed'].append(float(computed))
        out['angle_saturated'].append(float(angle_sat))
        out['rate_saturated'].append(float(rate_sat))
        at = bisect.bisect_right(change_times, t + 1e-9)
        state_column.append(states[at - 1].state if at else initial_state)
    columns = {name: np.asarray(values, dtype=float) for name, values in out.items()}
    ordered = {name: columns[name] if name != 'state' else np.asarray(state_column)
               for name, _, _ in RUN_COLUMNS}
    return RunTable(ordered)


def run_metrics(table: RunTable, corridor_width: float | None) -> Metrics:
    """Return the §5 metrics of the run table (true lateral offset and speed)."""
    c = table.columns
    return metrics_from(c['t'], c['lateral'], c['speed'], list(c['state']),
                        c['angle_saturated'], c['rate_saturated'], c['computed'],
                        corridor_width)


def _cell(value: object) -> str:
    if isinstance(value, str):
        return value
    number = float(value)  # type: ignore[arg-type]
    if math.isnan(number):
        return ''
    return f'{number:.9g}'


def write_run_csv(path: str | Path, table: RunTable) -> None:
    """Write ``run.csv``: the :func:`csv_header` line, then one line per row."""
    names = csv_header()
    columns = [table.columns[name] for name in names]
    with open(path, 'w', encoding='utf-8', newline='') as handle:
        writer = csv.writer(handle)
        writer.writerow(names)
        for i in range(len(table)):
            writer.writerow([_cell(col[i]) for col in columns])
