# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Relay experiment over a scenario set, then the rule tables, each row scored.

Each scenario's vehicle runs the relay in the closed-loop simulator
(:func:`corridor_pid.tuning.relay.simulated_vehicle_relay`). The most demanding one, the
smallest ultimate gain, is the basis of the Ziegler-Nichols and Tyreus-Luyben rows
(:mod:`corridor_pid.tuning.rules`); every row is then checked against the margin floors and
scored on the whole set like any optimiser candidate.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

from corridor_pid.core.config import Config
from corridor_pid.core.errors import TuningError
from corridor_pid.sim.scenario import Scenario
from corridor_pid.tuning.optimize import CostWeights, evaluate_candidates, Evaluation
from corridor_pid.tuning.relay import RelayResult, simulated_vehicle_relay
from corridor_pid.tuning.rules import rule_table, RuleGains

__all__ = ['RelayRules', 'relay_rules']


@dataclass(frozen=True)
class RelayRules:
    """Relay results per scenario, the rule rows from the basis scenario, and their scores.

    Attributes:
        relays: (scenario name, result or the reason it failed) per scenario.
        basis: name of the scenario whose Ku and Pu feed the tables ('' if none settled).
        rows: every table row with its evaluation.
        best: the feasible row of least cost, or None.

    """

    relays: tuple[tuple[str, RelayResult | str], ...]
    basis: str
    rows: tuple[tuple[RuleGains, Evaluation], ...]
    best: tuple[RuleGains, Evaluation] | None


def relay_rules(scenarios: Sequence[Scenario], start: Config, jobs: int = 1,
                weights: CostWeights | None = None) -> RelayRules:
    """Return the relay experiments on ``scenarios`` and the scored rule rows."""
    relays: list[tuple[str, RelayResult | str]] = []
    for scenario in scenarios:
        try:
            relays.append((scenario.name, simulated_vehicle_relay(scenario, start)))
        except TuningError as err:
            relays.append((scenario.name, str(err)))
    settled = [(name, r) for name, r in relays if isinstance(r, RelayResult)]
    if not settled:
        return RelayRules(tuple(relays), '', (), None)
    basis, result = min(settled, key=lambda item: item[1].ultimate_gain)
    table = rule_table(result.ultimate_gain, result.ultimate_period)
    candidates = [{'kp': g.kp, 'ki': g.ki, 'kd': g.kd} for g in table]
    evaluations = evaluate_candidates(scenarios, start, ('kp', 'ki', 'kd'), candidates, jobs,
                                      weights)
    rows = tuple(zip(table, evaluations))
    feasible = [row for row in rows if row[1].feasible]
    best = min(feasible, key=lambda row: row[1].cost) if feasible else None
    return RelayRules(tuple(relays), basis, rows, best)
