# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""ROS parameters of the node: declared from the one table, live sets validated as a whole.

* :func:`descriptor_for` builds each ``ParameterDescriptor`` from
  :data:`corridor_pid.core.params.PARAMS`: the description with its unit, a
  ``FloatingPointRange``/``IntegerRange`` for bounded numbers, ``read_only`` for every
  parameter that is not live (vehicle facts, safety limits, plumbing), and the allowed
  choices of a string in ``additional_constraints``.
* :func:`declare_parameters` declares them all on a node (params-file and ``-p`` overrides
  apply as usual) and returns the validated :class:`Config` through the core's one validator.
* :func:`startup_config` checks the ROS arguments before rclpy starts: every
  ``--params-file`` (through the core's params-file reader) and ``-p`` value, so a bad file
  gives one line naming the key instead of rcl's parser errors.
* :class:`LiveRetune` is the on-set-parameters callback: a set (one parameter, or several
  with ``set_parameters_atomically``) is validated as a whole with
  :func:`config_from_params` on top of the configuration in force, then checked by the live
  stability guard (``tuning.guard``), then applied at once with
  :meth:`Controller.retune` (bumpless). Anything wrong rejects the whole set with a reason
  and changes nothing.
"""

from __future__ import annotations

import array
from collections.abc import Callable, Iterable, Sequence
import math
from typing import Any

from corridor_pid.core.config import Config, config_from_params, live_change_names, validated_value
from corridor_pid.core.controller import Controller
from corridor_pid.core.errors import ConfigError
from corridor_pid.core.params import (
    BOOL,
    DOUBLE,
    DOUBLE_ARRAY,
    INTEGER,
    PARAMS,
    ParamSpec,
    SPECS,
    STRING,
)
from corridor_pid.core.paramsfile import params_from_file
from corridor_pid.ros.convert import ackermann_class
from rcl_interfaces.msg import (
    FloatingPointRange,
    IntegerRange,
    ParameterDescriptor,
    ParameterType,
    SetParametersResult,
)
from rclpy.node import Node
from rclpy.parameter import Parameter
import yaml

__all__ = [
    'GUARDED_NAMES', 'LiveRetune', 'declare_parameters', 'descriptor_for', 'python_value',
    'split_ros_args', 'startup_config',
]

_TYPES = {
    DOUBLE: ParameterType.PARAMETER_DOUBLE,
    INTEGER: ParameterType.PARAMETER_INTEGER,
    BOOL: ParameterType.PARAMETER_BOOL,
    STRING: ParameterType.PARAMETER_STRING,
    DOUBLE_ARRAY: ParameterType.PARAMETER_DOUBLE_ARRAY,
}

GUARDED_NAMES = frozenset({
    'gains.kp', 'gains.ki', 'gains.kd', 'gains.reference_speed', 'lookahead',
    'derivative.filter_time', 'speed.cruise',
})
"""Live names whose change is checked by the stability guard (they shape the loop or the
speed it is checked at)."""


def _description(spec: ParamSpec) -> str:
    unit = f' [{spec.unit}]' if spec.unit else ''
    tail = '' if spec.live else ' Read-only while running.'
    return f'{spec.description}{unit}{tail}'


def descriptor_for(spec: ParamSpec) -> ParameterDescriptor:
    """Return the ROS descriptor of one table entry (type, description, range, read_only)."""
    desc = ParameterDescriptor()
    desc.name = spec.name
    desc.type = _TYPES[spec.kind]
    desc.description = _description(spec)
    desc.read_only = not spec.live
    constraints: list[str] = []
    if spec.kind in (DOUBLE, INTEGER) and spec.low is not None and spec.high is not None:
        if spec.kind == DOUBLE:
            desc.floating_point_range = [FloatingPointRange(
                from_value=float(spec.low), to_value=float(spec.high), step=0.0)]
        else:
            desc.integer_range = [IntegerRange(
                from_value=int(spec.low), to_value=int(spec.high), step=1)]
        if spec.low_open:
            constraints.append(f'must be > {spec.low:g}')
    if spec.choices:
        constraints.append('one of: ' + ', '.join(spec.choices))
    if spec.kind == DOUBLE_ARRAY:
        constraints.append('flat [x0, y0, x1, y1, ...], at least two vertices; empty = x-axis')
    desc.additional_constraints = '; '.join(constraints)
    return desc


def python_value(param: Parameter) -> object:
    """Return a parameter's value as the core validator expects it (arrays as tuples)."""
    value = param.value
    if param.type_ == Parameter.Type.DOUBLE_ARRAY:
        return tuple(float(x) for x in value)
    if isinstance(value, (list, tuple, array.array)):
        return list(value)
    return value


def _declare_points(node: Node, spec: ParamSpec) -> tuple[float, ...]:
    """Declare ``course.points`` as a typed array that may stay unset (= absent = x-axis).

    rclpy cannot type an empty list as a double array, and the ROS params-file parser gives
    ``[]`` no type, so an absent or empty polyline is a declared but unset parameter.
    """
    found = node.declare_parameter(spec.name, Parameter.Type.DOUBLE_ARRAY, descriptor_for(spec))
    if found.type_ == Parameter.Type.NOT_SET:
        return ()
    return tuple(float(x) for x in found.value)


def declare_parameters(node: Node, specs: Iterable[ParamSpec] = PARAMS) -> Config:
    """Declare every table parameter on ``node``; return the validated configuration.

    Raises:
        ConfigError: an override (params file or ``-p``) has the wrong type, lies out of
            range or is inconsistent, naming the key and quoting the value.

    """
    from rclpy.exceptions import InvalidParameterTypeException, InvalidParameterValueException

    values: dict[str, object] = {}
    for spec in specs:
        if spec.kind == DOUBLE_ARRAY:
            values[spec.name] = _declare_points(node, spec)
            continue
        try:
            param = node.declare_parameter(spec.name, spec.default, descriptor_for(spec))
        except InvalidParameterTypeException as err:
            raise ConfigError(f'{spec.name}: {err.args[0]}') from err
        except InvalidParameterValueException as err:
            raise ConfigError(f'{spec.name}: {err.args[0]}') from err
        values[spec.name] = python_value(param)
    return config_from_params(values)


_VALUE_FLAGS = frozenset({
    '--params-file', '-p', '--param', '-r', '--remap', '--log-level', '-e', '--enclave',
    '--log-config-file', '--log-file-name',
})
"""ROS arguments that take the next argument as their value."""


def _ros_own(name: str) -> bool:
    """Return whether ``name`` is a parameter rclpy declares itself (not the controller's)."""
    return name in ('use_sim_time', 'start_type_description_service') or name.startswith(
        'qos_overrides.')


def split_ros_args(args: Sequence[str]) -> tuple[list[str], list[str]]:
    """Return (plain arguments, ROS arguments): those inside ``--ros-args ... [--]``."""
    plain: list[str] = []
    ros: list[str] = []
    inside = False
    for arg in args:
        if arg == '--ros-args':
            inside = True
        elif inside and arg == '--':
            inside = False
        else:
            (ros if inside else plain).append(arg)
    return plain, ros


def _for_node(rule: str, node_name: str) -> str | None:
    """Return ``rule`` without a ``node:`` prefix, or None when it names another node."""
    lhs = rule.partition(':=')[0]
    if ':' in lhs:
        prefix, _, rest = rule.partition(':')
        return rest if prefix == node_name else None
    return rule


def startup_config(ros_args: Sequence[str], node_name: str = 'corridor_pid') -> Config:
    """Return the configuration the ROS arguments give the node, checked before start.

    Reads every ``--params-file`` with the core's params-file reader (sections for the node
    name, remapped with ``__node:=`` if so) and every ``-p name:=value`` (a YAML value, as
    rcl reads it), validates the merged set with the one validator, and checks that an
    ``ackermann`` output can be given.

    Raises:
        ConfigError: one line naming the file (or ``-p``), the key and the value.

    """
    pairs: list[tuple[str, str]] = []
    i = 0
    while i < len(ros_args):
        flag = ros_args[i]
        if flag in _VALUE_FLAGS:
            if i + 1 >= len(ros_args):
                raise ConfigError(f'{flag}: a value must follow it')
            pairs.append((flag, ros_args[i + 1]))
            i += 2
        else:
            i += 1
    for flag, value in pairs:
        if flag in ('-r', '--remap'):
            rule = _for_node(value, node_name)
            if rule is not None:
                lhs, _, rhs = rule.partition(':=')
                if lhs in ('__node', '__name') and rhs:
                    node_name = rhs
    flat: dict[str, object] = {}
    files = [value for flag, value in pairs if flag == '--params-file']
    for path in files:
        for key, found in params_from_file(path, node_name).items():
            if _ros_own(key):
                continue
            try:
                flat[key] = validated_value(key, found)
            except ConfigError as err:
                raise ConfigError(f'{path}: {err}') from err
    for flag, value in pairs:
        if flag not in ('-p', '--param'):
            continue
        rule = _for_node(value, node_name)
        if rule is None:
            continue
        name, sep, text = rule.partition(':=')
        if not sep or not name:
            raise ConfigError(f'{flag} {value!r}: expected name:=value')
        if _ros_own(name):
            continue
        try:
            parsed = yaml.safe_load(text)
        except yaml.YAMLError as err:
            raise ConfigError(f'{flag} {value!r}: the value is not valid YAML') from err
        try:
            flat[name] = validated_value(name, parsed)
        except ConfigError as err:
            raise ConfigError(f'{flag} {value!r}: {err}') from err
    try:
        config = config_from_params(flat)
    except ConfigError as err:
        where = f'{files[-1]}: ' if files else ''
        raise ConfigError(f'{where}{err}') from err
    if config.output_type == 'ackermann':
        ackermann_class()
    return config


GuardCheck = Callable[[Config, float], tuple[bool, str]]
"""A stability check: (config, speed [m/s]) -> (ok, reason)."""


def _stability_guard() -> GuardCheck | None:
    """Return the live stability guard of the tuning package, or None if it is absent."""
    try:
        from corridor_pid.tuning.guard import guard_verdict
    except ImportError:
        return None

    def check(config: Config, speed: float) -> tuple[bool, str]:
        verdict = guard_verdict(config, speed)
        return verdict.ok, verdict.reason

    return check


class LiveRetune:
    """The on-set-parameters callback of the node: validate a whole set, apply it atomically.

    Args:
        controller: the controller whose configuration is changed with ``retune``.
        now: node clock [s].
        speed: the speed [m/s] the vehicle runs at now (for the stability guard).
        log_warning, log_info: logger functions.
        on_applied: called with the new configuration after a successful set.
        guard: the stability check; default: :func:`corridor_pid.tuning.guard.guard_verdict`
            when the tuning package is present.

    """

    def __init__(self, controller: Controller, now: Callable[[], float],
                 speed: Callable[[], float], log_warning: Callable[[str], Any],
                 log_info: Callable[[str], Any],
                 on_applied: Callable[[Config], None] | None = None,
                 guard: GuardCheck | None = None) -> None:
        """Hold what the callback needs; look the stability guard up once."""
        self._controller = controller
        self._now = now
        self._speed = speed
        self._warn = log_warning
        self._info = log_info
        self._on_applied = on_applied
        self._guard = guard if guard is not None else _stability_guard()
        if self._guard is None:
            self._warn('live stability guard unavailable (corridor_pid.tuning.guard is '
                       'missing): tuning.guard is not enforced')

    def changed_config(self, params: Sequence[Parameter]) -> Config:
        """Return the configuration a set would give, validated as a whole.

        Raises:
            ConfigError: the first problem, naming the key and quoting the value.

        """
        current = self._controller.config
        # Parameters rclpy declares itself (use_sim_time, ...) are not the controller's.
        changes = {p.name: python_value(p) for p in params if p.name in SPECS}
        new = config_from_params(changes, base=current)
        _, fixed = live_change_names(current, new)
        if fixed:
            name = sorted(fixed)[0]
            raise ConfigError(f'{name}: read-only while running (restart the node with a '
                              f'new params file to change it)')
        guarded = [n for n in changes if n in GUARDED_NAMES]
        mode = new.tuning.guard
        if guarded and mode != 'off' and self._guard is not None:
            speed = self._speed()
            ok, reason = self._guard(new, speed)
            if not ok:
                if mode == 'reject':
                    raise ConfigError(f"{', '.join(sorted(guarded))}: rejected by the "
                                      f'stability guard: {reason}')
                self._warn('stability guard (tuning.guard: warn) for '
                           f"{', '.join(sorted(guarded))}: {reason}")
        return new

    def __call__(self, params: list[Parameter]) -> SetParametersResult:
        """Validate and apply ``params`` as one set; return the result with a reason."""
        try:
            new = self.changed_config(params)
            self._controller.retune(new, self._now())
        except ConfigError as err:
            reason = str(err)
            self._warn(f'parameter change rejected: {reason}')
            return SetParametersResult(successful=False, reason=reason)
        names = ', '.join(f'{p.name}={_shown(python_value(p))}' for p in params)
        self._info(f'parameters applied: {names}')
        if self._on_applied is not None:
            self._on_applied(new)
        return SetParametersResult(successful=True, reason='')


def _shown(value: object) -> str:
    if isinstance(value, float) and math.isfinite(value):
        return f'{value:g}'
    return repr(value)


DEFAULT_FILE_HEADER = """\
SPDX-License-Identifier: Apache-2.0
Copyright 2026 corridor_pid contributors

corridor_pid: the controller node's default parameters (every value at its default).

Load:   ros2 run corridor_pid corridor_pid_node --ros-args --params-file <this file>
   or:  corridor-pid node --ros-args --params-file <this file>
Check:  corridor-pid check <this file>   (the same validator the node runs at start)

Units are SI (m, s, rad); angles positive left, REP 103. Floats need a decimal point
(write 1.0, not 1). 'live' parameters may be changed while the node runs (ros2 param set);
the others are read-only while running: restart the node with an edited file.

Safety: test every change in simulation and on recorded runs, then on a stand and at low
speed, with a hardware emergency stop within reach. The watchdog is not a safety-rated
function; follow local regulations and a qualified safety assessment.

Generated from corridor_pid/core/params.py by
  python -m corridor_pid.ros.parameters config/corridor_pid.yaml"""

_EXAMPLE_POINTS = '[0.0, 0.0, 30.0, 0.0, 36.0, 6.0]'


def _comment_lines(spec: ParamSpec, indent: str) -> list[str]:
    import textwrap

    tags = [spec.unit] if spec.unit else []
    if spec.choices:
        tags.append(' | '.join(spec.choices))
    tags.append('live' if spec.live else 'read-only')
    text = f"{spec.description} [{'; '.join(tags)}]"
    return [f'{indent}# {line}' for line in textwrap.wrap(text, 95 - len(indent))]


def default_params_text() -> str:
    """Return the text of ``config/corridor_pid.yaml``: every default, with comments.

    ``course.points`` is left out (absent = the x-axis of the pose frame; an empty list in a
    params file has no type for ROS) and shown as a commented example instead.
    """
    from corridor_pid.core.config import default_config
    from corridor_pid.core.paramsfile import params_yaml

    values = default_config().as_params()
    values.pop('course.points')
    out: list[str] = []
    section = ''
    for line in params_yaml(values, header=DEFAULT_FILE_HEADER).splitlines():
        stripped = line.strip()
        indent = line[:len(line) - len(line.lstrip())]
        key = stripped.split(':', 1)[0]
        if len(indent) == 4 and stripped.endswith(':'):
            section = key
            out.append('')
        elif len(indent) == 4:
            section = ''
        name = f'{section}.{key}' if section and len(indent) == 6 else key
        if len(indent) >= 4 and name in SPECS:
            out += _comment_lines(SPECS[name], indent)
        out.append(line)
    spec = SPECS['course.points']
    out += ['', '    # course:'] + _comment_lines(spec, '    #   ') + [
        f'    #   points: {_EXAMPLE_POINTS}']
    return '\n'.join(out) + '\n'


if __name__ == '__main__':
    from pathlib import Path
    import sys

    Path(sys.argv[1]).write_text(default_params_text(), encoding='utf-8')
