# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Scenario-set gain optimiser: closed-loop cost in the simulator under margin floors.

Cost of one scenario run (lateral offset ``y`` [m], steering command ``u`` [rad], run length
``T`` [s]), every term in m^2 so they add::

    J = (1/T) int y^2 dt                                  tracking (mean squared offset)
      + w_effort * (1/T) int (du/dt)^2 dt                 steering effort (jitter)
      + w_saturation * (angle_fraction + rate_fraction)   time spent on a steering limit
      + w_overshoot * max(0, overshoot - bound)^2         overshoot beyond a bound
      + w_divergence * [diverged]                         left the corridor

The set's cost is the sum over its scenarios. A candidate whose linearised loop (the params
file's own vehicle, at every scenario's cruise speed, gains scheduled as in force) misses a
floor of ``tuning.min_*`` is not simulated: its cost is ``INFEASIBLE`` plus the relative
shortfalls, which steers the search back inside the floors.

Search (deterministic for a seed): a scrambled Sobol sample of the box (scipy.stats.qmc,
seeded) together with the start point, then bounded Nelder-Mead (scipy.optimize.minimize)
from the best of them, in normalised coordinates (logarithmic for kp, kd, lookahead; linear
for ki). Scenario runs of one candidate, and of a Sobol batch, are spread over worker
processes (concurrent.futures); the result does not depend on the number of workers.
"""

from __future__ import annotations

from collections.abc import Callable, Iterable, Mapping, Sequence
import concurrent.futures
from dataclasses import dataclass, field
import math
import multiprocessing
import os
import threading
import time
from typing import Any

from corridor_pid.core.config import Config
from corridor_pid.core.errors import ConfigError, TuningError
from corridor_pid.sim.loop import controller_config, SimResult, simulate
from corridor_pid.sim.scenario import Scenario
from corridor_pid.tuning._extras import optional_module, scipy_optimize
from corridor_pid.tuning.guard import guard_verdict, MIN_SPEED
from corridor_pid.tuning.linear import LoopModel
from corridor_pid.tuning.margins import Margins, model_margins
import numpy as np

__all__ = [
    'BOUNDS', 'CostWeights', 'EVALUATIONS_PER_FREE', 'Evaluation', 'INFEASIBLE', 'PARAM_NAMES',
    'ScenarioScore', 'TuneResult', 'default_jobs', 'evaluate_candidates', 'evaluate_config',
    'floor_violation', 'margins_at', 'optimize_gains', 'scenario_score',
]

#: Free variable -> parameter name.
PARAM_NAMES: dict[str, str] = {
    'kp': 'gains.kp', 'ki': 'gains.ki', 'kd': 'gains.kd', 'lookahead': 'lookahead',
}
#: Search box [lower, upper] per free variable, and whether it is searched in log scale.
BOUNDS: dict[str, tuple[float, float, bool]] = {
    'kp': (0.05, 5.0, True),        # rad/m
    'ki': (0.0, 1.0, False),        # rad/(m*s)
    'kd': (0.01, 3.0, True),        # rad*s/m
    'lookahead': (0.2, 5.0, True),  # m
}
#: Cost of a candidate below the margin floors, before its shortfalls are added [m^2].
INFEASIBLE = 100.0
#: Candidate budget per free variable when none is asked for.
EVALUATIONS_PER_FREE = 60


@dataclass(frozen=True)
class CostWeights:
    """Weights of the cost terms (see the module docstring), all in m^2 per unit of term.

    Attributes:
        effort: per (rad/s)^2 of mean squared steering-command rate.
        saturation: per unit of (angle + rate) saturated fraction.
        overshoot: per m^2 of overshoot beyond ``overshoot_bound``.
        overshoot_bound: overshoot [m] that costs nothing.
        divergence: for leaving the corridor.

    """

    effort: float = 0.005
    saturation: float = 0.01
    overshoot: float = 10.0
    overshoot_bound: float = 0.1
    divergence: float = 1.0


@dataclass(frozen=True)
class ScenarioScore:
    """Cost of one scenario run and its terms [m^2], with the run's metrics."""

    cost: float
    tracking: float
    effort: float
    saturation: float
    overshoot: float
    divergence: float
    metrics: dict[str, Any]

    def as_dict(self) -> dict[str, Any]:
        """Return a JSON-friendly dict."""
        return {'cost': self.cost, 'tracking': self.tracking, 'effort': self.effort,
                'saturation': self.saturation, 'overshoot_penalty': self.overshoot,
                'divergence_penalty': self.divergence, 'metrics': self.metrics}


