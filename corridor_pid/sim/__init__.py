# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Offline closed loop: vehicle, actuator and sensor models, scenarios and run metrics."""

from __future__ import annotations

from corridor_pid.sim.loop import controller_config, SimResult, simulate
from corridor_pid.sim.metrics import Metrics, metrics_from
from corridor_pid.sim.scenario import load_scenario, Scenario, scenario_from_mapping

__all__ = [
    'Metrics',
    'Scenario',
    'SimResult',
    'controller_config',
    'load_scenario',
    'metrics_from',
    'scenario_from_mapping',
    'simulate',
]
