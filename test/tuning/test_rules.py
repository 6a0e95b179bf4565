# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Ultimate-gain rule tables: Ziegler-Nichols (1942) and Tyreus-Luyben (1992)."""

from __future__ import annotations

import math

from corridor_pid.core.errors import TuningError
from corridor_pid.tuning.rules import rule_gains, rule_table, RULES
import pytest

KU, PU = 10.0, 2.0

# Expected (Kp, Ti, Td) for Ku = 10, Pu = 2 s, written out by hand from the published
# tables. Sources: Ziegler & Nichols, Trans. ASME 64 (1942), ultimate-sensitivity table:
# P 0.5 Ku; PI 0.45 Ku, Pu/1.2; PID 0.6 Ku, Pu/2, Pu/8. Tyreus & Luyben, Ind. Eng. Chem.
# Res. 31 (1992): PI Ku/3.2, 2.2 Pu; PID Ku/2.2, 2.2 Pu, Pu/6.3. All from memory of the
# tables as reproduced in Åström & Hägglund, Advanced PID Control (ISA, 2006).
EXPECTED = {
    ('ziegler-nichols', 'P'): (5.0, math.inf, 0.0),
    ('ziegler-nichols', 'PI'): (4.5, 2.0 / 1.2, 0.0),
    ('ziegler-nichols', 'PID'): (6.0, 1.0, 0.25),
    ('tyreus-luyben', 'PI'): (10.0 / 3.2, 4.4, 0.0),
    ('tyreus-luyben', 'PID'): (10.0 / 2.2, 4.4, 2.0 / 6.3),
}


@pytest.mark.parametrize('key', sorted(EXPECTED))
def test_rule_rows_reproduce_the_published_tables(key: tuple[str, str]) -> None:
    """Kp, Ti, Td of each row equal the table's values for Ku = 10, Pu = 2 s."""
    # Source: see EXPECTED (Ziegler & Nichols 1942; Tyreus & Luyben 1992; from memory).
    g = rule_gains(key[0], key[1], KU, PU)
    kp, ti, td = EXPECTED[key]
    assert g.big_kp == pytest.approx(kp, rel=1e-12)
    assert g.ti == pytest.approx(ti, rel=1e-12)
    assert g.td == pytest.approx(td, rel=1e-12, abs=0.0)


@pytest.mark.parametrize('key', sorted(EXPECTED))
def test_mapping_to_parallel_gains(key: tuple[str, str]) -> None:
    """Kp = Kp, ki = Kp / Ti, kd = Kp * Td (the controller's parallel form)."""
    # Source: Åström & Hägglund, Advanced PID Control (2006): ideal to parallel form.
    g = rule_gains(key[0], key[1], KU, PU)
    kp, ti, td = EXPECTED[key]
    assert g.kp == pytest.approx(kp)
    assert g.ki == pytest.approx(0.0 if math.isinf(ti) else kp / ti)
    assert g.kd == pytest.approx(kp * td)


def test_zn_pid_on_the_analytic_cube_plant() -> None:
    """Ku = 8, Pu = 2 pi / sqrt(3): ZN PID gives Kp = 4.8, Ti = 1.814 s, Td = 0.4534 s."""
    # Source: Ziegler & Nichols 1942 table with the Routh values of 1/(s+1)^3.
    g = rule_gains('ziegler-nichols', 'PID', 8.0, 2 * math.pi / math.sqrt(3))
    assert (g.big_kp, g.ti, g.td) == pytest.approx((4.8, 1.8138, 0.45345), rel=1e-4)


def test_table_lists_every_row_in_order() -> None:
    """rule_table gives one entry per row, in the table's order."""
    rows = rule_table(KU, PU)
    assert [(g.rule, g.controller) for g in rows] == list(RULES)


@pytest.mark.parametrize(('rule', 'controller', 'ku', 'pu', 'match'), [
    ('ziegler-nichols', 'PD', 1.0, 1.0, "no table row 'ziegler-nichols' 'PD'"),
    ('tyreus-luyben', 'P', 1.0, 1.0, "no table row 'tyreus-luyben' 'P'"),
    ('ziegler-nichols', 'PI', 0.0, 1.0, 'ku: must be finite and > 0, got 0.0'),
    ('ziegler-nichols', 'PI', 1.0, math.nan, 'pu: must be finite and > 0, got nan'),
])
def test_bad_rule_input_names_the_value(rule: str, controller: str, ku: float, pu: float,
                                        match: str) -> None:
    """Unknown rows and non-positive Ku/Pu raise TuningError quoting the value."""
    with pytest.raises(TuningError, match=match):
        rule_gains(rule, controller, ku, pu)