def scenario_score(result: SimResult, weights: CostWeights) -> ScenarioScore:
    """Return the cost of one simulated run."""
    trace = result.trace
    t = np.asarray(trace['t'], dtype=float)
    y = np.asarray(trace['lateral'], dtype=float)
    u = np.asarray(trace['steer_command'], dtype=float)
    span = float(t[-1] - t[0]) if t.size > 1 else 1.0
    tracking = float(np.trapezoid(y * y, t)) / span if t.size > 1 else float(y[0] ** 2)
    dt = np.diff(t)
    du = np.diff(u)
    ok = dt > 0.0
    effort = float(np.sum(du[ok] ** 2 / dt[ok])) / span
    m = result.metrics
    sat = m.steering_saturated_fraction + m.steering_rate_saturated_fraction
    over = max(0.0, m.overshoot - weights.overshoot_bound)
    gone = bool(m.diverged) or not (math.isfinite(tracking) and math.isfinite(effort))
    terms = (tracking, weights.effort * effort, weights.saturation * sat,
             weights.overshoot * over * over, weights.divergence if gone else 0.0)
    cost = float(sum(terms)) if all(math.isfinite(x) for x in terms) else INFEASIBLE
    return ScenarioScore(cost, *terms, metrics=m.as_dict())


def floor_violation(config: Config, speeds: Iterable[float]) -> tuple[float, str]:
    """Return (relative shortfall summed over speeds, first reason) of the margin floors.

    0 and '' when the loop meets every floor at every speed (as the live guard checks it).
    """
    total, first = 0.0, ''
    floors = config.tuning
    for v in speeds:
        if v < MIN_SPEED:
            continue
        verdict = guard_verdict(config.replaced({'speed.cruise': v}), v)
        if verdict.ok:
            continue
        first = first or verdict.reason
        m = verdict.margins
        if m is None or not m.stable:
            total += 1.0
        if m is None:
            continue
        need_dm = floors.min_delay_margin_ratio * config.vehicle.steer_delay
        for have, need in ((m.phase_margin, floors.min_phase_margin),
                           (m.gain_margin_upper_db, floors.min_gain_margin),
                           (-m.gain_margin_lower_db, floors.min_gain_margin),
                           (m.delay_margin, need_dm)):
            if need > 0.0 and have < need:
                total += min(1.0, (need - have) / need) if math.isfinite(have) else 1.0
        total = max(total, 1e-6)
    return total, first


# --- worker side: scenarios and the base configuration live in each worker process -----

_WORKER: dict[str, Any] = {}


def _init_worker(scenarios: Sequence[Scenario], base: Config, weights: CostWeights) -> None:
    _WORKER['scenarios'] = tuple(scenarios)
    _WORKER['base'] = base
    _WORKER['weights'] = weights


def _score_task(task: tuple[int, tuple[tuple[str, float], ...]]) -> ScenarioScore:
    index, changes = task
    config = _WORKER['base'].replaced(dict(changes))
    result = simulate(_WORKER['scenarios'][index], config)
    score: ScenarioScore = scenario_score(result, _WORKER['weights'])
    return score


# --- the search -------------------------------------------------------------------------

@dataclass(frozen=True)
class Evaluation:
    """One candidate: its parameter values, total cost and per-scenario scores."""

    values: dict[str, float]
    cost: float
    feasible: bool
    reason: str
    scores: tuple[ScenarioScore, ...] = ()


@dataclass(frozen=True)
class TuneResult:
    """Outcome of :func:`optimize_gains`."""

    start: Evaluation
    best: Evaluation
    config: Config
    evaluations: int
    simulations: int
    seconds: float
    history: tuple[float, ...] = field(repr=False, default=())


