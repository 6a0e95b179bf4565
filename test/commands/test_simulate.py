# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""``corridor-pid simulate``: text, JSON, CSV and plot outputs; one-line errors."""

from __future__ import annotations

import argparse
import csv
import json
import math
from pathlib import Path
import re
import sys
from typing import Any

from corridor_pid.cli import main
from corridor_pid.commands.simulate import run
from corridor_pid.sim.export import CSV_HEADER
from corridor_pid.sim.metrics import METRIC_UNITS
import pytest
import yaml

SCENARIOS = Path(__file__).resolve().parents[2] / 'config' / 'scenarios'
DEMO = SCENARIOS / 'hospital_corridor_bay_exit.yaml'

SMALL: dict[str, Any] = {
    'description': 'short straight test corridor',
    'vehicle': {'wheelbase': 0.9, 'steer_time_constant': 0.1, 'steer_delay': 0.05},
    'steering': {'max_angle': 0.5, 'max_rate': 1.0},
    'corridor_width': 2.4, 'start': {'y': 0.3},
    'speed': 1.0, 'duration': 8.0, 'pose_rate': 50.0,
}


def _args(scenario: Path, **options: Any) -> argparse.Namespace:
    base = {'scenario': str(scenario), 'params': None, 'json': False, 'plot': None,
            'csv': None}
    base.update(options)
    return argparse.Namespace(**base)


def _write(path: Path, data: object) -> Path:
    path.write_text(yaml.safe_dump(data), encoding='utf-8')
    return path


def test_text_summary_lists_every_metric_with_its_unit(capsys: pytest.CaptureFixture[str]
                                                       ) -> None:
    """The readable summary names the scenario and every metric, lengths in metres."""
    assert run(_args(DEMO)) == 0
    out = capsys.readouterr().out
    assert 'hospital_corridor_bay_exit' in out
    for name in METRIC_UNITS:
        assert name in out
    line = next(row for row in out.splitlines() if row.startswith('rms_lateral_error'))
    assert line.endswith(' m')
    assert 'mean_speed' in out and 'm/s' in out


def test_json_is_one_object_with_the_contract_keys(capsys: pytest.CaptureFixture[str]
                                                   ) -> None:
    """--json prints one JSON object with every section 5 key; the run is deterministic."""
    assert run(_args(DEMO, json=True)) == 0
    first = capsys.readouterr().out
    data = json.loads(first)
    assert set(METRIC_UNITS) <= set(data)
    assert isinstance(data['diverged'], bool)
    assert isinstance(data['watchdog_stops'], int)
    assert data['scenario'] == 'hospital_corridor_bay_exit'
    assert run(_args(DEMO, json=True)) == 0
    assert capsys.readouterr().out == first


