# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""``corridor-pid check PARAMS [--json]``: validate a params file and print its margins.

The file goes through the node's own validator (:func:`load_params_file`). The margins are
those of the linearised lateral loop (:mod:`corridor_pid.tuning.linear`) with the file's
own vehicle, at its cruise speed and at a quarter, half, three quarters and all of
``speed.max``, with the gains in force at each speed (speed scheduling applied). The verdict
applies the file's floors (``tuning.min_*``) as the node's live guard does.

Exit status: 0 when the file is valid and the loop meets the floors at cruise speed; 1 with
one ``ERROR:`` line when the file is invalid or the loop fails at cruise speed (the gains
the live guard would reject).
"""

from __future__ import annotations

import argparse
import json
import math
import sys
from typing import Any

from corridor_pid.core.config import Config
from corridor_pid.core.errors import CorridorPidError
from corridor_pid.core.paramsfile import load_params_file
from corridor_pid.tuning.guard import guard_verdict, GuardVerdict, MIN_SPEED
from corridor_pid.tuning.linear import LoopModel
from corridor_pid.tuning.margins import Margins, model_margins

__all__ = ['check_report', 'run', 'speed_range']

#: Fractions of speed.max at which the range table is computed.
RANGE_FRACTIONS = (0.25, 0.5, 0.75, 1.0)


def speed_range(config: Config) -> list[float]:
    """Return the speeds [m/s] of the range table: fractions of speed.max and the cruise."""
    speeds = {round(f * config.speed.max, 9) for f in RANGE_FRACTIONS}
    speeds.add(config.speed.cruise)
    return sorted(v for v in speeds if v >= MIN_SPEED)


def _row(config: Config, speed: float) -> dict[str, Any]:
    """Return the margins and the guard verdict at one speed."""
    model = LoopModel.from_config(config, speed)
    margins = model_margins(model)
    verdict = guard_verdict(config.replaced({'speed.cruise': speed}), speed)
    return {'speed': speed, 'kp': model.kp, 'ki': model.ki, 'kd': model.kd,
            'ok': verdict.ok, 'reason': verdict.reason, **margins.as_dict()}


def check_report(config: Config, path: str) -> dict[str, Any]:
    """Return the whole check of a valid ``config`` as a JSON-friendly dict."""
    cruise = config.speed.cruise
    verdict: GuardVerdict = guard_verdict(config, cruise)
    rows = [_row(config, v) for v in speed_range(config)]
    floors = config.tuning
    return {
        'params_file': path,
        'valid': True,
        'ok': verdict.ok,
        'verdict': 'ok' if verdict.ok else verdict.reason,
        'cruise_speed': cruise,
        'margins': None if verdict.margins is None else verdict.margins.as_dict(),
        'speeds': rows,
        'floors': {
            'phase_margin': floors.min_phase_margin,
            'gain_margin': floors.min_gain_margin,
            'delay_margin': floors.min_delay_margin_ratio * config.vehicle.steer_delay,
        },
        'guard': floors.guard,
        'scheduling': config.gains.reference_speed > 0.0,
    }


def _fmt(value: float | None, spec: str, none: str = '-') -> str:
    return none if value is None or not math.isfinite(value) else format(value, spec)


def _text(config: Config, report: dict[str, Any], margins: Margins | None) -> str:
    g, veh, fl = config.gains, config.vehicle, report['floors']
    sched = (f'scheduled from {g.reference_speed:.2f} m/s' if report['scheduling']
             else 'no speed scheduling')
    lines = [
        f"params file   {report['params_file']}: valid",
        f'vehicle       wheelbase {veh.wheelbase:.3f} m, steering lag '
        f'{veh.steer_time_constant:.3f} s, dead time {veh.steer_delay:.3f} s',
        f'gains         kp {g.kp:.4g} rad/m, ki {g.ki:.4g} rad/(m*s), kd {g.kd:.4g} rad*s/m, '
        f'lookahead {config.lookahead:.3g} m, D filter {config.derivative.filter_time:.3g} s '
        f'({sched})',
        f"floors        phase margin {fl['phase_margin']:.1f} deg, gain margin "
        f"{fl['gain_margin']:.1f} dB both ways, delay margin {fl['delay_margin']:.3f} s; "
        f"live guard: {report['guard']}",
        '',
    ]
    cruise = report['cruise_speed']
    if margins is None:
        lines.append(f'cruise speed {cruise:.2f} m/s: too slow for the steering to act; '
                     'no margins at cruise')
    elif not margins.stable:
        lines += [
            f'linearised loop at cruise speed {cruise:.2f} m/s: UNSTABLE',
            f'  phase margin     {_fmt(margins.phase_margin, ".1f", "none")} deg at '
            f'{_fmt(margins.crossover_frequency, ".3g")} rad/s',
            f'  rightmost pole   {margins.spectral_abscissa:+.3g} 1/s (growing)',
        ]
    else:
        up = margins.gain_margin_upper_db
        down = margins.gain_margin_lower_db
        lines += [
            f'linearised loop at cruise speed {cruise:.2f} m/s: stable',
            f'  phase margin     {_fmt(margins.phase_margin, ".1f", "none")} deg at '
            f'{_fmt(margins.crossover_frequency, ".3g")} rad/s',
            f'  gain margin      up {_fmt(up, "+.1f", "unlimited")} dB'
            + (f' (at {margins.upper_phase_crossover:.3g} rad/s)' if math.isfinite(up) else '')
            + f', down {_fmt(down, "+.1f", "unlimited")} dB'
            + (f' (at {margins.lower_phase_crossover:.3g} rad/s)'
               if math.isfinite(down) else ''),
            f'  delay margin     {_fmt(margins.delay_margin, ".3f", "unlimited")} s',
            f'  peak |1/(1+L)|   {margins.max_sensitivity:.2f}',
            f'  slowest pole     {margins.spectral_abscissa:.3g} 1/s, least damping '
            f'{margins.damping:.2f}',
        ]
    lines += ['', '  speed   kp      ki      kd      phase   gain up  gain dn  delay',
              '  [m/s]   rad/m   rad/ms  rad.s/m [deg]   [dB]     [dB]     [s]      verdict']
    for row in report['speeds']:
        if not row['stable']:  # margins of an unstable loop measure nothing
            row = {**row, 'gain_margin_upper': None, 'gain_margin_lower': None,
                   'delay_margin': None}
        lines.append(
            f"  {row['speed']:<7.2f} {row['kp']:<7.3g} {row['ki']:<7.3g} {row['kd']:<7.3g} "
            f"{_fmt(row['phase_margin'], '.1f'):<7} {_fmt(row['gain_margin_upper'], '+.1f'):<8} "
            f"{_fmt(row['gain_margin_lower'], '+.1f'):<8} {_fmt(row['delay_margin'], '.3f'):<8} "
            + ('ok' if row['ok'] else ('UNSTABLE' if not row['stable'] else 'below floor')))
    lines.append('')
    if report['ok']:
        weak = [row for row in report['speeds'] if not row['ok']]
        lines.append('verdict: OK at cruise speed (stable, every margin at or above its floor)')
        for row in weak:
            lines.append(f"caution: {row['reason']}")
    else:
        lines.append(f"verdict: NOT OK: {report['verdict']}")
    return '\n'.join(lines)


def run(args: argparse.Namespace) -> int:
    """Validate ``args.params_file`` and print its margins; return the exit status."""
    path = str(args.params_file)
    try:
        config = load_params_file(path)
        report = check_report(config, path)
    except CorridorPidError as err:
        print(f'ERROR: {err}', file=sys.stderr)
        return 1
    if getattr(args, 'json', False):
        print(json.dumps(report, allow_nan=False))
    else:
        cruise = config.speed.cruise
        margins = (model_margins(LoopModel.from_config(config, cruise))
                   if cruise >= MIN_SPEED else None)
        print(_text(config, report, margins))
    if not report['ok']:
        print(f"ERROR: {path}: gains fail at cruise speed: {report['verdict']}",
              file=sys.stderr)
        return 1
    return 0