class _Evaluator:
    """Evaluates candidates over the scenarios, caching, counting and showing progress."""

    def __init__(self, scenarios: Sequence[Scenario], base: Config, free: Sequence[str],
                 weights: CostWeights, jobs: int, budget: int,
                 progress: Callable[[int], None] | None) -> None:
        self.scenarios = tuple(scenarios)
        self.base = base
        self.free = tuple(free)
        self.weights = weights
        self.speeds = sorted({s.speed for s in scenarios})
        self.cache: dict[tuple[float, ...], Evaluation] = {}
        self.evaluations = 0
        self.simulations = 0
        self.budget = budget
        self.progress = progress
        self.history: list[float] = []
        self.pool: concurrent.futures.ProcessPoolExecutor | None = None
        if jobs > 1:
            methods = multiprocessing.get_all_start_methods()
            method = 'fork' if 'fork' in methods and threading.active_count() == 1 \
                else 'spawn'
            self.pool = concurrent.futures.ProcessPoolExecutor(
                max_workers=jobs, mp_context=multiprocessing.get_context(method),
                initializer=_init_worker, initargs=(self.scenarios, base, weights))
        else:
            _init_worker(self.scenarios, base, weights)

    def close(self) -> None:
        if self.pool is not None:
            self.pool.shutdown()

    def key(self, values: Mapping[str, float]) -> tuple[float, ...]:
        return tuple(round(values[name], 12) for name in self.free)

    def evaluate(self, batch: Sequence[Mapping[str, float]]) -> list[Evaluation]:
        """Return the evaluations of ``batch`` (simulating the new, feasible ones together)."""
        out: list[Evaluation | None] = []
        todo: list[tuple[int, dict[str, float], Config]] = []
        for values in batch:
            hit = self.cache.get(self.key(values))
            if hit is not None:
                out.append(hit)
                continue
            changes = {PARAM_NAMES[n]: float(values[n]) for n in self.free}
            try:
                config = self.base.replaced(changes)
            except ConfigError as err:  # e.g. a rule row beyond a parameter's range
                violation, reason = 1.0, str(err)
            else:
                violation, reason = floor_violation(config, self.speeds)
            if violation > 0.0:
                out.append(Evaluation(dict(values), INFEASIBLE + violation, False, reason))
            else:
                todo.append((len(out), dict(values), config))
                out.append(None)
        tasks = [(i, tuple(sorted((PARAM_NAMES[n], float(v[n])) for n in self.free)))
                 for _, v, _ in todo for i in range(len(self.scenarios))]
        if tasks:
            if self.pool is not None:
                scores = list(self.pool.map(_score_task, tasks))
            else:
                scores = [_score_task(task) for task in tasks]
            self.simulations += len(tasks)
            n = len(self.scenarios)
            for k, (slot, values, _) in enumerate(todo):
                mine = tuple(scores[k * n:(k + 1) * n])
                out[slot] = Evaluation(values, float(sum(s.cost for s in mine)), True, '',
                                       mine)
        done = [ev for ev in out if ev is not None]
        seen: set[tuple[float, ...]] = set()
        for ev in done:  # count new candidates in batch order, whatever ran in parallel
            key = self.key(ev.values)
            if key not in self.cache and key not in seen:
                seen.add(key)
                self._count(ev)
        return done

    def _count(self, ev: Evaluation) -> None:
        self.cache[self.key(ev.values)] = ev
        self.evaluations += 1
        self.history.append(ev.cost)
        if self.progress is not None:
            self.progress(1)


def _to_unit(values: Mapping[str, float], free: Sequence[str]) -> np.ndarray:
    out = []
    for name in free:
        lo, hi, log = BOUNDS[name]
        v = min(max(values[name], lo), hi)
        out.append((math.log(v / lo) / math.log(hi / lo)) if log else (v - lo) / (hi - lo))
    return np.array(out)


def _from_unit(x: np.ndarray, free: Sequence[str]) -> dict[str, float]:
    out = {}
    for name, xi in zip(free, np.clip(x, 0.0, 1.0)):
        lo, hi, log = BOUNDS[name]
        out[name] = float(lo * (hi / lo) ** xi) if log else float(lo + (hi - lo) * xi)
    return out


