# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Linters as tests: ruff, mypy, the ROS ament flake8 and pep257 checks, licence headers."""

from __future__ import annotations

import os
from pathlib import Path
import subprocess
import sys

import numpy as np
import pytest

ROOT = Path(__file__).resolve().parents[1]
BIN = Path(sys.executable).parent

# File kinds that must open with the licence header (ament_copyright has no wheel, so this
# test stands in for it), and the header itself (STYLE.md).
HEADER_SUFFIXES = ('.py', '.yaml', '.yml', '.toml', '.cfg', '.txt', '.sh')
HEADER_NAMES = ('Makefile', 'run')
HEADER = ('SPDX-License-Identifier: Apache-2.0', 'Copyright 2026 corridor_pid contributors')


def run_tool(*command: str) -> subprocess.CompletedProcess[str]:
    """Run a lint tool from this venv at the repository root; return its result."""
    executable = BIN / command[0]
    assert executable.exists(), f'{command[0]} is not installed beside {sys.executable}'
    return subprocess.run([str(executable), *command[1:]], cwd=ROOT, capture_output=True,
                          text=True, timeout=600)


def test_ruff() -> None:
    """Ruff passes on the whole tree (rules in pyproject.toml)."""
    result = run_tool('ruff', 'check', '--no-cache', '.')
    assert result.returncode == 0, result.stdout + result.stderr


NUMPY_STUBS = tuple(int(part) for part in np.__version__.split('.')[:2])


@pytest.mark.skipif(NUMPY_STUBS < (2, 3), reason=(
    'numpy < 2.3 (the pin on Python 3.10) ships type stubs in which a bare np.ndarray lacks '
    'type arguments; mypy runs with the 3.11/3.12 pins, targeting Python 3.10'))
def test_mypy() -> None:
    """Mypy (strict, Python 3.10 target) passes on corridor_pid."""
    result = run_tool('mypy')
    assert result.returncode == 0, result.stdout + result.stderr


def test_ament_flake8() -> None:
    """ROS's ament_flake8, with its own configuration and plugin set, passes on the package."""
    result = run_tool('ament_flake8', 'corridor_pid', 'setup.py')
    assert result.returncode == 0, result.stdout + result.stderr


def test_ament_pep257() -> None:
    """ROS's ament_pep257 passes on the package, with the Google docstring convention.

    The project writes Google-style docstrings (STYLE.md). ament_pep257's own default
    convention wants the summary on the second line and numpy-style section underlines,
    which Google style forbids, so the check runs with ``--convention google``, the same
    convention ruff applies.
    """
    result = run_tool('ament_pep257', 'corridor_pid', 'setup.py', '--convention', 'google')
    assert result.returncode == 0, result.stdout + result.stderr


def project_files() -> list[Path]:
    """Return the repository's files (tracked, plus new ones git does not ignore)."""
    listing = subprocess.run(
        ['git', 'ls-files', '--cached', '--others', '--exclude-standard', '-z'],
        cwd=ROOT, capture_output=True, text=True, timeout=120)
    assert listing.returncode == 0, listing.stderr
    return [ROOT / name for name in listing.stdout.split('\0')
            if name and (ROOT / name).is_file()]


def test_every_file_carries_the_licence_header() -> None:
    """Every source, config and script file opens with the SPDX licence header."""
    missing = []
    for path in project_files():
        if not (path.suffix in HEADER_SUFFIXES or path.name in HEADER_NAMES):
            continue
        with path.open(encoding='utf-8') as handle:
            head = ''.join(handle.readline() for _ in range(4))
        if not all(line in head for line in HEADER):
            missing.append(str(path.relative_to(ROOT)))
    assert not missing, f'files without the licence header: {missing}'


def test_ci_script_is_executable() -> None:
    """.ci/run is executable, as CI starts it by path."""
    assert os.access(ROOT / '.ci' / 'run', os.X_OK)
