# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Bad input at start: one ``ERROR:`` line naming the key and value, non-zero exit.

The node process is run for real (``python -m corridor_pid.ros.node`` and the
``corridor-pid node`` verb); these runs end before any DDS traffic.
"""

from __future__ import annotations

from pathlib import Path
import subprocess
import sys

import pytest
from ros_helpers import node_env, REPO

NODE = [sys.executable, '-m', 'corridor_pid.ros.node']


def run(args: list[str], cwd: Path) -> subprocess.CompletedProcess[str]:
    """Run a command with this run's environment; return its result."""
    return subprocess.run(args, cwd=cwd, env=node_env(), capture_output=True, text=True,
                          timeout=120, stdin=subprocess.DEVNULL, start_new_session=True)


def write(path: Path, text: str) -> Path:
    """Write ``text`` to ``path``; return the path."""
    path.write_text(text, encoding='utf-8')
    return path


def one_error_line(result: subprocess.CompletedProcess[str]) -> str:
    """Return the single stderr line, checking there is exactly one and no traceback."""
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1, result.stderr
    assert lines[0].startswith('ERROR: ')
    assert 'Traceback' not in result.stdout + result.stderr
    return lines[0]


SECTION = 'corridor_pid:\n  ros__parameters:\n'


@pytest.mark.parametrize(('body', 'expected'), [
    ('    gains: {kp: [1.0,\n', 'not valid YAML'),
    ('    gains:\n      kp: -1.0\n', 'gains.kp'),
    ('    gains:\n      kd: 1\n', 'write 1.0'),
    ('    gains:\n      kpp: 0.5\n', "did you mean 'gains.kp'"),
    ('    speed:\n      cruise: 2.0\n', 'speed.max'),
    ('    watchdog:\n      timeout: .nan\n', 'watchdog.timeout'),
    ('    integral:\n      method: sometimes\n', 'integral.method'),
    ('    course:\n      points: [0.0, 0.0, 1.0]\n', 'course.points'),
])
def test_malformed_params_file_gives_one_line_and_exit_1(
        tmp_path: Path, body: str, expected: str) -> None:
    """A bad params file: one line naming the file and the key, exit code 1."""
    bad = write(tmp_path / 'bad.yaml', SECTION + body)
    result = run(NODE + ['--ros-args', '--params-file', str(bad)], tmp_path)
    assert result.returncode == 1
    line = one_error_line(result)
    assert expected in line and str(bad) in line


def test_missing_params_file(tmp_path: Path) -> None:
    """A params file that does not exist: one line, exit code 1."""
    result = run(NODE + ['--ros-args', '--params-file', str(tmp_path / 'none.yaml')], tmp_path)
    assert result.returncode == 1
    assert 'none.yaml' in one_error_line(result)


def test_bad_command_line_parameter(tmp_path: Path) -> None:
    """-p gains.kp:=-2.0 is refused like a file value: one line naming it, exit code 1."""
    result = run(NODE + ['--ros-args', '-p', 'gains.kp:=-2.0'], tmp_path)
    assert result.returncode == 1
    assert 'gains.kp' in one_error_line(result)


def test_ackermann_output_without_its_message_package(tmp_path: Path) -> None:
    """output_type: ackermann where ackermann_msgs is not installed: one clear line, exit 1."""
    with pytest.raises(ImportError):   # absent here by design (DESIGN §7)
        import ackermann_msgs  # noqa: F401
    params = write(tmp_path / 'ack.yaml', SECTION + "    output_type: 'ackermann'\n")
    result = run(NODE + ['--ros-args', '--params-file', str(params)], tmp_path)
    assert result.returncode == 1
    line = one_error_line(result)
    assert 'ackermann_msgs' in line and 'not installed' in line


def test_cli_node_verb_gives_the_same_line(tmp_path: Path) -> None:
    """``corridor-pid node`` reports a bad params file with the node's one line."""
    bad = write(tmp_path / 'bad.yaml', SECTION + '    gains:\n      kp: -1.0\n')
    result = run([sys.executable, '-m', 'corridor_pid', 'node', '--ros-args',
                  '--params-file', str(bad)], REPO)
    assert result.returncode == 1
    assert 'gains.kp' in one_error_line(result)


def test_help_carries_the_safety_cautions(tmp_path: Path) -> None:
    """--help: usage with the safety cautions, exit code 0."""
    result = run(NODE + ['--help'], tmp_path)
    assert result.returncode == 0
    text = ' '.join(result.stdout.split())
    assert 'emergency stop' in text and 'not a safety-rated' in text


def test_unknown_argument_is_a_usage_error(tmp_path: Path) -> None:
    """A plain argument the node does not know: one line, exit code 2."""
    result = run(NODE + ['--gains'], tmp_path)
    assert result.returncode == 2
    assert '--gains' in one_error_line(result)
