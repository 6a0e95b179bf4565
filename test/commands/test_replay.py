# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""`corridor-pid replay`: summary, JSON, --write, --plot, and one-line errors."""

from __future__ import annotations

import json
from pathlib import Path
import sys

from corridor_pid.cli import main
from corridor_pid.core.config import config_from_params
from corridor_pid.core.paramsfile import write_params_file
from corridor_pid.replay.record import write_run_bag
import numpy as np
import pytest

sys.path.insert(0, str(Path(__file__).parents[1] / 'replay'))
from replay_helpers import recorded_run  # noqa: E402

METRICS = ('rms_lateral_error', 'max_lateral_error', 'final_lateral_error', 'overshoot',
           'settling_time', 'steering_saturated_fraction', 'steering_rate_saturated_fraction',
           'watchdog_stops', 'diverged', 'mean_speed')
"""The metric keys of DESIGN.md section 5."""


@pytest.fixture(scope='module')
def bag(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """Return an MCAP bag of a 10 s recorded run (default params) with a dropout."""
    run = recorded_run(config_from_params({}), duration=10.0, gap=(4.0, 5.0))
    path = tmp_path_factory.mktemp('bags') / 'run1'
    write_run_bag(path, run.poses, storage='mcap', commands=run.commands)
    return path


def test_summary_text(bag: Path, capsys: pytest.CaptureFixture[str]) -> None:
    """The readable summary names the topic, every metric and the comparison."""
    assert main(['replay', str(bag)]) == 0
    out, err = capsys.readouterr()
    assert err == ''
    assert '/pose (pose_stamped), 450 poses over 9.98 s' in out
    for name in METRICS:
        assert name in out
    assert 'watchdog_stops                     1' in out
    assert 'diverged                           n/a (no --corridor-width)' in out
    assert '/steering_angle' in out and 'above 0.01 rad: never' in out


def test_json_with_other_params_and_width(bag: Path, tmp_path: Path,
                                          capsys: pytest.CaptureFixture[str]) -> None:
    """--json prints one object with every metric; other gains show a divergence time."""
    params = tmp_path / 'stiff.yaml'
    write_params_file(params, config_from_params({'gains.kp': 1.5}))
    assert main(['replay', str(bag), '--params', str(params), '--json',
                 '--corridor-width', '2.4']) == 0
    out, _ = capsys.readouterr()
    data = json.loads(out)
    for name in METRICS:
        assert name in data
    assert data['diverged'] is False
    assert data['pose_topic'] == '/pose' and data['poses'] == 450
    steering = data['comparison']['steering']
    assert steering['first_divergence_time'] is not None
    assert steering['max_difference'] > steering['tolerance']


def test_write_and_plot(bag: Path, tmp_path: Path,
                        capsys: pytest.CaptureFixture[str]) -> None:
    """--write makes a new bag with the replay topics; --plot a PNG."""
    out_bag = tmp_path / 'replayed'
    png = tmp_path / 'replay.png'
    assert main(['replay', str(bag), '--write', str(out_bag), '--plot', str(png)]) == 0
    out, _ = capsys.readouterr()
    assert f'wrote {out_bag} (original topics plus /replay/steering_angle' in out
    assert png.read_bytes()[:8] == b'\x89PNG\r\n\x1a\n'
    assert (out_bag / 'metadata.yaml').is_file()
    # The written bag replays in its turn (and keeps one set of /replay topics).
    assert main(['replay', str(out_bag), '--json']) == 0
    assert json.loads(capsys.readouterr().out)['comparison']['steering']['compared'] > 0


@pytest.mark.parametrize(('extra', 'message'), [
    (['--pose-topic', '/odom'], "pose topic '/odom' is not in the bag; pose topics: /pose"),
    (['--pose-type', 'odometry'], "has type 'geometry_msgs/msg/PoseStamped', not"),
    (['--params', 'missing.yaml'], 'missing.yaml'),
    (['--follow-recorded-sets'], '--follow-recorded-sets: the bag holds no /parameter_events'),
])
def test_bad_input_is_one_line(bag: Path, extra: list[str], message: str,
                               capsys: pytest.CaptureFixture[str]) -> None:
    """User mistakes: exit 1, one 'ERROR:' line naming the problem, no traceback."""
    assert main(['replay', str(bag), *extra]) == 1
    out, err = capsys.readouterr()
    assert out == ''
    assert err.startswith('ERROR: ') and err.count('\n') == 1
    assert message in err


def test_missing_and_corrupt_bags(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    """A missing bag and a bag with a broken storage file: one line each."""
    assert main(['replay', str(tmp_path / 'nope')]) == 1
    assert 'no such bag' in capsys.readouterr().err
    broken = tmp_path / 'broken'
    write_run_bag(broken, recorded_run(config_from_params({}), duration=2.0).poses)
    next(broken.glob('*.db3')).write_bytes(b'not a database' * 100)
    assert main(['replay', str(broken)]) == 1
    err = capsys.readouterr().err
    assert err.startswith('ERROR: ') and err.count('\n') == 1 and 'cannot' in err


def test_existing_write_target_is_refused_before_reading(
        bag: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    """--write onto an existing folder: refused, the folder untouched."""
    target = tmp_path / 'exists'
    target.mkdir()
    assert main(['replay', str(bag), '--write', str(target)]) == 1
    assert 'exists already' in capsys.readouterr().err
    assert list(target.iterdir()) == []


def test_receive_stamps_flag(bag: Path, capsys: pytest.CaptureFixture[str]) -> None:
    """--stamps receive (alias --time-source) reaches the replay."""
    for flag in ('--stamps', '--time-source'):
        assert main(['replay', str(bag), flag, 'receive', '--json']) == 0
        assert json.loads(capsys.readouterr().out)['stamps'] == 'receive'


def test_missing_rosbags_names_the_extra(bag: Path, monkeypatch: pytest.MonkeyPatch,
                                         capsys: pytest.CaptureFixture[str]) -> None:
    """Without rosbags installed: one line naming it and the extra to install."""
    monkeypatch.setitem(sys.modules, 'rosbags', None)  # what Python does for a missing module
    assert main(['replay', str(bag)]) == 1
    err = capsys.readouterr().err
    assert err.count('\n') == 1
    assert "'rosbags' is not installed" in err and 'corridor_pid[offline]' in err


def test_follow_recorded_sets_prints_what_it_applied(tmp_path: Path,
                                                     capsys: pytest.CaptureFixture[str]
                                                     ) -> None:
    """--follow-recorded-sets [NODE]: the sets applied in the text and in the JSON."""
    from rosbags.typesys import get_typestore, Stores

    types = get_typestore(Stores.ROS2_JAZZY).types
    run = recorded_run(config_from_params({}), duration=4.0)
    at = run.poses[100].receive_ns
    value = types['rcl_interfaces/msg/ParameterValue'](
        type=3, bool_value=False, integer_value=0, double_value=1.1, string_value='',
        byte_array_value=np.zeros(0, np.uint8), bool_array_value=np.zeros(0, bool),
        integer_array_value=np.zeros(0, np.int64), double_array_value=np.zeros(0),
        string_array_value=[])
    event = types['rcl_interfaces/msg/ParameterEvent'](
        stamp=types['builtin_interfaces/msg/Time'](sec=at // 10**9, nanosec=at % 10**9),
        node='/cart/corridor_pid', new_parameters=[], deleted_parameters=[],
        changed_parameters=[types['rcl_interfaces/msg/Parameter'](name='gains.kp',
                                                                  value=value)])
    bag = tmp_path / 'retuned'
    write_run_bag(bag, run.poses, commands=run.commands,
                  others=[(at, '/parameter_events', event)])
    assert main(['replay', str(bag), '--follow-recorded-sets']) == 0
    out = capsys.readouterr().out
    assert 'followed 1 recorded parameter set(s) of /cart/corridor_pid:' in out
    assert '2.000 s  gains.kp=1.1' in out
    assert main(['replay', str(bag), '--follow-recorded-sets', '--controller-node',
                 'cart/corridor_pid', '--json']) == 0
    data = json.loads(capsys.readouterr().out)
    assert data['recorded_sets'] == {'node': '/cart/corridor_pid', 'applied': [
        {'time': pytest.approx(2.0), 'values': {'gains.kp': 1.1}}]}
    assert data['ticks'] == 'period'
    assert main(['replay', str(bag), '--json']) == 0
    assert json.loads(capsys.readouterr().out)['recorded_sets'] is None
    assert main(['replay', str(bag), '--controller-node', 'corridor_pid']) == 2
    assert capsys.readouterr().err == (
        'ERROR: --controller-node: only with --follow-recorded-sets\n')
