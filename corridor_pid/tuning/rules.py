# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Ultimate-gain tuning tables: Ku [controller units], Pu [s] to Kp, Ti [s], Td [s].

Tables (ideal/parallel PID ``u = Kp (e + 1/Ti int e dt + Td de/dt)``):

=====================  =========  ==========  =========
rule, controller       Kp / Ku    Ti / Pu     Td / Pu
=====================  =========  ==========  =========
Ziegler-Nichols P      0.5        --          --
Ziegler-Nichols PI     0.45       1 / 1.2     --
Ziegler-Nichols PID    0.6        0.5         0.125
Tyreus-Luyben PI       1 / 3.2    2.2         --
Tyreus-Luyben PID      1 / 2.2    2.2         1 / 6.3
=====================  =========  ==========  =========

Sources: Ziegler & Nichols, "Optimum settings for automatic controllers", Trans. ASME 64
(1942), ultimate-sensitivity method; Tyreus & Luyben, "Tuning PI controllers for
integrator/dead time processes", Ind. Eng. Chem. Res. 31 (1992). The factors are written
from memory of the published tables as they are reproduced in Åström & Hägglund,
*Advanced PID Control* (ISA, 2006); the tests pin them.

Mapped to this project's parallel gains: ``kp = Kp``, ``ki = Kp / Ti``, ``kd = Kp * Td``.
"""

from __future__ import annotations

import math
from typing import NamedTuple

from corridor_pid.core.errors import TuningError

__all__ = ['RULES', 'RuleGains', 'rule_gains', 'rule_table']


class RuleRow(NamedTuple):
    """One table row: Kp/Ku, Ti/Pu (None = no integral), Td/Pu (None = no derivative)."""

    kp_per_ku: float
    ti_per_pu: float | None
    td_per_pu: float | None


#: (rule, controller) -> row. Values from memory of the published tables (see module doc).
RULES: dict[tuple[str, str], RuleRow] = {
    ('ziegler-nichols', 'P'): RuleRow(0.5, None, None),
    ('ziegler-nichols', 'PI'): RuleRow(0.45, 1.0 / 1.2, None),
    ('ziegler-nichols', 'PID'): RuleRow(0.6, 0.5, 0.125),
    ('tyreus-luyben', 'PI'): RuleRow(1.0 / 3.2, 2.2, None),
    ('tyreus-luyben', 'PID'): RuleRow(1.0 / 2.2, 2.2, 1.0 / 6.3),
}


class RuleGains(NamedTuple):
    """Gains from a tuning rule, in both the ideal and this project's parallel form.

    Attributes:
        rule: 'ziegler-nichols' or 'tyreus-luyben'.
        controller: 'P', 'PI' or 'PID'.
        big_kp: Kp [rad/m].
        ti: integral time Ti [s] (inf = no integral action).
        td: derivative time Td [s].
        kp: parallel proportional gain [rad/m].
        ki: parallel integral gain [rad/(m*s)].
        kd: parallel derivative gain [rad*s/m].

    """

    rule: str
    controller: str
    big_kp: float
    ti: float
    td: float
    kp: float
    ki: float
    kd: float


def rule_gains(rule: str, controller: str, ku: float, pu: float) -> RuleGains:
    """Return the gains of one table row for ultimate gain ``ku`` and period ``pu`` [s].

    Raises:
        TuningError: unknown rule/controller, or a non-positive ku or pu.

    """
    row = RULES.get((rule, controller))
    if row is None:
        known = ', '.join(f'{r} {c}' for r, c in RULES)
        raise TuningError(f'rule: no table row {rule!r} {controller!r} (known: {known})')
    for name, value in (('ku', ku), ('pu', pu)):
        if not (math.isfinite(value) and value > 0.0):
            raise TuningError(f'{name}: must be finite and > 0, got {value!r}')
    big_kp = row.kp_per_ku * ku
    ti = math.inf if row.ti_per_pu is None else row.ti_per_pu * pu
    td = 0.0 if row.td_per_pu is None else row.td_per_pu * pu
    ki = 0.0 if math.isinf(ti) else big_kp / ti
    return RuleGains(rule, controller, big_kp, ti, td, big_kp, ki, big_kp * td)


def rule_table(ku: float, pu: float) -> list[RuleGains]:
    """Return every table row for ``ku`` and ``pu`` [s], in table order."""
    return [rule_gains(rule, controller, ku, pu) for rule, controller in RULES]