def optimize_gains(scenarios: Sequence[Scenario], start: Config, free: Sequence[str] = (
                   'kp', 'kd'), seed: int = 0, jobs: int = 1,
                   evaluations: int | None = None,
                   weights: CostWeights | None = None,
                   progress: Callable[[int], None] | None = None) -> TuneResult:
    """Return the gains that minimise the scenario-set cost under the margin floors.

    Args:
        scenarios: the plants and missions to tune over.
        start: the start configuration (its floors, vehicle belief and every other setting
            are kept; only the ``free`` values change).
        free: which of kp, ki, kd, lookahead vary.
        seed: seeds the Sobol sample; the same seed gives the same result.
        jobs: worker processes for the scenario runs (1 = in this process).
        evaluations: candidate budget (start, Sobol sample and Nelder-Mead together);
            default EVALUATIONS_PER_FREE per free variable.
        weights: cost weights.
        progress: called with 1 after each candidate (e.g. a progress bar's update).

    Raises:
        TuningError: an unknown free name, an empty scenario set, or a budget too small.
        ConfigError: a scenario's mission does not fit ``start`` (e.g. speed above max).

    """
    unknown = [n for n in free if n not in PARAM_NAMES]
    if unknown or not free:
        raise TuningError(f'free: {unknown or list(free)!r} is not a subset of '
                          f'{", ".join(PARAM_NAMES)}')
    if not scenarios:
        raise TuningError('scenarios: at least one scenario is needed')
    if evaluations is None:
        evaluations = EVALUATIONS_PER_FREE * len(set(free))
    if evaluations < 4:
        raise TuningError(f'evaluations: at least 4 are needed, got {evaluations!r}')
    for scenario in scenarios:
        controller_config(scenario, start)  # a mission that does not fit fails here
    weights = weights or CostWeights()
    free = tuple(dict.fromkeys(free))
    qmc = optional_module('scipy.stats.qmc')
    optimize = scipy_optimize()
    began = time.perf_counter()
    ev = _Evaluator(scenarios, start, free, weights, jobs, evaluations, progress)
    try:
        start_values = {n: _value(start, n) for n in free}
        x0 = _to_unit(start_values, free)
        start_values = _from_unit(x0, free) if _outside(start_values) else start_values
        # a power of two (Sobol balance), about 8 per free value, at most a third of the budget
        n_sobol = 2 ** int(math.floor(math.log2(min(8 * len(free), evaluations // 3))))
        sample = qmc.Sobol(d=len(free), scramble=True, seed=seed).random(n_sobol) \
            if n_sobol > 0 else np.zeros((0, len(free)))
        batch = [start_values] + [_from_unit(x, free) for x in sample]
        first = ev.evaluate(batch)
        start_eval = first[0]
        best = min(first, key=lambda e: e.cost)

        def objective(x: np.ndarray) -> float:
            if ev.evaluations >= ev.budget:
                return ev.cache.get(ev.key(_from_unit(x, free)), best).cost
            return ev.evaluate([_from_unit(x, free)])[0].cost

        remaining = evaluations - ev.evaluations
        if remaining > 0:
            xb = _to_unit(best.values, free)
            simplex = [xb]
            for i in range(len(free)):
                step = np.zeros(len(free))
                step[i] = 0.08 if xb[i] <= 0.92 else -0.08
                simplex.append(xb + step)
            optimize.minimize(objective, xb, method='Nelder-Mead',
                              bounds=[(0.0, 1.0)] * len(free),
                              options={'maxfev': remaining, 'initial_simplex': np.array(simplex),
                                       'xatol': 1e-3, 'fatol': 1e-7})
        best = min(ev.cache.values(), key=lambda e: (e.cost, ev.key(e.values)))
        if not best.feasible:
            raise TuningError(
                f'no candidate meets the margin floors over these scenarios; the closest: '
                f'{best.reason}')
        changes = {PARAM_NAMES[n]: float(best.values[n]) for n in free}
        tuned = start.replaced(changes)
        return TuneResult(start_eval, best, tuned, ev.evaluations, ev.simulations,
                          time.perf_counter() - began, tuple(ev.history))
    finally:
        ev.close()


def _value(config: Config, name: str) -> float:
    if name == 'lookahead':
        return float(config.lookahead)
    return float(getattr(config.gains, name))


def _outside(values: Mapping[str, float]) -> bool:
    return any(not (BOUNDS[n][0] <= v <= BOUNDS[n][1]) for n, v in values.items())


def evaluate_candidates(scenarios: Sequence[Scenario], start: Config, free: Sequence[str],
                        candidates: Sequence[Mapping[str, float]], jobs: int = 1,
                        weights: CostWeights | None = None) -> list[Evaluation]:
    """Return the evaluation (floors first, then cost) of each candidate, in order."""
    ev = _Evaluator(scenarios, start, tuple(free), weights or CostWeights(), jobs,
                    len(candidates), None)
    try:
        return ev.evaluate(candidates)
    finally:
        ev.close()


def evaluate_config(scenarios: Sequence[Scenario], config: Config,
                    weights: CostWeights | None = None) -> tuple[float, list[ScenarioScore]]:
    """Return (total cost, per-scenario scores) of ``config`` run in this process."""
    weights = weights or CostWeights()
    scores = [scenario_score(simulate(s, config), weights) for s in scenarios]
    return float(sum(s.cost for s in scores)), scores


def margins_at(config: Config, speeds: Iterable[float]) -> list[tuple[float, Margins]]:
    """Return the margins of ``config``'s loop at each speed [m/s] (gains as in force)."""
    return [(v, model_margins(LoopModel.from_config(config, v))) for v in speeds
            if v >= MIN_SPEED]


def default_jobs() -> int:
    """Return the number of worker processes to use by default (the usable cores)."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # pragma: no cover - not on Linux
        return max(1, os.cpu_count() or 1)
