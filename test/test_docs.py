# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""README stays true: its generated parts match the code they come from."""

from __future__ import annotations

from pathlib import Path

from corridor_pid.core.params import markdown_table

ROOT = Path(__file__).resolve().parents[1]


def test_readme_parameter_table_matches_the_parameter_table() -> None:
    """The README's parameter table is the one generated from core/params.py."""
    readme = (ROOT / 'README.md').read_text(encoding='utf-8')
    assert markdown_table() in readme


def test_readme_gives_the_two_commands_and_the_cautions() -> None:
    """The two commands and the safety cautions are in README."""
    readme = (ROOT / 'README.md').read_text(encoding='utf-8')
    assert 'make demo' in readme and 'make test' in readme
    for phrase in ('emergency stop', 'not a safety-rated function', 'local regulations'):
        assert phrase in readme.replace('\n', ' ')
