# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""``corridor-pid tune SCENARIO... [--params F] --out F``: tuned params file and a report.

``--method optimize`` (default) searches kp, kd (``--free`` adds ki, lookahead) with
:func:`corridor_pid.tuning.optimize.optimize_gains`; ``--method relay`` runs the relay
experiment on each scenario's vehicle in the simulator and writes the best Ziegler-Nichols or
Tyreus-Luyben row that meets the margin floors. Either way the report shows the relay rows
beside the result, the before/after metrics per scenario and the margins at each scenario's
speed. The output file is a copy of the start params file (or only the tuned keys, when
there is none) with the tuned values: the node loads it unchanged. Nothing is written when
the run fails.
"""

from __future__ import annotations

import argparse
import json
import math
from pathlib import Path
import sys
import time
from typing import Any

from corridor_pid.core.config import Config, default_config
from corridor_pid.core.errors import CorridorPidError, TuningError
from corridor_pid.core.params import ParamValue
from corridor_pid.core.paramsfile import load_params_file, params_from_file, write_params_file
from corridor_pid.sim.loop import controller_config, SimResult, simulate
from corridor_pid.sim.scenario import load_scenario, Scenario
from corridor_pid.tuning._extras import optional_module
from corridor_pid.tuning.guard import guard_verdict
from corridor_pid.tuning.optimize import (
    CostWeights,
    default_jobs,
    EVALUATIONS_PER_FREE,
    floor_violation,
    margins_at,
    optimize_gains,
    PARAM_NAMES,
    scenario_score,
    ScenarioScore,
)
from corridor_pid.tuning.relay import RelayResult
from corridor_pid.tuning.relaytune import relay_rules, RelayRules

__all__ = ['run', 'tune_report']

METRIC_KEYS = ('rms_lateral_error', 'max_lateral_error', 'final_lateral_error', 'overshoot',
               'settling_time', 'steering_saturated_fraction',
               'steering_rate_saturated_fraction', 'watchdog_stops', 'diverged', 'mean_speed')


def _check_output_path(option: str, path: str) -> None:
    parent = Path(path).resolve().parent
    if not parent.is_dir():
        raise TuningError(f'{option}: directory {str(parent)!r} does not exist')


def _rounded(values: dict[str, float]) -> dict[str, float]:
    """Return values with 4 significant digits (what the params file shows)."""
    return {k: float(f'{v:.4g}') for k, v in values.items()}


def _aggregate(scores: list[ScenarioScore]) -> dict[str, Any]:
    """Return the contract's metric keys over a scenario set (worst case or mean)."""
    ms = [s.metrics for s in scores]
    flags = [m['diverged'] for m in ms]
    return {
        'rms_lateral_error': math.sqrt(sum(m['rms_lateral_error'] ** 2 for m in ms) / len(ms)),
        'max_lateral_error': max(m['max_lateral_error'] for m in ms),
        'final_lateral_error': max(m['final_lateral_error'] for m in ms),
        'overshoot': max(m['overshoot'] for m in ms),
        'settling_time': max(m['settling_time'] for m in ms),
        'steering_saturated_fraction':
            sum(m['steering_saturated_fraction'] for m in ms) / len(ms),
        'steering_rate_saturated_fraction':
            sum(m['steering_rate_saturated_fraction'] for m in ms) / len(ms),
        'watchdog_stops': sum(int(m['watchdog_stops']) for m in ms),
        'diverged': None if all(f is None for f in flags) else any(bool(f) for f in flags),
        'mean_speed': sum(m['mean_speed'] for m in ms) / len(ms),
    }


def _gains(config: Config) -> dict[str, float]:
    g = config.gains
    return {'kp': g.kp, 'ki': g.ki, 'kd': g.kd, 'lookahead': config.lookahead,
            'reference_speed': g.reference_speed}


