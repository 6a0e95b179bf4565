# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""ROS parameter plumbing without DDS: descriptors, start-up checks, the live-set callback."""

from __future__ import annotations

import math
from pathlib import Path

from corridor_pid.core.config import config_from_params, default_config
from corridor_pid.core.controller import Controller, PoseSample
from corridor_pid.core.errors import ConfigError
from corridor_pid.core.params import DOUBLE, DOUBLE_ARRAY, INTEGER, PARAMS, SPECS, STRING
from corridor_pid.core.paramsfile import load_params_file
from corridor_pid.ros.parameters import (
    default_params_text,
    descriptor_for,
    LiveRetune,
    split_ros_args,
    startup_config,
)
import pytest
from rcl_interfaces.msg import ParameterType
from rclpy.parameter import Parameter
from ros_helpers import REPO

_KINDS = {
    DOUBLE: ParameterType.PARAMETER_DOUBLE, INTEGER: ParameterType.PARAMETER_INTEGER,
    STRING: ParameterType.PARAMETER_STRING, DOUBLE_ARRAY: ParameterType.PARAMETER_DOUBLE_ARRAY,
}


@pytest.mark.parametrize('spec', PARAMS, ids=[s.name for s in PARAMS])
def test_descriptor_follows_the_table(spec: object) -> None:
    """Type, unit in the description, range, read-only for non-live, choices listed."""
    desc = descriptor_for(spec)  # type: ignore[arg-type]
    s = SPECS[desc.name]
    assert desc.type == _KINDS.get(s.kind, ParameterType.PARAMETER_BOOL)
    assert desc.read_only == (not s.live)
    if s.unit:
        assert f'[{s.unit}]' in desc.description
    if s.kind == DOUBLE and s.low is not None and s.high is not None:
        (rng,) = desc.floating_point_range
        assert (rng.from_value, rng.to_value) == (s.low, s.high)
    if s.kind == INTEGER and s.low is not None and s.high is not None:
        (irng,) = desc.integer_range
        assert (irng.from_value, irng.to_value) == (s.low, s.high)
    for choice in s.choices:
        assert choice in desc.additional_constraints
    if s.low_open:
        assert f'> {s.low:g}' in desc.additional_constraints


def test_safety_limits_and_vehicle_facts_are_read_only() -> None:
    """DESIGN §4: vehicle, steering, speed limits, watchdog, course, pose_frame read-only."""
    fixed = ['vehicle.wheelbase', 'vehicle.steer_time_constant', 'vehicle.steer_delay',
             'steering.max_angle', 'steering.max_rate', 'steering.trim', 'speed.max',
             'speed.max_accel', 'speed.max_decel', 'speed.max_lateral_accel',
             'watchdog.timeout', 'watchdog.recovery_count', 'course.points', 'pose_frame']
    live = ['gains.kp', 'gains.ki', 'gains.kd', 'gains.reference_speed', 'lookahead',
            'target_offset', 'integral.method', 'integral.tracking_time', 'integral.bound',
            'retune.blend_time', 'speed.cruise']
    assert all(descriptor_for(SPECS[n]).read_only for n in fixed)
    assert not any(descriptor_for(SPECS[n]).read_only for n in live)


def test_default_params_file_is_generated_from_the_table() -> None:
    """config/corridor_pid.yaml is the generator's text and loads to the defaults."""
    path = REPO / 'config' / 'corridor_pid.yaml'
    assert path.read_text(encoding='utf-8') == default_params_text(), (
        'regenerate: python -m corridor_pid.ros.parameters config/corridor_pid.yaml')
    assert load_params_file(path) == default_config()


def test_split_ros_args() -> None:
    """Arguments inside --ros-args ... -- are ROS's; the rest are the program's."""
    plain, ros = split_ros_args(['a', '--ros-args', '-p', 'x:=1', '--', 'b', '--ros-args',
                                 '-r', 'pose:=p'])
    assert plain == ['a', 'b'] and ros == ['-p', 'x:=1', '-r', 'pose:=p']


