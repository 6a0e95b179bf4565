# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Following recorded parameter sets: /parameter_events in a bag written with rosbags.

The events are ``rcl_interfaces/msg/ParameterEvent`` messages built from rosbags' ROS 2
Jazzy type store (the reference definition of the message), as a node publishes them after
an accepted set. The reference run is the controller core stepped by hand on the same
poses, retuned between the same two poses through the same validation path.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

from corridor_pid.core.config import config_from_params
from corridor_pid.core.controller import Controller, PoseSample
from corridor_pid.core.errors import ReplayError
from corridor_pid.replay.record import write_run_bag
from corridor_pid.replay.report import replay_bag
from corridor_pid.replay.sets import parameter_value
import numpy as np
import pytest
from replay_helpers import params, recorded_run, RecordedRun
from rosbags.typesys import get_typestore, Stores

CONFIG = params()
STORE = get_typestore(Stores.ROS2_JAZZY)
T = STORE.types
RETUNE = {'gains.kp': 1.3, 'lookahead': 1.6}
AT = 150
"""Index of the first pose after the retune."""

# rcl_interfaces/msg/ParameterType constants (ROS 2 rcl_interfaces, ParameterType.msg).
BOOL, INTEGER, DOUBLE, STRING = 1, 2, 3, 4
BYTE_ARRAY, BOOL_ARRAY, INTEGER_ARRAY, DOUBLE_ARRAY, STRING_ARRAY = 5, 6, 7, 8, 9


@pytest.fixture(scope='module')
def run() -> RecordedRun:
    """Return an 8 s run from 0.4 m left of centre, no dropout."""
    return recorded_run(CONFIG, duration=8.0)


def _value(value: object) -> Any:
    """Return the rosbags ParameterValue of a Python value."""
    fields: dict[str, Any] = {
        'type': 0, 'bool_value': False, 'integer_value': 0, 'double_value': 0.0,
        'string_value': '', 'byte_array_value': np.zeros(0, np.uint8),
        'bool_array_value': np.zeros(0, bool), 'integer_array_value': np.zeros(0, np.int64),
        'double_array_value': np.zeros(0, np.float64), 'string_array_value': []}
    if isinstance(value, bool):
        fields.update(type=BOOL, bool_value=value)
    elif isinstance(value, int):
        fields.update(type=INTEGER, integer_value=value)
    elif isinstance(value, float):
        fields.update(type=DOUBLE, double_value=value)
    elif isinstance(value, str):
        fields.update(type=STRING, string_value=value)
    elif isinstance(value, tuple):
        fields.update(type=DOUBLE_ARRAY, double_array_value=np.asarray(value, np.float64))
    return T['rcl_interfaces/msg/ParameterValue'](**fields)


def _event(ns: int, node: str, changed: dict[str, object]) -> Any:
    """Return the ParameterEvent a node publishes after accepting ``changed`` at ``ns``."""
    return T['rcl_interfaces/msg/ParameterEvent'](
        stamp=T['builtin_interfaces/msg/Time'](sec=ns // 1_000_000_000,
                                               nanosec=ns % 1_000_000_000),
        node=node, new_parameters=[],
        changed_parameters=[T['rcl_interfaces/msg/Parameter'](name=k, value=_value(v))
                            for k, v in changed.items()],
        deleted_parameters=[])


def _bag(tmp_path: Path, run: RecordedRun, events: list[tuple[int, str, dict[str, object]]],
         name: str = 'bag') -> Path:
    path = tmp_path / name
    write_run_bag(path, run.poses, commands=run.commands, wheelbase=CONFIG.vehicle.wheelbase,
                  others=[(ns, '/parameter_events', _event(ns, node, changed))
                          for ns, node, changed in events])
    return path


