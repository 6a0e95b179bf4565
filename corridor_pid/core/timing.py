# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Timing rules shared by the node, the simulator and the replay (s)."""

from __future__ import annotations

from corridor_pid.core.config import Config

__all__ = ['watchdog_period']


def watchdog_period(config: Config) -> float:
    """Return the watchdog timer period [s]: min(watchdog.timeout / 4, 1 / diagnostics.rate).

    A stale pose stream then stops the vehicle within ``watchdog.timeout`` plus this period.
    """
    return min(config.watchdog.timeout / 4.0, 1.0 / config.diagnostics.rate)