def _relay_dict(rr: RelayRules) -> dict[str, Any]:
    return {
        'relays': [{'scenario': name, **(r.as_dict() if isinstance(r, RelayResult)
                                         else {'error': r})} for name, r in rr.relays],
        'basis': rr.basis or None,
        'rules': [{'rule': g.rule, 'controller': g.controller, 'kp': g.kp, 'ki': g.ki,
                   'kd': g.kd, 'Ti': None if math.isinf(g.ti) else g.ti, 'Td': g.td,
                   'cost': e.cost if e.feasible else None, 'meets_floors': e.feasible,
                   'reason': e.reason} for g, e in rr.rows],
    }


def tune_report(args: argparse.Namespace) -> tuple[dict[str, Any], Config,
                                                   dict[str, ParamValue], list[SimResult],
                                                   list[SimResult]]:
    """Run the tuning the arguments ask for; return (report, tuned config, file copy, runs).

    Raises:
        CorridorPidError: bad input or no acceptable result (nothing written).

    """
    paths = [str(p) for p in args.scenarios]
    scenarios: list[Scenario] = [load_scenario(p) for p in paths]
    if args.params:
        start = load_params_file(args.params)
        copy: dict[str, ParamValue] = dict(params_from_file(args.params))  # type: ignore[arg-type]
    else:
        start, copy = default_config(), {}
    for path, scenario in zip(paths, scenarios):
        try:
            controller_config(scenario, start)
        except CorridorPidError as err:
            raise TuningError(f'{path}: the mission does not fit the params: {err}') from err
    free = tuple(dict.fromkeys(getattr(args, 'free', None) or ('kp', 'kd')))
    method = getattr(args, 'method', 'optimize') or 'optimize'
    seed = int(getattr(args, 'seed', 0) or 0)
    jobs = int(getattr(args, 'jobs', None) or default_jobs())
    budget = getattr(args, 'evaluations', None) or EVALUATIONS_PER_FREE * len(free)
    weights = CostWeights()
    began = time.perf_counter()

    rules = relay_rules(scenarios, start, jobs, weights)
    optimised = None
    if method == 'relay':
        if rules.best is None:
            reasons = '; '.join(f'{g.rule} {g.controller}: {e.reason}' for g, e in rules.rows)
            raise TuningError('relay: no rule row meets the margin floors'
                              + (f' ({reasons})' if reasons else ' (no relay cycle settled)'))
        tuned_values = {'kp': rules.best[0].kp, 'ki': rules.best[0].ki,
                        'kd': rules.best[0].kd}
    else:
        tqdm = optional_module('tqdm')
        tqdm.tqdm.monitor_interval = 0  # no monitor thread: the worker pool may fork
        with tqdm.tqdm(total=budget, desc='tune', unit='candidate', file=sys.stderr,
                       disable=None, leave=False) as bar:
            optimised = optimize_gains(scenarios, start, free, seed, jobs, budget, weights,
                                       bar.update)
        tuned_values = dict(optimised.best.values)
    changes = {PARAM_NAMES[k]: v for k, v in _rounded(tuned_values).items()}
    tuned = start.replaced(changes)
    if floor_violation(tuned, {s.speed for s in scenarios})[0] > 0.0:  # rounding crossed
        changes = {PARAM_NAMES[k]: float(v) for k, v in tuned_values.items()}
        tuned = start.replaced(changes)

    runs_start = [simulate(s, start) for s in scenarios]
    runs_tuned = [simulate(s, tuned) for s in scenarios]
    scores_start = [scenario_score(r, weights) for r in runs_start]
    scores_tuned = [scenario_score(r, weights) for r in runs_tuned]
    speeds = sorted({s.speed for s in scenarios})
    margins = []
    for (v, before), (_, after) in zip(margins_at(start, speeds), margins_at(tuned, speeds)):
        verdict = guard_verdict(tuned.replaced({'speed.cruise': v}), v)
        margins.append({'speed': v, 'start': before.as_dict(), 'tuned': after.as_dict(),
                        'tuned_meets_floors': verdict.ok, 'reason': verdict.reason})
    report: dict[str, Any] = {
        **_aggregate(scores_tuned),
        'method': method, 'seed': seed, 'jobs': jobs, 'free': list(free),
        'params_file': args.params, 'out': args.out,
        'evaluations': optimised.evaluations if optimised else len(rules.rows),
        'simulations': optimised.simulations if optimised else None,
        'seconds': time.perf_counter() - began,
        'start': _gains(start), 'tuned': _gains(tuned),
        'cost': {'start': sum(s.cost for s in scores_start),
                 'tuned': sum(s.cost for s in scores_tuned)},
        'scenarios': [{'name': s.name, 'file': p, 'speed': s.speed, 'start': a.as_dict(),
                       'tuned': b.as_dict()}
                      for s, p, a, b in zip(scenarios, paths, scores_start, scores_tuned)],
        'margins': margins,
        'relay': _relay_dict(rules),
        'floors': {'phase_margin': start.tuning.min_phase_margin,
                   'gain_margin': start.tuning.min_gain_margin,
                   'delay_margin': start.tuning.min_delay_margin_ratio
                   * start.vehicle.steer_delay},
        'plot': getattr(args, 'plot', None),
    }
    copy.update(changes)
    return report, tuned, copy, runs_start, runs_tuned


