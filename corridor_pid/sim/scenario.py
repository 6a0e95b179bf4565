# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Scenario files: the simulated vehicle and world (the plant), validated.

A scenario is YAML in the params file's spelling (nested mappings or dotted keys)::

    description: free text (optional)
    vehicle: {wheelbase: 0.9, steer_time_constant: 0.1, steer_delay: 0.05,
              speed_time_constant: 0.25}        # m, s, s, s (the last one optional)
    steering: {max_angle: 0.5, max_rate: 1.0}   # rad, rad/s: the mechanical limits
    course: {points: [[0.0, 0.0], [20.0, 0.0], ...]}   # m; absent = straight along x
    corridor_width: 2.4                          # m, optional (no divergence test without)
    start: {x: 0.0, y: 0.4, heading: 0.2}        # m, m, rad; optional, default all 0
    speed: 1.0                                   # m/s, the mission's cruise speed
    duration: 40.0                               # s
    pose_rate: 50.0                              # Hz
    pose_noise: {position: 0.02, heading: 0.01, seed: 7}   # m, rad, -; optional, default 0
    pose_delay: 0.03                             # s, optional, default 0
    dropouts: [[12.0, 12.8]]                     # s, optional: sensor silent in [t0, t1)

Required: ``vehicle.wheelbase``, ``vehicle.steer_time_constant``, ``vehicle.steer_delay``,
``steering.max_angle``, ``steering.max_rate``, ``speed``, ``duration``, ``pose_rate``. Integers
are accepted where a number is meant (unlike the params file, no node reads this file). Any
problem raises :class:`ScenarioError` naming the key and quoting the value.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
import difflib
import math
from pathlib import Path
from typing import Any, NamedTuple, TypedDict

from corridor_pid.core.errors import ScenarioError
import yaml

__all__ = [
    'SCENARIO_KEYS',
    'PlantSteering',
    'PlantVehicle',
    'PoseNoise',
    'Scenario',
    'ScenarioYaml',
    'StartPose',
    'load_scenario',
    'scenario_from_mapping',
]


# -- the YAML shape ------------------------------------------------------------------------

class _VehicleRequired(TypedDict):
    wheelbase: float
    steer_time_constant: float
    steer_delay: float


class VehicleYaml(_VehicleRequired, total=False):
    """``vehicle`` section: wheelbase [m], time constants and dead time [s]."""

    speed_time_constant: float


class SteeringYaml(TypedDict):
    """``steering`` section: max_angle [rad], max_rate [rad/s]."""

    max_angle: float
    max_rate: float


class CourseYaml(TypedDict):
    """``course`` section: centreline vertices [[x, y], ...] [m]."""

    points: list[list[float]]


class StartYaml(TypedDict, total=False):
    """``start`` section: rear-axle x, y [m] and heading [rad] at t = 0."""

    x: float
    y: float
    heading: float


class PoseNoiseYaml(TypedDict, total=False):
    """``pose_noise`` section: position [m] and heading [rad] standard deviations, seed."""

    position: float
    heading: float
    seed: int


class _ScenarioRequired(TypedDict):
    vehicle: VehicleYaml
    steering: SteeringYaml
    speed: float
    duration: float
    pose_rate: float


class ScenarioYaml(_ScenarioRequired, total=False):
    """The whole scenario file (the keys of this class are optional)."""

    description: str
    course: CourseYaml
    corridor_width: float
    start: StartYaml
    pose_noise: PoseNoiseYaml
    pose_delay: float
    dropouts: list[list[float]]


# -- the validated value -------------------------------------------------------------------

@dataclass(frozen=True)
class PlantVehicle:
    """The real vehicle: wheelbase [m], actuator time constants and dead time [s]."""

    wheelbase: float
    steer_time_constant: float
    steer_delay: float
    speed_time_constant: float


@dataclass(frozen=True)
class PlantSteering:
    """The real steering limits: max_angle [rad], max_rate [rad/s]."""

    max_angle: float
    max_rate: float


@dataclass(frozen=True)
class StartPose:
    """Rear-axle pose at t = 0: x, y [m], heading [rad]."""

    x: float
    y: float
    heading: float


@dataclass(frozen=True)
class PoseNoise:
    """Pose sensor noise: position, heading standard deviations [m, rad] and the seed."""

    position: float
    heading: float
    seed: int


