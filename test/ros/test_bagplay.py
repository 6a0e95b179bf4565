# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""A recorded bag played live through the node agrees with its offline replay.

A closed-loop run of the core and a kinematic bicycle (with a localization dropout that
trips the watchdog) is written as a bag with rosbags, replayed offline through the core
(:func:`corridor_pid.replay.report.replay_bag`) and played through a real node process under
sim time (:func:`corridor_pid.ros.bagplay.play_bag`). The two command streams must agree
pose for pose:

* the node computes a command for exactly the poses the offline replay does;
* the commands are equal to 1e-9 (bit for bit but for the rounding of the clock to
  nanoseconds), through the watchdog stop and the recovery: the player's ``/clock`` visits
  every multiple of 25 ms, so the node's watchdog timer (75 ms) ticks where the offline
  replay ticks.
"""

from __future__ import annotations

from collections.abc import Iterator
from pathlib import Path
import sys

from corridor_pid.core.config import Config
from corridor_pid.core.paramsfile import write_params_file
from corridor_pid.replay.record import write_run_bag
from corridor_pid.replay.report import replay_bag
from corridor_pid.ros.bagplay import play_bag, Playback
from corridor_pid.ros.testing import NodeProcess, start_node
import numpy as np
import pytest

sys.path.insert(0, str(Path(__file__).parents[1] / 'replay'))
from replay_helpers import params, recorded_run, RecordedRun  # noqa: E402
from ros_helpers import node_env  # noqa: E402

pytestmark = pytest.mark.dds

GAP = (3.0, 4.5)  # localization dropout [s from the start], longer than the watchdog
CONFIG = params(start_enabled=True, pose_qos='reliable')


@pytest.fixture(scope='module')
def run() -> RecordedRun:
    """Return a 10 s run from 0.4 m left of centre with a 1.5 s dropout."""
    return recorded_run(CONFIG, duration=10.0, gap=GAP)


def _node(tmp_path: Path, config: Config, namespace: str,
          sim_time: bool = True) -> NodeProcess:
    values = dict(config.as_params())
    params_file = tmp_path / 'node.yaml'
    write_params_file(params_file, values, node_name=f'{namespace}/corridor_pid')
    return start_node(params_file, namespace=namespace, env=node_env(), log_dir=tmp_path,
                      ros_args=['-p', f'use_sim_time:={"true" if sim_time else "false"}'])


@pytest.fixture
def node_factory(tmp_path: Path) -> Iterator[list[NodeProcess]]:
    """Collect node processes started by a test and stop them (by PID) afterwards."""
    started: list[NodeProcess] = []
    yield started
    for proc in started:
        proc.stop()


def _assert_agree(live: Playback, bag: Path, config: Config, stamps: str = 'header') -> None:
    offline = replay_bag(bag, config, stamps=stamps).run
    mask = offline.computed & offline.pose_steps()
    index = offline.pose_index[mask]
    commanded = live.commanded()
    assert [p.bag_index for p in commanded] == index.tolist()
    assert live.clock_mismatches() == []
    steering = np.array([p.steering for p in commanded])
    speed = np.array([p.speed for p in commanded])
    np.testing.assert_allclose(steering, offline.steering[mask], rtol=0.0, atol=1e-9)
    np.testing.assert_allclose(speed, offline.speed[mask], rtol=0.0, atol=1e-9)
    # The steering_angle stream holds every computed command, in order.
    values = iter(live.steering_angle)
    assert all(any(v == s for v in values) for s in steering.tolist())


@pytest.mark.parametrize(('kind', 'storage'), [
    ('pose_stamped', 'sqlite3'), ('pose_stamped', 'mcap'),
    ('pose_with_covariance', 'sqlite3'), ('odometry', 'mcap'),
])
def test_live_play_agrees_with_offline_replay(tmp_path: Path, run: RecordedRun,
                                              node_factory: list[NodeProcess], kind: str,
                                              storage: str) -> None:
    """Under sim time the node's commands equal the offline replay's, pose for pose."""
    bag = tmp_path / 'bag'
    write_run_bag(bag, run.poses, pose_kind=kind, storage=storage, commands=run.commands)
    config = params(start_enabled=True, pose_qos='reliable', pose_type=kind)
    namespace = f'/play_{kind}_{storage}'
    proc = _node(tmp_path, config, namespace)
    node_factory.append(proc)
    live = play_bag(bag, namespace=namespace, clock_step=0.025, alive=proc.check_running)
    assert len(live.poses) == len(run.poses)
    assert live.primed >= 2
    _assert_agree(live, bag, config)
    # The node went through the same watchdog stop.
    assert 'tracking -> stopped' in proc.output()


def test_live_play_with_receive_stamps(tmp_path: Path, run: RecordedRun,
                                       node_factory: list[NodeProcess]) -> None:
    """stamps='receive' rewrites the header stamps as `replay --stamps receive` reads them."""
    bag = tmp_path / 'bag'
    write_run_bag(bag, run.poses)
    namespace = '/play_receive'
    proc = _node(tmp_path, CONFIG, namespace)
    node_factory.append(proc)
    live = play_bag(bag, namespace=namespace, stamps='receive', clock_step=0.025,
                    alive=proc.check_running)
    assert live.track.stamps == 'receive'
    assert [p.stamp for p in live.poses] == live.track.stamp.tolist()
    _assert_agree(live, bag, CONFIG, stamps='receive')


def test_recorded_pace_answers_every_pose(tmp_path: Path, run: RecordedRun,
                                          node_factory: list[NodeProcess]) -> None:
    """On the wall clock (no sim time) every pose of a short bag gets a command in order."""
    bag = tmp_path / 'bag'
    write_run_bag(bag, run.poses[:60])
    namespace = '/play_paced'
    proc = _node(tmp_path, CONFIG, namespace, sim_time=False)
    node_factory.append(proc)
    live = play_bag(bag, namespace=namespace, sim_time=False, rate=2.0,
                    alive=proc.check_running)
    assert [p.bag_index for p in live.commanded()] == list(range(60))
    times = [p.node_time for p in live.commanded()]
    assert all(a is not None and b is not None and a <= b for a, b in zip(times, times[1:]))
    assert all(p.clock is None for p in live.poses)
    # The node saw the poses move it right (y = 0.4 m left of centre).
    assert live.commanded()[-1].steering is not None and live.commanded()[-1].steering < 0.0