def _f(value: float | None, spec: str) -> str:
    return '-' if value is None or not math.isfinite(value) else format(value, spec)


def _text(report: dict[str, Any]) -> str:
    r = report
    sims = f", {r['simulations']} simulations" if r['simulations'] is not None else ''
    lines = [
        f"tune: {len(r['scenarios'])} scenarios, method {r['method']}, free "
        f"{' '.join(r['free'])}, seed {r['seed']}, {r['jobs']} workers",
        f"  {r['evaluations']} candidates{sims} in {r['seconds']:.1f} s",
        '',
        '  gain                  start      tuned',
    ]
    for key, unit in (('kp', 'rad/m'), ('ki', 'rad/(m*s)'), ('kd', 'rad*s/m'),
                      ('lookahead', 'm')):
        lines.append(f"  {key + ' [' + unit + ']':<21} {r['start'][key]:<10.4g} "
                     f"{r['tuned'][key]:.4g}")
    lines += ['', f"  cost [m^2]            {r['cost']['start']:<10.4g} {r['cost']['tuned']:.4g}",
              '', '  per scenario (start -> tuned)',
              '  scenario                      cost [m^2]         rms [m]        '
              'overshoot [m]  settling [s]   rate-limited']
    for sc in r['scenarios']:
        a, b = sc['start'], sc['tuned']
        am, bm = a['metrics'], b['metrics']
        lines.append(
            f"  {sc['name'][:29]:<29} {a['cost']:.4f} -> {b['cost']:<7.4f} "
            f"{am['rms_lateral_error']:.3f} -> {bm['rms_lateral_error']:<6.3f} "
            f"{am['overshoot']:.3f} -> {bm['overshoot']:<6.3f} "
            f"{am['settling_time']:5.1f} -> {bm['settling_time']:<5.1f} "
            f"{am['steering_rate_saturated_fraction']:4.0%} -> "
            f"{bm['steering_rate_saturated_fraction']:.0%}")
    fl = r['floors']
    lines += ['', f"  margins of the linearised loop (floors: {fl['phase_margin']:.0f} deg, "
              f"{fl['gain_margin']:.0f} dB both ways, {fl['delay_margin']:.3f} s delay)",
              '  speed   phase [deg]      gain up [dB]     gain down [dB]   delay [s]']
    for m in r['margins']:
        a, b = m['start'], m['tuned']
        lines.append(
            f"  {m['speed']:<7.2f} {_f(a['phase_margin'], '.1f'):>5} -> "
            f"{_f(b['phase_margin'], '<6.1f')}   {_f(a['gain_margin_upper'], '.1f'):>5} -> "
            f"{_f(b['gain_margin_upper'], '<6.1f')}   {_f(a['gain_margin_lower'], '.1f'):>5} -> "
            f"{_f(b['gain_margin_lower'], '<6.1f')}   {_f(a['delay_margin'], '.3f')} -> "
            f"{_f(b['delay_margin'], '.3f')}" + ('' if m['tuned_meets_floors'] else
                                                 '   BELOW FLOOR'))
    relay = r['relay']
    lines += ['', '  relay experiment in the simulator (steering relay +/-0.02 rad)']
    for item in relay['relays']:
        if 'error' in item:
            lines.append(f"  {item['scenario'][:29]:<29} {item['error']}")
        else:
            lines.append(f"  {item['scenario'][:29]:<29} Ku {item['ultimate_gain']:.3g} rad/m, "
                         f"Pu {item['ultimate_period']:.3g} s")
    if relay['basis']:
        lines += [f"  rule rows from {relay['basis']} (smallest Ku):",
                  '  rule                    kp       ki       kd       cost [m^2]']
        for row in relay['rules']:
            cost = _f(row['cost'], '.4f') if row['meets_floors'] else 'below floor'
            lines.append(f"  {row['rule'] + ' ' + row['controller']:<23} {row['kp']:<8.3g} "
                         f"{row['ki']:<8.3g} {row['kd']:<8.3g} {cost}")
    lines += ['', f"wrote {r['out']}" + (f" and {r['plot']}" if r['plot'] else '')]
    return '\n'.join(lines)