@dataclass(frozen=True)
class Scenario:
    """A validated scenario (see the module docstring for units and meaning)."""

    vehicle: PlantVehicle
    steering: PlantSteering
    course_points: tuple[tuple[float, float], ...]
    corridor_width: float | None
    start: StartPose
    speed: float
    duration: float
    pose_rate: float
    pose_noise: PoseNoise
    pose_delay: float
    dropouts: tuple[tuple[float, float], ...]
    description: str = ''
    name: str = ''

    def course_flat(self) -> tuple[float, ...]:
        """Return the course as the params file's flat [x0, y0, x1, y1, ...] (m)."""
        return tuple(c for point in self.course_points for c in point)


# -- the key table -------------------------------------------------------------------------

class ScenarioKey(NamedTuple):
    """One scenario key: kind ('number', 'integer', 'text', 'points', 'windows'), bounds."""

    name: str
    kind: str
    required: bool
    default: object
    low: float = -math.inf
    high: float = math.inf
    low_open: bool = False


_NUM = 'number'
SCENARIO_KEYS: tuple[ScenarioKey, ...] = (
    ScenarioKey('description', 'text', False, ''),
    ScenarioKey('vehicle.wheelbase', _NUM, True, None, 0.0, 20.0, True),
    ScenarioKey('vehicle.steer_time_constant', _NUM, True, None, 0.0, 5.0),
    ScenarioKey('vehicle.steer_delay', _NUM, True, None, 0.0, 2.0),
    ScenarioKey('vehicle.speed_time_constant', _NUM, False, 0.25, 0.0, 10.0),
    ScenarioKey('steering.max_angle', _NUM, True, None, 0.0, 1.5, True),
    ScenarioKey('steering.max_rate', _NUM, True, None, 0.0, 20.0, True),
    ScenarioKey('course.points', 'points', False, ()),
    ScenarioKey('corridor_width', _NUM, False, None, 0.0, 100.0, True),
    ScenarioKey('start.x', _NUM, False, 0.0),
    ScenarioKey('start.y', _NUM, False, 0.0),
    ScenarioKey('start.heading', _NUM, False, 0.0, -math.pi, math.pi),
    ScenarioKey('speed', _NUM, True, None, 0.0, 30.0, True),
    ScenarioKey('duration', _NUM, True, None, 0.0, 3600.0, True),
    ScenarioKey('pose_rate', _NUM, True, None, 0.0, 1000.0, True),
    ScenarioKey('pose_noise.position', _NUM, False, 0.0, 0.0, 5.0),
    ScenarioKey('pose_noise.heading', _NUM, False, 0.0, 0.0, math.pi),
    ScenarioKey('pose_noise.seed', 'integer', False, 0, 0, 2.0**32 - 1),
    ScenarioKey('pose_delay', _NUM, False, 0.0, 0.0, 2.0),
    ScenarioKey('dropouts', 'windows', False, ()),
)
_KEYS = {key.name: key for key in SCENARIO_KEYS}


def _flat_keys(tree: Mapping[Any, Any], prefix: str, out: dict[str, object]) -> None:
    for key, value in tree.items():
        if not isinstance(key, str):
            raise ScenarioError(f'{prefix}{key!r}: key is not a string')
        name = f'{prefix}{key}'
        if isinstance(value, Mapping) and name not in _KEYS:
            _flat_keys(value, f'{name}.', out)
            continue
        if name in out:
            raise ScenarioError(f'{name}: given twice')
        out[name] = value


def _unknown(name: str) -> ScenarioError:
    close = difflib.get_close_matches(name, _KEYS.keys(), n=1)
    hint = f" (did you mean '{close[0]}'?)" if close else ''
    return ScenarioError(f'{name}: unknown scenario key{hint}')


def _number(name: str, value: object) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise ScenarioError(f'{name}: expected a number, got {value!r}')
    number = float(value)
    if not math.isfinite(number):
        raise ScenarioError(f'{name}: must be finite, got {value!r}')
    return number


def _bounded(key: ScenarioKey, value: object) -> float:
    number = _number(key.name, value)
    if key.low_open and number <= key.low:
        raise ScenarioError(f'{key.name}: must be > {key.low:g}, got {value!r}')
    if number < key.low:
        raise ScenarioError(f'{key.name}: must be >= {key.low:g}, got {value!r}')
    if number > key.high:
        raise ScenarioError(f'{key.name}: must be <= {key.high:g}, got {value!r}')
    return number


def _pairs(name: str, value: object) -> list[tuple[float, float]]:
    if isinstance(value, (str, bytes)) or not isinstance(value, (list, tuple)):
        raise ScenarioError(f'{name}: expected a list of pairs [[a, b], ...], got {value!r}')
    pairs = []
    for i, item in enumerate(value):
        if isinstance(item, (str, bytes)) or not isinstance(item, (list, tuple)) \
                or len(item) != 2:
            raise ScenarioError(f'{name}[{i}]: expected a pair [a, b], got {item!r}')
        pairs.append((_number(f'{name}[{i}]', item[0]), _number(f'{name}[{i}]', item[1])))
    return pairs


