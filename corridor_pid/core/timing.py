# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Timing rules shared by the node, the simulator and the replay (s)."""

from __future__ import annotations

from corridor_pid.core.config import Config

__all__ = ['watchdog_period', 'watchdog_tick']


def watchdog_period(config: Config) -> float:
    """Return the watchdog timer period [s]: min(watchdog.timeout / 4, 1 / diagnostics.rate).

    A stale pose stream then stops the vehicle within ``watchdog.timeout`` plus this period.
    """
    return min(config.watchdog.timeout / 4.0, 1.0 / config.diagnostics.rate)


def watchdog_tick(config: Config) -> float:
    """Return the period [s] at which the node, the simulator and replay run the watchdog.

    Half of :func:`watchdog_period`: the stop then lands within ``watchdog.timeout`` plus
    half a period of the last accepted pose, which leaves half a period of slack for a
    timer that runs late on a busy computer before the documented bound (``timeout`` plus
    one period) is missed.
    """
    return 0.5 * watchdog_period(config)