def test_csv_and_plot_are_written(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    """--csv writes the documented header and a row per pose slot; --plot a PNG."""
    scenario = _write(tmp_path / 'small.yaml', SMALL)
    trace_file, png = tmp_path / 'run.csv', tmp_path / 'run.png'
    assert run(_args(scenario, csv=str(trace_file), plot=str(png))) == 0
    assert 'wrote trajectory' in capsys.readouterr().out
    with open(trace_file, newline='', encoding='utf-8') as handle:
        rows = list(csv.reader(handle))
    assert tuple(rows[0]) == CSV_HEADER
    # A first row at t = 0, then 50 Hz poses arriving at 0.0 .. 7.98 s (t = 8.0 too).
    assert len(rows) - 1 == 1 + 401 - 1
    assert rows[-1][CSV_HEADER.index('state')] == 'tracking'
    assert float(rows[-1][0]) == pytest.approx(8.0)
    assert png.read_bytes()[:8] == b'\x89PNG\r\n\x1a\n'


def test_params_file_sets_the_controller(tmp_path: Path, capsys: pytest.CaptureFixture[str]
                                         ) -> None:
    """A params file changes the gains the run uses (a weak kp settles later)."""
    scenario = _write(tmp_path / 'small.yaml', SMALL)
    weak = _write(tmp_path / 'weak.yaml', {'corridor_pid': {'ros__parameters': {
        'gains': {'kp': 0.1}}}})
    assert run(_args(scenario, json=True)) == 0
    default = json.loads(capsys.readouterr().out)
    assert run(_args(scenario, json=True, params=str(weak))) == 0
    soft = json.loads(capsys.readouterr().out)
    assert soft['params_file'] == str(weak)
    assert soft['rms_lateral_error'] > default['rms_lateral_error']


@pytest.mark.parametrize('change, message', [
    ({'vehicle': {'steer_time_constant': 0.1, 'steer_delay': 0.05}},
     r'vehicle\.wheelbase: missing'),
    ({'vehicle': {'wheelbase': -0.9, 'steer_time_constant': 0.1, 'steer_delay': 0.05}},
     r'vehicle\.wheelbase: must be > 0, got -0\.9'),
    ({'speed': math.nan}, r'speed: must be finite, got nan'),
    ({'wind': 3.0}, r'wind: unknown scenario key'),
    ({'dropouts': [[4.0, 3.0]]}, r'dropouts\[0\]: end must be after start'),
])
def test_bad_scenario_gives_one_error_line(tmp_path: Path, capsys: pytest.CaptureFixture[str],
                                           change: dict[str, Any], message: str) -> None:
    """A bad scenario file: exit 1, one ERROR line naming key and value, nothing written."""
    scenario = _write(tmp_path / 'bad.yaml', {**SMALL, **change})
    trace_file = tmp_path / 'run.csv'
    assert run(_args(scenario, csv=str(trace_file))) == 1
    captured = capsys.readouterr()
    assert captured.out == ''
    lines = captured.err.splitlines()
    assert len(lines) == 1 and lines[0].startswith('ERROR: ')
    assert str(scenario) in lines[0]
    assert re.search(message, lines[0])
    assert not trace_file.exists()


def test_bad_params_file_and_too_fast_mission(tmp_path: Path,
                                              capsys: pytest.CaptureFixture[str]) -> None:
    """Params errors and a cruise speed above speed.max are one-line errors too."""
    scenario = _write(tmp_path / 'small.yaml', SMALL)
    bad = _write(tmp_path / 'bad_params.yaml', {'corridor_pid': {'ros__parameters': {
        'gains': {'kp': 1}}}})
    assert run(_args(scenario, params=str(bad))) == 1
    err = capsys.readouterr().err.strip()
    assert err.startswith('ERROR: ') and 'gains.kp' in err and '\n' not in err
    slow = _write(tmp_path / 'slow.yaml', {'corridor_pid': {'ros__parameters': {
        'speed': {'max': 0.8, 'cruise': 0.5}}}})
    assert run(_args(scenario, params=str(slow))) == 1
    err = capsys.readouterr().err.strip()
    assert err.startswith('ERROR: speed.cruise: 1.0 exceeds speed.max 0.8 (')
    assert "scenario's speed" in err and '\n' not in err


def test_missing_output_folder_is_refused_before_running(
        tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    """An output in a folder that does not exist: one line, exit 1, nothing printed."""
    scenario = _write(tmp_path / 'small.yaml', SMALL)
    assert run(_args(scenario, csv=str(tmp_path / 'nowhere' / 'run.csv'))) == 1
    captured = capsys.readouterr()
    assert captured.out == ''
    assert captured.err.startswith("ERROR: --csv '") and 'does not exist' in captured.err


def test_missing_matplotlib_names_the_extra(tmp_path: Path, monkeypatch: pytest.MonkeyPatch,
                                            capsys: pytest.CaptureFixture[str]) -> None:
    """Without matplotlib, --plot fails in one line naming what to install; no CSV either."""
    monkeypatch.setitem(sys.modules, 'matplotlib', None)   # import matplotlib -> ImportError
    scenario = _write(tmp_path / 'small.yaml', SMALL)
    trace_file = tmp_path / 'run.csv'
    assert run(_args(scenario, plot=str(tmp_path / 'run.png'), csv=str(trace_file))) == 1
    err = capsys.readouterr().err.strip()
    assert err.startswith("ERROR: 'matplotlib' is not installed") and 'offline' in err
    assert not trace_file.exists()


def test_cli_dispatches_to_simulate(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    """``corridor-pid simulate`` parses its options and runs this command."""
    scenario = _write(tmp_path / 'small.yaml', SMALL)
    assert main(['simulate', str(scenario), '--json']) == 0
    assert 'rms_lateral_error' in json.loads(capsys.readouterr().out)
    assert main(['simulate', str(tmp_path / 'absent.yaml')]) == 1
    assert 'cannot read scenario file' in capsys.readouterr().err