def _by_hand(run: RecordedRun, retune_before: int | None, changes: dict[str, object]
             ) -> tuple[list[float], list[float]]:
    """Return (steering, speed) of every pose, the core stepped by hand on the poses."""
    controller = Controller(CONFIG, enabled=True)
    steering, speed = [], []
    for i, pose in enumerate(run.poses):
        t = pose.receive_ns * 1e-9
        if i == retune_before:
            controller.retune(config_from_params(changes, base=controller.config), t)
        result = controller.step(PoseSample(
            (pose.stamp_ns // 1_000_000_000) + (pose.stamp_ns % 1_000_000_000) * 1e-9,
            pose.x, pose.y, pose.yaw, pose.frame_id), t)
        steering.append(result.steering)
        speed.append(result.speed)
    return steering, speed


def _pose_commands(bag: Path, **options: Any) -> tuple[list[float], list[float]]:
    report = replay_bag(bag, CONFIG, **options)
    mask = report.run.pose_steps()
    return report.run.steering[mask].tolist(), report.run.speed[mask].tolist()


def test_followed_set_applies_between_the_poses_it_fell_between(tmp_path: Path,
                                                                 run: RecordedRun) -> None:
    """A set recorded 5 ms before pose 150 retunes the core just before that pose.

    Every pose command equals the hand-driven core's to the bit; events of other nodes and
    of parameters that are not the controller's change nothing.
    """
    at_ns = run.poses[AT].receive_ns - 5_000_000
    bag = _bag(tmp_path, run, [
        (run.poses[10].receive_ns, '/corridor_pid_sim', {'use_sim_time': True}),
        (run.poses[20].receive_ns, '/corridor_pid', {'use_sim_time': True}),
        (at_ns, '/corridor_pid', RETUNE)])
    followed = _pose_commands(bag, follow_sets=True)
    assert followed == _by_hand(run, AT, RETUNE)
    report = replay_bag(bag, CONFIG, follow_sets=True)
    assert report.followed == '/corridor_pid'
    assert [(s.time_ns, s.values) for s in report.run.sets] == [(at_ns, RETUNE)]
    sets = report.as_dict()['recorded_sets']
    assert sets == {'node': '/corridor_pid', 'applied': [
        {'time': pytest.approx((at_ns - run.poses[0].receive_ns) * 1e-9), 'values': RETUNE}]}
    # By default: these params only, as if nothing had been set.
    plain = _pose_commands(bag)
    assert plain == _by_hand(run, None, {})
    assert plain[0][AT + 5] != followed[0][AT + 5]
    assert replay_bag(bag, CONFIG).as_dict()['recorded_sets'] is None


def test_set_at_a_pose_time_comes_before_that_pose(tmp_path: Path, run: RecordedRun) -> None:
    """A set recorded at the very receive time of a pose applies before that pose."""
    bag = _bag(tmp_path, run, [(run.poses[AT].receive_ns, '/corridor_pid', RETUNE)])
    assert _pose_commands(bag, follow_sets=True) == _by_hand(run, AT, RETUNE)


def test_the_controller_node_is_found_or_named(tmp_path: Path, run: RecordedRun) -> None:
    """Two nodes change controller parameters: name one; a node not in the bag is refused."""
    other = {'gains.kp': 0.5}
    bag = _bag(tmp_path, run, [(run.poses[AT].receive_ns, '/corridor_pid', RETUNE),
                               (run.poses[AT].receive_ns, '/cart/corridor_pid', other)])
    with pytest.raises(ReplayError, match='several nodes .*/cart/corridor_pid, /corridor_pid'):
        replay_bag(bag, CONFIG, follow_sets=True)
    assert _pose_commands(bag, follow_sets=True, sets_node='corridor_pid') == _by_hand(
        run, AT, RETUNE)
    assert _pose_commands(bag, follow_sets=True, sets_node='/cart/corridor_pid') == _by_hand(
        run, AT, other)
    with pytest.raises(ReplayError, match=r"no parameter events of node '/truck'.*nodes: "):
        replay_bag(bag, CONFIG, follow_sets=True, sets_node='truck')


def test_following_needs_recorded_parameter_events(tmp_path: Path, run: RecordedRun) -> None:
    """No /parameter_events in the bag: following is refused with a reason; else fine."""
    bag = _bag(tmp_path, run, [])
    with pytest.raises(ReplayError, match='no /parameter_events'):
        replay_bag(bag, CONFIG, follow_sets=True)
    assert _pose_commands(bag) == _by_hand(run, None, {})


@pytest.mark.parametrize(('changes', 'message'), [
    ({'gains.kp': 2}, r'gains\.kp.*write 2\.0'),
    ({'gains.kd': -0.5}, r'gains\.kd'),
    ({'steering.max_angle': 0.7}, r'steering\.max_angle.*read-only'),
])
def test_a_set_these_params_refuse_stops_the_replay(tmp_path: Path, run: RecordedRun,
                                                    changes: dict[str, object],
                                                    message: str) -> None:
    """A recorded set the validation refuses: one error naming the key; nothing written."""
    bag = _bag(tmp_path, run, [(run.poses[AT].receive_ns, '/corridor_pid', changes)])
    out = tmp_path / 'out'
    with pytest.raises(ReplayError, match=f'at 3.000 s from the first pose.*{message}'):
        replay_bag(bag, CONFIG, follow_sets=True, write=out)
    assert not out.exists()


def test_parameter_values_come_back_as_the_validator_takes_them() -> None:
    """Each ParameterValue type as a Python value; double arrays as tuples of floats."""
    def value(kind: int, **fields: Any) -> Any:
        msg = _value(None)
        msg.type = kind
        for name, v in fields.items():
            setattr(msg, name, v)
        return msg

    assert parameter_value(_value(True)) is True
    assert parameter_value(_value(3)) == 3 and isinstance(parameter_value(_value(3)), int)
    assert parameter_value(_value(0.25)) == 0.25
    assert parameter_value(_value('tracking')) == 'tracking'
    assert parameter_value(_value((0.0, 1.5))) == (0.0, 1.5)
    assert parameter_value(value(BYTE_ARRAY, byte_array_value=np.array([1, 2], np.uint8))) == [
        1, 2]
    assert parameter_value(value(BOOL_ARRAY, bool_array_value=np.array([True]))) == [True]
    assert parameter_value(value(INTEGER_ARRAY, integer_array_value=np.array([4]))) == [4]
    assert parameter_value(value(STRING_ARRAY, string_array_value=['a'])) == ['a']
    assert parameter_value(_value(None)) is None
