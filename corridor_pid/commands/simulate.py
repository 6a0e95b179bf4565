# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""``corridor-pid simulate SCENARIO [--params F] [--json] [--plot FILE.png] [--csv FILE]``.

Runs the closed loop of :mod:`corridor_pid.sim` offline: the scenario file is the truth for
the plant and sets the mission (course, cruise speed); the params file (the node's own,
default: the built-in defaults that config/corridor_pid.yaml spells out) sets the
controller. Deterministic for the scenario's noise seed.

Output: a metrics table with units, or one JSON object (``--json``) holding every metric of
DESIGN.md section 5 plus ``scenario``, ``params_file``, ``duration`` and ``control_cycles``.
``--csv`` writes the trajectory (header: :data:`corridor_pid.sim.export.CSV_HEADER`),
``--plot`` a PNG (needs matplotlib). Exit status 0; 1 with one ``ERROR:`` line for a bad
scenario or params file, a cruise speed the params do not allow, an unwritable output file
or a missing matplotlib. Nothing is written unless the run succeeded.
"""

from __future__ import annotations

import argparse
import json
from pathlib import Path
import sys
from typing import Any

from corridor_pid.core.config import Config, default_config
from corridor_pid.core.errors import CorridorPidError
from corridor_pid.core.paramsfile import load_params_file
from corridor_pid.sim.loop import SimResult, simulate
from corridor_pid.sim.metrics import metric_text, METRIC_UNITS
from corridor_pid.sim.scenario import load_scenario

__all__ = ['run', 'summary_json', 'summary_text']


def summary_json(result: SimResult, params_file: str | None) -> dict[str, Any]:
    """Return the JSON object of a run: every metric, plus what was run."""
    return {
        **result.metrics.as_dict(),
        'scenario': result.scenario.name,
        'params_file': params_file,
        'duration': result.scenario.duration,
        'control_cycles': int(result.trace['computed'].sum()),
    }


def summary_text(result: SimResult, params_file: str | None) -> str:
    """Return the readable summary of a run: what was run and the metrics with units."""
    sc, cfg = result.scenario, result.config
    g = cfg.gains
    cycles = int(result.trace['computed'].sum())
    lines = [
        f'scenario   {sc.name}' + (f': {sc.description}' if sc.description else ''),
        f'plant      wheelbase {sc.vehicle.wheelbase:g} m, steering lag '
        f'{sc.vehicle.steer_time_constant:g} s, dead time {sc.vehicle.steer_delay:g} s, '
        f'limits {sc.steering.max_angle:g} rad / {sc.steering.max_rate:g} rad/s',
        f'sensor     {sc.pose_rate:g} Hz, noise {sc.pose_noise.position:g} m / '
        f'{sc.pose_noise.heading:g} rad (seed {sc.pose_noise.seed}), delay '
        f'{sc.pose_delay:g} s, {len(sc.dropouts)} dropout(s)',
        f"controller {params_file or 'built-in defaults'}: kp {g.kp:g}, ki {g.ki:g}, "
        f'kd {g.kd:g}, lookahead {cfg.lookahead:g} m, cruise {cfg.speed.cruise:g} m/s',
        f'run        {sc.duration:g} s, {cycles} control cycles',
        '',
        f"{'metric':<34} value",
    ]
    for name, value in result.metrics.as_dict().items():
        text = metric_text(value, METRIC_UNITS[name], 'n/a (no corridor width)')
        lines.append(f'{name:<34} {text}')
    return '\n'.join(lines)


def _checked_output(path: str | None, what: str) -> None:
    """Refuse an output path whose folder does not exist (before running anything)."""
    if path is None:
        return
    folder = Path(path).resolve().parent
    if not folder.is_dir():
        raise CorridorPidError(f'{what} {path!r}: folder {str(folder)!r} does not exist')


def _config(params_file: str | None) -> Config:
    return default_config() if params_file is None else load_params_file(params_file)


def run(args: argparse.Namespace) -> int:
    """Simulate ``args.scenario`` under ``args.params``; print and write; return the status."""
    params_file: str | None = getattr(args, 'params', None)
    plot_file: str | None = getattr(args, 'plot', None)
    csv_file: str | None = getattr(args, 'csv', None)
    try:
        if plot_file is not None:
            from corridor_pid.sim.plot import pyplot
            pyplot()  # fail on a missing matplotlib before anything runs
        _checked_output(csv_file, '--csv')
        _checked_output(plot_file, '--plot')
        scenario = load_scenario(args.scenario)
        config = _config(params_file)
        result = simulate(scenario, config)
        if csv_file is not None:
            from corridor_pid.sim.export import write_trace_csv
            _written(write_trace_csv, result, csv_file)
        if plot_file is not None:
            from corridor_pid.sim.plot import write_plot
            _written(write_plot, result, plot_file)
    except CorridorPidError as err:
        print(f'ERROR: {err}', file=sys.stderr)
        return 1
    if getattr(args, 'json', False):
        print(json.dumps(summary_json(result, params_file), allow_nan=False))
    else:
        print(summary_text(result, params_file))
        for what, path in (('trajectory', csv_file), ('plot', plot_file)):
            if path is not None:
                print(f'wrote {what} to {path}')
    return 0


def _written(writer: Any, result: SimResult, path: str) -> None:
    """Call ``writer(result, path)``, turning a file-system failure into a one-line error."""
    try:
        writer(result, path)
    except OSError as err:
        raise CorridorPidError(f'cannot write {path!r}: {err.strerror or err}') from err
