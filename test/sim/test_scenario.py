# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Scenario files: the schema, defaults and one-line errors naming key and value."""

from __future__ import annotations

import copy
import math
from pathlib import Path
from typing import Any

from corridor_pid.core.errors import ScenarioError
from corridor_pid.sim.scenario import load_scenario, scenario_from_mapping
import pytest
import yaml

SCENARIO_DIR = Path(__file__).resolve().parents[2] / 'config' / 'scenarios'

MINIMAL: dict[str, Any] = {
    'vehicle': {'wheelbase': 0.9, 'steer_time_constant': 0.1, 'steer_delay': 0.05},
    'steering': {'max_angle': 0.5, 'max_rate': 1.0},
    'speed': 1.0, 'duration': 20.0, 'pose_rate': 50.0,
}


def _with(path: str, value: object) -> dict[str, Any]:
    data = copy.deepcopy(MINIMAL)
    *parents, leaf = path.split('.')
    node = data
    for part in parents:
        node = node.setdefault(part, {})
    node[leaf] = value
    return data


def test_minimal_scenario_takes_the_documented_defaults() -> None:
    """Only the plant essentials are required; the rest defaults as documented."""
    scenario = scenario_from_mapping(MINIMAL, 'minimal')
    assert scenario.course_points == ()
    assert scenario.corridor_width is None
    assert (scenario.start.x, scenario.start.y, scenario.start.heading) == (0.0, 0.0, 0.0)
    assert scenario.pose_noise.position == 0.0 and scenario.pose_noise.seed == 0
    assert scenario.pose_delay == 0.0 and scenario.dropouts == ()
    assert scenario.vehicle.speed_time_constant == 0.25
    assert scenario.name == 'minimal'


def test_full_scenario_in_nested_and_dotted_spelling() -> None:
    """Nested sections and dotted keys read the same."""
    nested = _with('course.points', [[0, 0], [10.0, 0.0], [20.0, 1.5]])
    nested.update({'corridor_width': 2.4, 'start': {'y': 0.4, 'heading': -0.1},
                   'pose_noise': {'position': 0.02, 'heading': 0.01, 'seed': 4},
                   'pose_delay': 0.03, 'dropouts': [[5, 6.5]]})
    dotted = {'vehicle.wheelbase': 0.9, 'vehicle.steer_time_constant': 0.1,
              'vehicle.steer_delay': 0.05, 'steering.max_angle': 0.5,
              'steering.max_rate': 1.0, 'speed': 1.0, 'duration': 20.0, 'pose_rate': 50.0,
              'course.points': [[0, 0], [10.0, 0.0], [20.0, 1.5]], 'corridor_width': 2.4,
              'start.y': 0.4, 'start.heading': -0.1, 'pose_noise.position': 0.02,
              'pose_noise.heading': 0.01, 'pose_noise.seed': 4, 'pose_delay': 0.03,
              'dropouts': [[5, 6.5]]}
    a, b = scenario_from_mapping(nested), scenario_from_mapping(dotted)
    assert a == b
    assert a.course_points == ((0.0, 0.0), (10.0, 0.0), (20.0, 1.5))
    assert a.course_flat() == (0.0, 0.0, 10.0, 0.0, 20.0, 1.5)
    assert a.dropouts == ((5.0, 6.5),)


@pytest.mark.parametrize('data, match', [
    ({k: v for k, v in MINIMAL.items() if k != 'pose_rate'}, r'^pose_rate: missing'),
    (_with('vehicle.wheelbase', -0.9), r'^vehicle\.wheelbase: must be > 0, got -0\.9$'),
    (_with('vehicle.wheelbase', 0.0), r'vehicle\.wheelbase: must be > 0, got 0\.0'),
    (_with('speed', math.nan), r'^speed: must be finite, got nan$'),
    (_with('pose_noise.position', math.inf), r'pose_noise\.position: must be finite'),
    (_with('vehicle.wheelbsae', 0.9), r'vehicle\.wheelbsae: unknown scenario key \(did you '
                                      r"mean 'vehicle\.wheelbase'\?\)"),
    (_with('colour', 'red'), r'^colour: unknown scenario key$'),
    (_with('duration', 'long'), r"^duration: expected a number, got 'long'$"),
    (_with('duration', True), r'duration: expected a number, got True'),
    (_with('dropouts', [[3.0, 2.0]]), r'dropouts\[0\]: end must be after start, got '
                                      r'\[3\.0, 2\.0\]'),
    (_with('dropouts', [[-1.0, 2.0]]), r'dropouts\[0\]: start must be >= 0'),
    (_with('dropouts', [[1.0]]), r'dropouts\[0\]: expected a pair \[a, b\], got \[1\.0\]'),
    (_with('dropouts', [[1.0, math.nan]]), r'dropouts\[0\]: must be finite, got nan'),
    (_with('dropouts', [[30.0, 31.0]]), r'dropouts: window \[30\.0, 31\.0\] starts after '),
    (_with('dropouts', 5.0), r'dropouts: expected a list of pairs'),
    (_with('course.points', [[0.0, 0.0]]), r'course\.points: needs at least 2 points'),
    (_with('course.points', [[0.0, 0.0], [0.0, 0.0]]), r'course\.points\[1\]: coincides'),
    (_with('course.points', [0.0, 0.0, 1.0, 0.0]), r'course\.points\[0\]: expected a pair'),
    (_with('pose_noise.seed', 1.5), r'pose_noise\.seed: expected an integer, got 1\.5'),
    (_with('steering.max_angle', 2.0), r'steering\.max_angle: must be <= 1\.5, got 2\.0'),
    (_with('start.heading', 4.0), r'start\.heading: must be <= 3\.14159'),
    ([1, 2], r'expected a mapping of scenario keys'),
])
def test_bad_scenarios_give_one_line_errors(data: object, match: str) -> None:
    """Each problem raises ScenarioError on one line naming the key and the value."""
    with pytest.raises(ScenarioError, match=match) as info:
        scenario_from_mapping(data)
    assert '\n' not in str(info.value)


def test_load_scenario_prefixes_the_path(tmp_path: Path) -> None:
    """Errors from a file name the file; YAML syntax errors give the line."""
    bad = tmp_path / 'bad.yaml'
    bad.write_text(yaml.safe_dump(_with('vehicle.wheelbase', -1.0)))
    with pytest.raises(ScenarioError, match=rf'^{bad}: vehicle\.wheelbase: must be > 0'):
        load_scenario(bad)
    broken = tmp_path / 'broken.yaml'
    broken.write_text('vehicle: {wheelbase: 0.9\nspeed: [\n')
    with pytest.raises(ScenarioError, match=r'broken\.yaml: not valid YAML at line \d+$'):
        load_scenario(broken)
    with pytest.raises(ScenarioError, match=r'missing\.yaml: cannot read scenario file'):
        load_scenario(tmp_path / 'missing.yaml')


def test_every_shipped_scenario_loads() -> None:
    """The scenario library validates, each file with a description."""
    files = sorted(SCENARIO_DIR.glob('*.yaml'))
    assert len(files) >= 5
    for path in files:
        scenario = load_scenario(path)
        assert scenario.description
        assert scenario.corridor_width is not None
