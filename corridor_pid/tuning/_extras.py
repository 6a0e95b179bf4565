# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Lazy imports of the offline tools' optional libraries, with a one-line error if absent."""

from __future__ import annotations

import importlib
from types import ModuleType

from corridor_pid.core.errors import MissingExtraError


def optional_module(name: str) -> ModuleType:
    """Return the imported module ``name``; MissingExtraError naming it when absent."""
    try:
        return importlib.import_module(name)
    except ModuleNotFoundError as err:
        raise MissingExtraError(name.split('.')[0], 'offline') from err


def scipy_linalg() -> ModuleType:
    """Return scipy.linalg (offline extra)."""
    return optional_module('scipy.linalg')


def scipy_optimize() -> ModuleType:
    """Return scipy.optimize (offline extra)."""
    return optional_module('scipy.optimize')