def test_startup_config_merges_files_then_parameters(tmp_path: Path) -> None:
    """Files in order, then -p values (YAML typed); consistency checked on the merge."""
    one = tmp_path / 'one.yaml'
    one.write_text('corridor_pid:\n  ros__parameters:\n    speed: {max: 0.5}\n')
    two = tmp_path / 'two.yaml'
    two.write_text('/**:\n  ros__parameters:\n    speed: {cruise: 0.4}\n')
    config = startup_config(['--params-file', str(one), '--params-file', str(two),
                             '-p', 'gains.kp:=0.9', '-p', 'use_sim_time:=true'])
    assert (config.speed.max, config.speed.cruise, config.gains.kp) == (0.5, 0.4, 0.9)


def test_startup_config_follows_a_node_rename(tmp_path: Path) -> None:
    """With -r __node:=cart_pid the section 'cart_pid' is the node's."""
    path = tmp_path / 'cart.yaml'
    path.write_text('cart_pid:\n  ros__parameters:\n    gains: {kp: 50.5}\n')
    with pytest.raises(ConfigError, match='gains.kp'):
        startup_config(['-r', '__node:=cart_pid', '--params-file', str(path)])


@pytest.mark.parametrize(('args', 'match'), [
    (['-p', 'gains.kp:=1'], 'write 1.0'),
    (['-p', 'gains.kp'], 'name:=value'),
    (['-p', 'steering.max_angle:=[1.0'], 'not valid YAML'),
    (['--params-file'], 'a value must follow'),
])
def test_startup_config_errors_name_the_argument(args: list[str], match: str) -> None:
    """Bad -p values and a dangling flag are refused with a line naming them."""
    with pytest.raises(ConfigError, match=match):
        startup_config(args)


class _Log:
    def __init__(self) -> None:
        self.lines: list[str] = []

    def __call__(self, text: str) -> None:
        self.lines.append(text)


def _retune(config_changes: dict[str, object]) -> tuple[Controller, LiveRetune, _Log]:
    ctl = Controller(config_from_params({'smoothing.enabled': False, **config_changes}),
                     enabled=True)
    for k in range(5):
        ctl.step(PoseSample(k * 0.02, k * 0.02, 0.1 + 0.001 * k, 0.0), k * 0.02)
    log = _Log()
    return ctl, LiveRetune(ctl, lambda: 0.1, lambda: 0.5, log, log), log


def test_live_retune_applies_a_whole_set_or_nothing() -> None:
    """A set with one bad value changes nothing; a good set changes all its values."""
    ctl, retune, _ = _retune({})
    before = ctl.config
    bad = retune([Parameter('gains.kp', value=0.7), Parameter('gains.kd', value=math.nan)])
    assert not bad.successful and 'gains.kd' in bad.reason and ctl.config is before
    good = retune([Parameter('gains.kp', value=0.7), Parameter('gains.kd', value=0.3)])
    assert good.successful and (ctl.config.gains.kp, ctl.config.gains.kd) == (0.7, 0.3)


def test_live_retune_refuses_read_only_names() -> None:
    """A read-only parameter in a set refuses the set (also when rclpy's check is bypassed)."""
    ctl, retune, _ = _retune({})
    result = retune([Parameter('gains.kp', value=0.7),
                     Parameter('steering.max_angle', value=0.4)])
    assert not result.successful and 'steering.max_angle' in result.reason
    assert ctl.config.gains.kp != 0.7


@pytest.mark.parametrize(('mode', 'applied', 'logged'), [
    ('reject', False, 'rejected'), ('warn', True, 'stability guard'), ('off', True, None)])
def test_stability_guard_modes(mode: str, applied: bool, logged: str | None) -> None:
    """tuning.guard: reject refuses an unsafe gain, warn applies and logs, off applies."""
    ctl, retune, log = _retune({'tuning.guard': mode})
    result = retune([Parameter('gains.kp', value=40.0), Parameter('gains.kd', value=0.0)])
    assert result.successful == applied
    assert (ctl.config.gains.kp == 40.0) == applied
    if logged is None:
        assert not any('stability guard' in line for line in log.lines)
    else:
        assert any(logged in line for line in log.lines)