def _points(name: str, value: object) -> tuple[tuple[float, float], ...]:
    points = _pairs(name, value)
    if len(points) < 2:
        raise ScenarioError(f'{name}: needs at least 2 points [[x, y], ...], got {value!r}')
    for i in range(1, len(points)):
        (x0, y0), (x1, y1) = points[i - 1], points[i]
        if math.hypot(x1 - x0, y1 - y0) < 1e-6:
            raise ScenarioError(
                f'{name}[{i}]: coincides with the point before it, got {list(points[i])!r}')
    return tuple(points)


def _windows(name: str, value: object) -> tuple[tuple[float, float], ...]:
    windows = _pairs(name, value)
    for i, (t0, t1) in enumerate(windows):
        if t0 < 0.0:
            raise ScenarioError(f'{name}[{i}]: start must be >= 0, got {[t0, t1]!r}')
        if t1 <= t0:
            raise ScenarioError(f'{name}[{i}]: end must be after start, got {[t0, t1]!r}')
    return tuple(windows)


def _checked(key: ScenarioKey, value: object) -> object:
    if key.kind == _NUM:
        return _bounded(key, value)
    if key.kind == 'integer':
        if isinstance(value, bool) or not isinstance(value, int):
            raise ScenarioError(f'{key.name}: expected an integer, got {value!r}')
        if not key.low <= value <= key.high:
            raise ScenarioError(
                f'{key.name}: must lie in [{key.low:g}, {key.high:g}], got {value!r}')
        return value
    if key.kind == 'text':
        if not isinstance(value, str):
            raise ScenarioError(f'{key.name}: expected text, got {value!r}')
        return value
    if key.kind == 'points':
        return _points(key.name, value)
    return _windows(key.name, value)


def scenario_from_mapping(data: object, name: str = '') -> Scenario:
    """Return the validated :class:`Scenario` of a parsed YAML document.

    Raises:
        ScenarioError: the first missing, unknown or invalid key, with its value.

    """
    if not isinstance(data, Mapping):
        raise ScenarioError(f'expected a mapping of scenario keys, got {data!r}')
    flat: dict[str, object] = {}
    _flat_keys(data, '', flat)
    for key_name in flat:
        if key_name not in _KEYS:
            raise _unknown(key_name)
    values: dict[str, Any] = {}
    for key in SCENARIO_KEYS:
        if key.name in flat:
            values[key.name] = _checked(key, flat[key.name])
        elif key.required:
            raise ScenarioError(f'{key.name}: missing (required)')
        else:
            values[key.name] = key.default
    for t0, t1 in values['dropouts']:
        if t0 >= values['duration']:
            raise ScenarioError(
                f'dropouts: window {[t0, t1]!r} starts after the end of the run '
                f"(duration {values['duration']!r})")
    return Scenario(
        vehicle=PlantVehicle(values['vehicle.wheelbase'], values['vehicle.steer_time_constant'],
                             values['vehicle.steer_delay'],
                             values['vehicle.speed_time_constant']),
        steering=PlantSteering(values['steering.max_angle'], values['steering.max_rate']),
        course_points=values['course.points'],
        corridor_width=values['corridor_width'],
        start=StartPose(values['start.x'], values['start.y'], values['start.heading']),
        speed=values['speed'], duration=values['duration'], pose_rate=values['pose_rate'],
        pose_noise=PoseNoise(values['pose_noise.position'], values['pose_noise.heading'],
                             values['pose_noise.seed']),
        pose_delay=values['pose_delay'], dropouts=values['dropouts'],
        description=values['description'], name=name)


def load_scenario(path: str | Path) -> Scenario:
    """Return the validated scenario in the YAML file ``path``.

    Raises:
        ScenarioError: unreadable file, bad YAML or an invalid key, prefixed with the path.

    """
    spath = str(path)
    try:
        text = Path(path).read_text(encoding='utf-8')
    except OSError as err:
        raise ScenarioError(f'{spath}: cannot read scenario file ({err.strerror})') from err
    try:
        data = yaml.safe_load(text)
    except yaml.YAMLError as err:
        mark = getattr(err, 'problem_mark', None)
        where = f' at line {mark.line + 1}' if mark is not None else ''
        raise ScenarioError(f'{spath}: not valid YAML{where}') from err
    try:
        return scenario_from_mapping(data, Path(path).stem)
    except ScenarioError as err:
        raise ScenarioError(f'{spath}: {err}') from err
