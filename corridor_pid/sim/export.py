# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""The trace of a simulated run as CSV (one row per pose slot).

The header row names the columns of :data:`corridor_pid.sim.loop.TRACE_COLUMNS`, in that
order; units: ``t`` [s]; ``x``, ``y``, ``lateral``, ``progress``, ``measured_lateral``,
``error`` [m]; ``yaw``, ``heading_error``, ``steer``, ``steer_command``, ``p``, ``i``,
``d``, ``feedforward`` [rad]; ``speed``, ``speed_command`` [m/s]; ``computed``,
``angle_saturated``, ``rate_saturated`` are 0 or 1; ``state`` is the controller state name.
"""

from __future__ import annotations

import csv
from pathlib import Path

from corridor_pid.sim.loop import SimResult, TRACE_COLUMNS

__all__ = ['CSV_HEADER', 'write_trace_csv']

CSV_HEADER: tuple[str, ...] = tuple(name for name, _, _ in TRACE_COLUMNS)
"""The CSV header, column names in order."""

_FLAGS = frozenset({'computed', 'angle_saturated', 'rate_saturated'})


def write_trace_csv(result: SimResult, path: str | Path) -> None:
    """Write the trace of ``result`` to ``path`` as CSV (see the module docstring).

    Raises:
        OSError: the file cannot be written.

    """
    trace = result.trace
    columns = []
    for name in CSV_HEADER:
        values = trace[name]
        if name == 'state':
            columns.append([str(v) for v in values])
        elif name in _FLAGS:
            columns.append([str(int(v)) for v in values])
        else:
            columns.append([repr(float(v)) for v in values])
    with open(path, 'w', newline='', encoding='utf-8') as handle:
        writer = csv.writer(handle)
        writer.writerow(CSV_HEADER)
        writer.writerows(zip(*columns))
