# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Error types, one per failure domain; messages name the offending key and value."""

from __future__ import annotations


class CorridorPidError(Exception):
    """Base class of every error corridor_pid raises for a user mistake or bad input."""


class ConfigError(CorridorPidError, ValueError):
    """A parameter (params file, live set or CLI value) is invalid."""


class ScenarioError(CorridorPidError, ValueError):
    """A scenario file is invalid."""


class ReplayError(CorridorPidError):
    """A bag cannot be replayed (missing topic, unknown type, corrupt file, ...)."""


class TuningError(CorridorPidError):
    """A tuning or margin computation cannot be carried out."""


class DemoError(CorridorPidError):
    """The demo cannot run (a child process exited, discovery timed out, bad output folder)."""


class MissingExtraError(CorridorPidError):
    """An optional dependency of an offline tool is not installed."""

    def __init__(self, module: str, extra: str) -> None:
        """Name the missing module and the pip extra that brings it."""
        super().__init__(
            f'{module!r} is not installed; install the offline tools with '
            f"`pip install 'corridor_pid[{extra}]'` (or run `make venv`)")
        self.module = module
        self.extra = extra
