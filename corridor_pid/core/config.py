# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Typed, validated controller configuration: the one validation path.

The node (declared parameters and live sets), the params-file loader and every CLI verb
build a :class:`Config` through :func:`config_from_params`, so whatever ``corridor-pid check``
accepts the node accepts, and whatever it refuses the node refuses.
"""

from __future__ import annotations

from collections.abc import Mapping
import dataclasses
from dataclasses import dataclass
import difflib
import math

from corridor_pid.core.errors import ConfigError
from corridor_pid.core.params import (
    BOOL,
    DEFAULTS,
    DOUBLE,
    DOUBLE_ARRAY,
    INTEGER,
    LIVE_NAMES,
    PARAMS,
    ParamSpec,
    ParamValue,
    SPECS,
    STRING,
)

__all__ = [
    'Config', 'ConfigError', 'PARAMS', 'config_from_params', 'live_change_names',
    'validated_value',
]


@dataclass(frozen=True)
class Gains:
    """PID gains: kp [rad/m], ki [rad/(m*s)], kd [rad*s/m], reference_speed [m/s]."""

    kp: float
    ki: float
    kd: float
    reference_speed: float


@dataclass(frozen=True)
class IntegralSettings:
    """Windup guard: method, tracking_time [s], bound [rad]."""

    method: str
    tracking_time: float
    bound: float


@dataclass(frozen=True)
class DerivativeSettings:
    """D term: source ('measurement' | 'error'), rate_from, filter_time [s]."""

    source: str
    rate_from: str
    filter_time: float


@dataclass(frozen=True)
class RetuneSettings:
    """Bumpless retune: blend_time [s]."""

    blend_time: float


@dataclass(frozen=True)
class FeedforwardSettings:
    """Curvature feedforward switch."""

    enabled: bool


@dataclass(frozen=True)
class SmoothingSettings:
    """Alpha-beta smoothing of y and theta: enabled, alpha, beta (dimensionless)."""

    enabled: bool
    alpha: float
    beta: float


@dataclass(frozen=True)
class DelayCompensationSettings:
    """Pose-delay compensation: enabled, max_age [s]."""

    enabled: bool
    max_age: float


@dataclass(frozen=True)
class VehicleSettings:
    """Vehicle facts: wheelbase [m], steer_time_constant [s], steer_delay [s]."""

    wheelbase: float
    steer_time_constant: float
    steer_delay: float


@dataclass(frozen=True)
class SteeringSettings:
    """Steering limits: max_angle [rad], max_rate [rad/s], trim [rad]."""

    max_angle: float
    max_rate: float
    trim: float


@dataclass(frozen=True)
class SpeedSettings:
    """Speed policy [m/s, m/s^2]: cruise, max, accel/decel limits, lateral-accel limit."""

    cruise: float
    slowdown_error: float
    max: float  # noqa: A003 - the contract's name (speed.max)
    max_accel: float
    max_decel: float
    max_lateral_accel: float


@dataclass(frozen=True)
class WatchdogSettings:
    """Stale-pose stop: timeout [s] and recovery_count (poses)."""

    timeout: float
    recovery_count: int


@dataclass(frozen=True)
class CourseSettings:
    """Centreline polyline as flat (x0, y0, x1, y1, ...) [m]; empty = x-axis."""

    points: tuple[float, ...]

    def xy(self) -> list[tuple[float, float]]:
        """Return the polyline as a list of (x, y) vertices [m]."""
        pts = self.points
        return [(pts[i], pts[i + 1]) for i in range(0, len(pts), 2)]


@dataclass(frozen=True)
class ControlSettings:
    """Control timing: rate [Hz] (0 = on each pose arrival)."""

    rate: float


@dataclass(frozen=True)
class DiagnosticsSettings:
    """Diagnostics and watchdog timer rate [Hz]."""

    rate: float


@dataclass(frozen=True)
class TuningSettings:
    """Live stability guard: mode and margin floors [deg, dB, ratio]."""

    guard: str
    min_phase_margin: float
    min_gain_margin: float
    min_delay_margin_ratio: float


@dataclass(frozen=True)
class Config:
    """The whole validated configuration of the controller and its node."""

    gains: Gains
    lookahead: float
    target_offset: float
    integral: IntegralSettings
    derivative: DerivativeSettings
    retune: RetuneSettings
    feedforward: FeedforwardSettings
    smoothing: SmoothingSettings
    delay_compensation: DelayCompensationSettings
    speed: SpeedSettings
    vehicle: VehicleSettings
    steering: SteeringSettings
    watchdog: WatchdogSettings
    course: CourseSettings
    pose_frame: str
    control: ControlSettings
    pose_type: str
    pose_qos: str
    cmd_vel_stamped: bool
    output_type: str
    start_enabled: bool
    diagnostics: DiagnosticsSettings
    tuning: TuningSettings

    def as_params(self) -> dict[str, ParamValue]:
        """Return every value as a flat dotted-name dict (the params-file spelling)."""
        out: dict[str, ParamValue] = {}
        for spec in PARAMS:
            obj: object = self
            for part in spec.name.split('.'):
                obj = getattr(obj, part)
            out[spec.name] = obj  # type: ignore[assignment]
        return out

    def replaced(self, changes: Mapping[str, object]) -> Config:
        """Return a validated copy with the dotted-name ``changes`` applied."""
        return config_from_params(changes, base=self)


_SECTIONS: dict[str, type] = {
    'gains': Gains, 'integral': IntegralSettings, 'derivative': DerivativeSettings,
    'retune': RetuneSettings, 'feedforward': FeedforwardSettings,
    'smoothing': SmoothingSettings, 'delay_compensation': DelayCompensationSettings,
    'speed': SpeedSettings, 'vehicle': VehicleSettings, 'steering': SteeringSettings,
    'watchdog': WatchdogSettings, 'course': CourseSettings, 'control': ControlSettings,
    'diagnostics': DiagnosticsSettings, 'tuning': TuningSettings,
}


def _suggestion(name: str) -> str:
    close = difflib.get_close_matches(name, SPECS.keys(), n=1)
    return f" (did you mean '{close[0]}'?)" if close else ''


def validated_value(name: str, value: object) -> ParamValue:
    """Return ``value`` checked against the type and range of parameter ``name``.

    Raises:
        ConfigError: naming the key and quoting the value.

    """
    spec = SPECS.get(name)
    if spec is None:
        raise ConfigError(f'{name}: unknown parameter{_suggestion(name)}')
    return _checked(spec, value)


def _checked(spec: ParamSpec, value: object) -> ParamValue:
    name = spec.name
    if spec.kind == DOUBLE:
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            raise ConfigError(f'{name}: expected a floating-point number, got {value!r}')
        if isinstance(value, int):
            raise ConfigError(
                f'{name}: expected a floating-point number, got the integer {value!r} '
                f'(write {value}.0)')
        return _in_range(spec, float(value))
    if spec.kind == INTEGER:
        if isinstance(value, bool) or not isinstance(value, int):
            raise ConfigError(f'{name}: expected an integer, got {value!r}')
        return int(_in_range(spec, value))
    if spec.kind == BOOL:
        if not isinstance(value, bool):
            raise ConfigError(f'{name}: expected true or false, got {value!r}')
        return value
    if spec.kind == STRING:
        if not isinstance(value, str):
            raise ConfigError(f'{name}: expected a string, got {value!r}')
        if spec.choices and value not in spec.choices:
            raise ConfigError(
                f"{name}: {value!r} is not one of {', '.join(spec.choices)}")
        return value
    if spec.kind == DOUBLE_ARRAY:
        if isinstance(value, (str, bytes)) or not isinstance(value, (list, tuple)):
            raise ConfigError(f'{name}: expected a list of floats, got {value!r}')
        items: list[float] = []
        for i, item in enumerate(value):
            if isinstance(item, bool) or not isinstance(item, float):
                hint = f' (write {item}.0)' if isinstance(item, int) and not isinstance(
                    item, bool) else ''
                raise ConfigError(
                    f'{name}[{i}]: expected a floating-point number, got {item!r}{hint}')
            if not math.isfinite(item):
                raise ConfigError(f'{name}[{i}]: must be finite, got {item!r}')
            items.append(float(item))
        return tuple(items)
    raise AssertionError(spec.kind)  # pragma: no cover - table is static


def _in_range(spec: ParamSpec, value: float) -> float:
    name = spec.name
    if not math.isfinite(value):
        raise ConfigError(f'{name}: must be finite, got {value!r}')
    if spec.low is not None:
        if spec.low_open and value <= spec.low:
            raise ConfigError(f'{name}: must be > {spec.low}, got {value!r}')
        if value < spec.low:
            raise ConfigError(f'{name}: must be >= {spec.low}, got {value!r}')
    if spec.high is not None and value > spec.high:
        raise ConfigError(f'{name}: must be <= {spec.high}, got {value!r}')
    return value


def _consistency_errors(v: Mapping[str, ParamValue]) -> str | None:
    """Return the first inconsistency between values, or None."""
    def f(key: str) -> float:
        return float(v[key])  # type: ignore[arg-type]

    if f('speed.cruise') > f('speed.max'):
        return (f"speed.cruise: {v['speed.cruise']!r} exceeds speed.max "
                f"{v['speed.max']!r}")
    if abs(f('steering.trim')) >= f('steering.max_angle'):
        return (f"steering.trim: {v['steering.trim']!r} must lie inside "
                f"+/-steering.max_angle {v['steering.max_angle']!r}")
    points = v['course.points']
    assert isinstance(points, tuple)
    if points:
        if len(points) % 2 or len(points) < 4:
            return (f'course.points: needs an even count of at least 4 numbers '
                    f'(x0, y0, x1, y1, ...), got {len(points)}')
        for i in range(0, len(points) - 2, 2):
            if math.hypot(points[i + 2] - points[i], points[i + 3] - points[i + 1]) < 1e-6:
                return (f'course.points: vertices {i // 2} and {i // 2 + 1} coincide at '
                        f'({points[i]!r}, {points[i + 1]!r})')
    return None


def config_from_params(flat: Mapping[str, object], base: Config | None = None) -> Config:
    """Return a validated :class:`Config` from dotted-name values.

    Args:
        flat: dotted names (``'gains.kp'``) to values; unknown names are rejected.
        base: values for names absent from ``flat`` (defaults when None).

    Raises:
        ConfigError: the first invalid key, with its value; nothing is applied.

    """
    values: dict[str, ParamValue] = dict(DEFAULTS) if base is None else base.as_params()
    for name, value in flat.items():
        values[name] = validated_value(name, value)
    problem = _consistency_errors(values)
    if problem:
        raise ConfigError(problem)
    return _build(values)


def _build(values: Mapping[str, ParamValue]) -> Config:
    sections: dict[str, dict[str, ParamValue]] = {}
    top: dict[str, object] = {}
    for name, value in values.items():
        if '.' in name:
            section, field = name.split('.', 1)
            sections.setdefault(section, {})[field] = value
        else:
            top[name] = value
    for section, cls in _SECTIONS.items():
        top[section] = cls(**sections[section])
    return Config(**top)  # type: ignore[arg-type]


def default_config() -> Config:
    """Return the configuration with every parameter at its default."""
    return _build(DEFAULTS)


def live_change_names(old: Config, new: Config) -> tuple[set[str], set[str]]:
    """Return (live, read-only) sets of dotted names whose values differ."""
    a, b = old.as_params(), new.as_params()
    changed = {name for name in a if a[name] != b[name]}
    return changed & LIVE_NAMES, changed - LIVE_NAMES


def replace_course(config: Config, points: tuple[float, ...]) -> Config:
    """Return ``config`` with another course polyline, validated."""
    return config_from_params({'course.points': points}, base=config)


def as_dataclass_dict(config: Config) -> dict[str, object]:
    """Return the nested dict form of ``config`` (for JSON reports)."""
    return dataclasses.asdict(config)
