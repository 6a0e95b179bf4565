# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""`corridor-pid check`: validation through the one validator, margins, verdict."""

from __future__ import annotations

import json
from pathlib import Path

import control
from corridor_pid.cli import main
from corridor_pid.core.paramsfile import write_params_file
import numpy as np
import pytest
from reference_gains import reference_config, REFERENCE_GAINS


def _params(tmp_path: Path, text: str) -> str:
    """Write the reference gains in a '/**' section and ``text`` in the node's own."""
    path = tmp_path / 'params.yaml'
    reference = ''.join(f'    {name}: {str(value).lower()}\n'
                        for name, value in REFERENCE_GAINS.items())
    path.write_text('/**:\n  ros__parameters:\n' + reference
                    + 'corridor_pid:\n  ros__parameters:\n' + text, encoding='utf-8')
    return str(path)


def _defaults(tmp_path: Path) -> str:
    path = tmp_path / 'defaults.yaml'
    write_params_file(path, reference_config())
    return str(path)


def test_defaults_pass_with_a_plain_verdict(tmp_path: Path,
                                            capsys: pytest.CaptureFixture[str]) -> None:
    """The defaults are valid and meet the floors: exit 0, margins and 'verdict: OK'."""
    assert main(['check', _defaults(tmp_path)]) == 0
    out, err = capsys.readouterr()
    assert err == ''
    assert 'linearised loop at cruise speed 1.00 m/s: stable' in out
    assert 'phase margin     59.6 deg' in out
    assert out.rstrip().endswith(
        'verdict: OK at cruise speed (stable, every margin at or above its floor)')


def test_json_margins_agree_with_python_control(tmp_path: Path,
                                                capsys: pytest.CaptureFixture[str]) -> None:
    """--json prints one object whose cruise margins match python-control to 1 %."""
    # Source: python-control `stability_margins` on the defaults' loop with pade(T, 6).
    assert main(['check', _defaults(tmp_path), '--json']) == 0
    report = json.loads(capsys.readouterr().out)
    s = control.tf('s')
    c = 0.6 + 0.25 * s / (0.05 * s + 1.0)
    plant = 1.0 * (1.0 * s + 1.0) / (0.9 * s * s) / (0.1 * s + 1.0)
    loop = c * plant * control.tf(*control.pade(0.05, 6))
    gm, pm, _, _, wc, _ = control.stability_margins(loop, returnall=True)
    margins = report['margins']
    assert report['ok'] is True and report['valid'] is True
    assert margins['phase_margin'] == pytest.approx(float(np.min(pm)), rel=0.01)
    assert margins['crossover_frequency'] == pytest.approx(float(wc[0]), rel=0.01)
    upper_db = 20 * np.log10(np.min(gm[gm > 1]))
    assert margins['gain_margin_upper'] == pytest.approx(upper_db, rel=0.01)
    assert margins['gain_margin_lower'] is None  # no integral: no lower limit
    assert [row['speed'] for row in report['speeds']] == [0.375, 0.75, 1.0, 1.125, 1.5]


def test_unstable_gains_fail_with_one_error_line(tmp_path: Path,
                                                 capsys: pytest.CaptureFixture[str]) -> None:
    """Gains the live guard would reject: report on stdout, one ERROR line, exit 1."""
    path = _params(tmp_path, '    gains: {ki: 2.0}\n')
    assert main(['check', path]) == 1
    out, err = capsys.readouterr()
    assert 'verdict: NOT OK: unstable at 1.00 m/s' in out
    assert err.count('\n') == 1 and err.startswith(f'ERROR: {path}: gains fail at cruise')


def test_scheduled_file_cautions_about_fast_speeds(tmp_path: Path,
                                                   capsys: pytest.CaptureFixture[str]) -> None:
    """OK at cruise but below the floor at speed.max: exit 0 with a caution line."""
    path = _params(tmp_path, '    gains: {ki: 0.1, reference_speed: 1.0}\n'
                             '    speed: {cruise: 1.0, max: 2.0}\n')
    assert main(['check', path]) == 0
    out = capsys.readouterr().out
    assert 'caution: below the margin floor at 2.00 m/s: phase margin 40.9 deg' in out


@pytest.mark.parametrize(('text', 'message'), [
    ('    gains: {kp: 1}\n', 'gains.kp: expected a floating-point number, got the integer 1 '
                            '(write 1.0)'),
    ('    gains: {kq: 1.0}\n', "gains.kq: unknown parameter (did you mean 'gains.kp'?)"),
    ('    speed: {cruise: 3.0}\n', 'speed.cruise: 3.0 exceeds speed.max 1.5'),
])
def test_bad_files_give_one_line_naming_key_and_value(
        tmp_path: Path, capsys: pytest.CaptureFixture[str], text: str, message: str) -> None:
    """Invalid input: exit 1, nothing on stdout, one ERROR line with the key and value."""
    path = _params(tmp_path, text)
    assert main(['check', path]) == 1
    out, err = capsys.readouterr()
    assert out == ''
    assert err == f'ERROR: {path}: {message}\n'


def test_missing_file_is_one_line(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    """A path that does not exist: one ERROR line naming it."""
    missing = str(tmp_path / 'nope.yaml')
    assert main(['check', missing]) == 1
    err = capsys.readouterr().err
    assert err.startswith(f'ERROR: {missing}: cannot read params file') and err.count('\n') == 1
