# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""The one validation path: every invalid case gives its clear error; valid files round-trip."""

from __future__ import annotations

import math
from pathlib import Path

from corridor_pid.core.config import config_from_params, default_config, live_change_names
from corridor_pid.core.errors import ConfigError
from corridor_pid.core.params import PARAMS, SPECS
from corridor_pid.core.paramsfile import (
    load_params_file,
    params_from_file,
    params_yaml,
    write_params_file,
)
import pytest


def test_defaults_are_valid_and_complete() -> None:
    """Every parameter has a default that passes its own validation."""
    cfg = default_config()
    assert set(cfg.as_params()) == {spec.name for spec in PARAMS}
    assert config_from_params(cfg.as_params()) == cfg


def test_every_parameter_documents_its_unit_or_is_dimensionless() -> None:
    """Descriptions are non-empty; doubles carry a unit unless dimensionless."""
    for spec in PARAMS:
        assert spec.description.endswith('.'), spec.name
        assert not spec.name.endswith(('_m', '_s', '_rad', '_mps')), spec.name


@pytest.mark.parametrize(('changes', 'match'), [
    ({'gains.kp': 1}, r'gains\.kp: .*integer 1 \(write 1\.0\)'),
    ({'gains.kp': -0.5}, r'gains\.kp: must be >= 0\.0, got -0\.5'),
    ({'gains.kd': math.nan}, r'gains\.kd: must be finite, got nan'),
    ({'gains.ki': math.inf}, r'gains\.ki: must be finite'),
    ({'gains.kp': '1.0'}, r"gains\.kp: expected a floating-point number, got '1\.0'"),
    ({'gains.kp': True}, r'gains\.kp: expected a floating-point number, got True'),
    ({'gains.kq': 1.0}, r"gains\.kq: unknown parameter \(did you mean 'gains\.kp'\?\)"),
    ({'integral.method': 'clamp'}, r"integral\.method: 'clamp' is not one of"),
    ({'watchdog.recovery_count': 2.0}, r'watchdog\.recovery_count: expected an integer'),
    ({'watchdog.recovery_count': 0}, r'watchdog\.recovery_count: must be >= 1'),
    ({'watchdog.timeout': 0.0}, r'watchdog\.timeout: must be > 0\.0'),
    ({'start_enabled': 'yes'}, r'start_enabled: expected true or false'),
    ({'speed.cruise': 2.0}, r'speed\.cruise: 2\.0 exceeds speed\.max 1\.5'),
    ({'steering.trim': 0.6}, r'steering\.trim: must be <= 0\.5'),
    ({'steering.max_angle': 0.1, 'steering.trim': 0.2}, r'steering\.trim: 0\.2 must lie'),
    ({'integral.bound': 3.5}, r'integral\.bound: must be <= 3\.0, got 3\.5'),
    ({'course.points': [0.0, 0.0, 1.0]}, r'course\.points: needs an even count'),
    ({'course.points': [0.0, 0.0, 1]}, r'course\.points\[2\]: .* \(write 1\.0\)'),
    ({'course.points': [0.0, 0.0, 0.0, 0.0]}, r'course\.points: vertices 0 and 1 coincide'),
    ({'course.points': [0.0, 0.0, math.nan, 1.0]}, r'course\.points\[2\]: must be finite'),
    ({'course.points': 'line'}, r"course\.points: expected a list of floats, got 'line'"),
])
def test_invalid_values_name_key_and_value(changes: dict[str, object], match: str) -> None:
    """Each invalid case is refused with a message naming the key and quoting the value."""
    with pytest.raises(ConfigError, match=match):
        config_from_params(changes)


def test_base_is_untouched_by_a_rejected_change() -> None:
    """A rejected set leaves the base config as it was (nothing half-applied)."""
    base = config_from_params({'gains.kp': 0.8})
    with pytest.raises(ConfigError):
        config_from_params({'gains.kd': 0.5, 'gains.ki': -1.0}, base=base)
    assert base.gains.kp == 0.8
    assert base.gains.kd == SPECS['gains.kd'].default


def test_live_change_names_split_live_and_read_only() -> None:
    """Live and read-only changes are told apart."""
    a = default_config()
    b = config_from_params({'gains.kp': 1.5, 'steering.max_angle': 0.4}, base=a)
    live, fixed = live_change_names(a, b)
    assert live == {'gains.kp'}
    assert fixed == {'steering.max_angle'}


def test_params_file_sections_and_spellings(tmp_path: Path) -> None:
    """Wildcard, node, namespaced sections and nested/dotted names are all understood."""
    path = tmp_path / 'p.yaml'
    path.write_text(
        '/**:\n  ros__parameters:\n    use_sim_time: true\n    gains.kp: 1.1\n'
        '    lookahead: 2.0\n'
        '/robot1/corridor_pid:\n  ros__parameters:\n    gains:\n      kd: 0.4\n'
        '    lookahead: 1.5\n    course:\n      points: [0.0, 0.0, 5.0, 0.0, 9.0, 3.0]\n')
    cfg = load_params_file(path)
    assert cfg.gains.kp == 1.1
    assert cfg.gains.kd == 0.4
    assert cfg.lookahead == 1.5  # the node's own section wins over the wildcard
    assert cfg.course.xy() == [(0.0, 0.0), (5.0, 0.0), (9.0, 3.0)]


@pytest.mark.parametrize(('text', 'match'), [
    ('corridor_pid: [1, 2', 'not valid YAML'),
    ('other_node:\n  ros__parameters:\n    a: 1.0\n', 'no .corridor_pid'),
    ('corridor_pid:\n  ros__parameters:\n    gains:\n      kp: 2\n', r'gains\.kp: .*write 2\.0'),
    ('corridor_pid:\n  ros__parameters:\n    gains.kp: 1.0\n    gains:\n      kp: 1.0\n',
     r'gains\.kp is given twice'),
    ('- 1\n- 2\n', 'mapping of node names'),
])
def test_bad_params_files_give_one_line_errors(tmp_path: Path, text: str, match: str) -> None:
    """A malformed params file is refused with a one-line reason that names the file."""
    path = tmp_path / 'bad.yaml'
    path.write_text(text)
    with pytest.raises(ConfigError, match=match) as info:
        load_params_file(path)
    assert '\n' not in str(info.value)
    assert str(path) in str(info.value)


def test_missing_file_is_a_config_error(tmp_path: Path) -> None:
    """A missing file is reported, not raised as OSError."""
    with pytest.raises(ConfigError, match='cannot read params file'):
        load_params_file(tmp_path / 'nope.yaml')


def test_written_file_round_trips(tmp_path: Path) -> None:
    """A written params file loads back to the same config, floats keep their point."""
    cfg = config_from_params({'gains.kp': 2.0, 'gains.ki': 0.05, 'target_offset': -0.3,
                              'course.points': [0.0, 0.0, 10.0, 1.0], 'pose_frame': 'map',
                              'integral.method': 'conditional'})
    path = tmp_path / 'out.yaml'
    write_params_file(path, cfg, header='written by a test')
    text = path.read_text()
    assert 'kp: 2.0' in text and 'reference_speed: 0.0' in text
    assert load_params_file(path) == cfg
    assert params_from_file(path)['gains.kp'] == 2.0
    assert params_yaml(cfg).startswith('corridor_pid:\n  ros__parameters:\n')