def _plot(path: str, runs_start: list[SimResult], runs_tuned: list[SimResult]) -> None:
    matplotlib = optional_module('matplotlib')
    matplotlib.use('Agg')
    plt = optional_module('matplotlib.pyplot')
    n = len(runs_start)
    fig, axes = plt.subplots(n, 1, figsize=(8.0, 2.2 * n + 0.6), squeeze=False,
                             sharex=False)
    for ax, a, b in zip(axes[:, 0], runs_start, runs_tuned):
        ax.plot(a.trace['t'], a.trace['lateral'], color='0.55', lw=1.0, label='start')
        ax.plot(b.trace['t'], b.trace['lateral'], color='tab:blue', lw=1.2, label='tuned')
        ax.axhline(0.0, color='0.2', lw=0.6)
        ax.set_ylabel('offset y [m]')
        ax.set_title(a.scenario.name, fontsize=9, loc='left')
        ax.grid(alpha=0.3)
    axes[0, 0].legend(loc='upper right', fontsize=8)
    axes[-1, 0].set_xlabel('time [s]')
    fig.tight_layout()
    fig.savefig(path, dpi=110)
    plt.close(fig)


def run(args: argparse.Namespace) -> int:
    """Tune, write the params file (and plot), print the report; return the exit status."""
    try:
        _check_output_path('--out', args.out)
        plot = getattr(args, 'plot', None)
        if plot:
            _check_output_path('--plot', plot)
            optional_module('matplotlib')
        optional_module('scipy')
        report, _, copy, runs_start, runs_tuned = tune_report(args)
        header = (f"Tuned by corridor-pid tune (method {report['method']}, seed "
                  f"{report['seed']}) over: {', '.join(s['name'] for s in report['scenarios'])}"
                  f"\nStart: {args.params or 'built-in defaults'}. Cost (sum over the "
                  f"scenarios, m^2): {report['cost']['start']:.4g} -> "
                  f"{report['cost']['tuned']:.4g}.\nTry it in simulation and on a stand, "
                  'then at low speed, with a hardware emergency stop in reach.')
        write_params_file(args.out, copy, header=header)
        if plot:
            _plot(plot, runs_start, runs_tuned)
    except CorridorPidError as err:
        print(f'ERROR: {err}', file=sys.stderr)
        return 1
    if getattr(args, 'json', False):
        print(json.dumps(report, allow_nan=False))
    else:
        print(_text(report))
    return 0
