# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""``corridor-pid demo`` on bad input, and the progress display (no DDS: nothing starts)."""

from __future__ import annotations

import io
from pathlib import Path

from corridor_pid.cli import main
from corridor_pid.demo.progress import Progress
import pytest


def one_error_line(capsys: pytest.CaptureFixture[str]) -> str:
    """Return the single ERROR line the command printed on stderr."""
    lines = capsys.readouterr().err.strip().splitlines()
    assert len(lines) == 1, lines
    assert lines[0].startswith('ERROR: ')
    return lines[0]


def test_too_short_a_run_is_one_line_and_writes_nothing(
        tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    """--duration below the script's need: exit 1, one line naming it, no output folder."""
    out = tmp_path / 'out'
    assert main(['demo', '--fast', '--duration', '5', '--out', str(out)]) == 1
    assert '--duration' in one_error_line(capsys)
    assert not out.exists()


def test_missing_scenario_is_one_line(tmp_path: Path,
                                      capsys: pytest.CaptureFixture[str]) -> None:
    """A scenario file that does not exist: exit 1, its path in the one line."""
    missing = tmp_path / 'nowhere.yaml'
    assert main(['demo', '--scenario', str(missing), '--out', str(tmp_path / 'o')]) == 1
    assert 'nowhere.yaml' in one_error_line(capsys)


def test_output_path_that_is_a_file_is_one_line(tmp_path: Path,
                                                capsys: pytest.CaptureFixture[str]) -> None:
    """--out naming a file: exit 1 and the file is left as it was."""
    target = tmp_path / 'taken'
    target.write_text('keep me', encoding='utf-8')
    assert main(['demo', '--fast', '--out', str(target)]) == 1
    assert '--out' in one_error_line(capsys)
    assert target.read_text(encoding='utf-8') == 'keep me'


def test_bad_duration_is_a_usage_error(capsys: pytest.CaptureFixture[str]) -> None:
    """A duration that is not a positive number is a usage error (exit 2)."""
    assert main(['demo', '--duration', '-3']) == 2
    assert '--duration' in capsys.readouterr().err


def test_help_carries_the_safety_cautions(capsys: pytest.CaptureFixture[str]) -> None:
    """Demo --help shows the paces and the cautions about real vehicles."""
    assert main(['demo', '--help']) == 0
    text = capsys.readouterr().out
    assert '--fast' in text and '--realtime' in text
    assert 'emergency stop' in text and 'not a safety-rated function' in text


def test_progress_off_a_terminal_prints_events_only() -> None:
    """Into a pipe: no refreshed line, each event on a line of its own."""
    stream = io.StringIO()
    progress = Progress(20.0, stream)
    assert not progress.live
    progress.update(3.0, 0.12, 'tracking', force=True)
    progress.note('  3.00 s  something happened')
    progress.close()
    assert stream.getvalue() == '  3.00 s  something happened\n'


def test_progress_line_on_a_terminal_shows_time_offset_and_state() -> None:
    """Live: the line holds elapsed/total simulated time, the offset and the state."""
    stream = io.StringIO()
    progress = Progress(20.0, stream, live=True)
    progress.update(7.5, -0.034, 'stopped', force=True)
    text = stream.getvalue()
    progress.close()
    assert '7.5/20.0 s' in text and 'y -0.034 m' in text and 'stopped' in text
