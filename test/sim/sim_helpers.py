# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""A small cart scenario and keyword-built configs shared by the simulator tests."""

from __future__ import annotations

import copy
from typing import Any

from corridor_pid.core.config import Config, config_from_params
from corridor_pid.sim.scenario import Scenario, scenario_from_mapping

CART: dict[str, Any] = {
    'vehicle': {'wheelbase': 0.9, 'steer_time_constant': 0.1, 'steer_delay': 0.05,
                'speed_time_constant': 0.2},
    'steering': {'max_angle': 0.5, 'max_rate': 1.0},
    'corridor_width': 2.4, 'start': {'y': 0.3},
    'speed': 1.0, 'duration': 20.0, 'pose_rate': 50.0,
}
"""An invented delivery cart on a straight 2.4 m corridor, 0.3 m left of centre."""


def scenario(**changes: Any) -> Scenario:
    """Return CART with changes; '__' spells a section ('vehicle__steer_delay')."""
    data = copy.deepcopy(CART)
    for name, value in changes.items():
        *parents, leaf = name.split('__')
        node = data
        for part in parents:
            node = node.setdefault(part, {})
        if value is None:
            node.pop(leaf, None)
        else:
            node[leaf] = value
    return scenario_from_mapping(data)


def params(**changes: Any) -> Config:
    """Return a controller config from keyword changes, '__' for '.'."""
    return config_from_params({k.replace('__', '.'): v for k, v in changes.items()})
