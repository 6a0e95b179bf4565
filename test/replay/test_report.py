# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Replaying a recorded run: same params reproduce the commands, others diverge, metrics."""

from __future__ import annotations

from pathlib import Path

from corridor_pid.replay.bag import POSE_TYPES, STORAGES
from corridor_pid.replay.record import write_run_bag
from corridor_pid.replay.report import replay_bag
from corridor_pid.sim.metrics import metrics_from
import numpy as np
import pytest
from replay_helpers import params, recorded_run, RecordedRun

CONFIG = params()
"""The params the run was recorded with (the built-in defaults)."""


@pytest.fixture(scope='module')
def run() -> RecordedRun:
    """Return a 12 s run from 0.4 m left of centre with a 1.5 s localization dropout."""
    return recorded_run(CONFIG, gap=(5.0, 6.5))


def _bag(tmp_path: Path, run: RecordedRun, kind: str = 'pose_stamped',
         storage: str = 'sqlite3', **options: object) -> Path:
    path = tmp_path / f'{kind}-{storage}'
    write_run_bag(path, run.poses, pose_kind=kind, storage=storage, commands=run.commands,
                  wheelbase=CONFIG.vehicle.wheelbase, **options)  # type: ignore[arg-type]
    return path


@pytest.mark.parametrize('storage', STORAGES)
@pytest.mark.parametrize('kind', sorted(POSE_TYPES))
def test_same_params_reproduce_the_recorded_commands(tmp_path: Path, run: RecordedRun,
                                                     kind: str, storage: str) -> None:
    """Replayed with the params it was recorded with, every recorded command comes back."""
    report = replay_bag(_bag(tmp_path, run, kind, storage), CONFIG)
    assert len(report.track) == len(run.poses)
    assert report.track.kind == kind
    channels = {d.channel: d for d in report.comparison}
    assert sorted(channels) == ['speed', 'steering', 'yaw_rate']
    for diff in channels.values():
        assert diff.compared == len(run.commands)
        assert diff.max_difference is not None and diff.max_difference < 1e-12
        assert diff.first_divergence_time is None
    # The replay computed a command for exactly the poses the recording did.
    computed = report.run.computed[report.run.pose_steps()]
    assert computed.tolist() == run.computed


def test_other_gains_diverge_after_the_start(tmp_path: Path, run: RecordedRun) -> None:
    """Twice the proportional gain departs from the recorded steering early on."""
    stiffer = params(gains__kp=1.2)
    report = replay_bag(_bag(tmp_path, run), stiffer)
    steering = next(d for d in report.comparison if d.channel == 'steering')
    assert steering.first_divergence_time is not None
    assert 0.0 <= steering.first_divergence_time < 1.0
    assert steering.max_difference is not None and steering.max_difference > 0.01
    assert steering.rms_difference is not None
    assert 0.0 < steering.rms_difference <= steering.max_difference


def test_dropout_trips_the_watchdog_once(tmp_path: Path, run: RecordedRun) -> None:
    """The 1.5 s dropout stops the replayed controller once; it recovers afterwards."""
    report = replay_bag(_bag(tmp_path, run), CONFIG)
    replay = report.run
    assert report.metrics.watchdog_stops == 1 == replay.watchdog_stops
    gap = (replay.time > report.track.time[0] + 5.4) & (replay.time < report.track.time[0] + 6.4)
    assert gap.any() and all(replay.state[i] == 'stopped' for i in np.flatnonzero(gap))
    # Only timer ticks step the controller inside the gap, and they ramp the speed down.
    assert (replay.pose_index[gap] == -1).all()
    assert np.all(np.diff(replay.speed[gap]) <= 0.0)
    assert replay.state[-1] == 'tracking'


def test_metrics_are_those_of_the_recorded_path(tmp_path: Path, run: RecordedRun) -> None:
    """On the x-axis course the lateral metrics are those of the recorded y and stamps."""
    report = replay_bag(_bag(tmp_path, run), CONFIG, corridor_width=2.0)
    y = np.array([p.y for p in run.poses])
    t = np.array([p.stamp_ns for p in run.poses]) * 1e-9
    direct = metrics_from(t, y, np.ones_like(t), report.run.state,
                          report.run.angle_saturated, report.run.rate_saturated,
                          report.run.computed, 2.0).as_dict()
    got = report.metrics.as_dict()
    for name in ('rms_lateral_error', 'max_lateral_error', 'final_lateral_error', 'overshoot',
                 'steering_saturated_fraction', 'steering_rate_saturated_fraction',
                 'watchdog_stops', 'diverged'):
        assert got[name] == pytest.approx(direct[name], rel=1e-9), name
    assert got['settling_time'] == pytest.approx(direct['settling_time'], abs=1e-6)
    assert got['diverged'] is False
    assert got['max_lateral_error'] == pytest.approx(0.4, abs=0.03)  # 0.4 m start + noise
    assert replay_bag(_bag(tmp_path / 'b', run), CONFIG).metrics.diverged is None


def test_mean_speed_is_the_rate_of_progress(tmp_path: Path) -> None:
    """Evenly sampled, the mean speed is the distance along the course over the time."""
    run = recorded_run(CONFIG, duration=8.0)
    report = replay_bag(_bag(tmp_path, run), CONFIG)
    path = run.poses[-1].x - run.poses[0].x
    span = (run.poses[-1].stamp_ns - run.poses[0].stamp_ns) * 1e-9
    assert report.metrics.mean_speed == pytest.approx(path / span, rel=0.01)


def test_odometry_speed_is_the_mean_speed(tmp_path: Path, run: RecordedRun) -> None:
    """With Odometry poses the vehicle speed is the recorded twist."""
    report = replay_bag(_bag(tmp_path, run, 'odometry'), CONFIG)
    speeds = np.array([p.speed for p in run.poses])
    assert report.metrics.mean_speed == pytest.approx(float(np.mean(np.abs(speeds))))


def test_receive_stamps_mode_uses_arrival_times(tmp_path: Path, run: RecordedRun) -> None:
    """With stamps='receive' the controller sees the receive times as stamps."""
    report = replay_bag(_bag(tmp_path, run), CONFIG, stamps='receive')
    np.testing.assert_allclose(report.track.stamp, report.track.time, rtol=0.0, atol=1e-6)
    assert report.track.stamps == 'receive'
    # The pose pipeline delay is constant, so the commands are the recorded ones to within
    # the rounding of the stamps (the D term sees the same intervals).
    steering = next(d for d in report.comparison if d.channel == 'steering')
    assert steering.max_difference is not None and steering.max_difference < 1e-6


def test_pose_topic_in_a_namespace_and_plain_twist(tmp_path: Path, run: RecordedRun) -> None:
    """/cart/pose is found alone; the commands next to it are compared; Twist is read."""
    bag = _bag(tmp_path, run, pose_topic='/cart/pose', cmd_vel='plain')
    report = replay_bag(bag, CONFIG)
    assert report.track.topic == '/cart/pose'
    assert {d.topic for d in report.comparison} == {
        '/cart/steering_angle', '/cart/target_speed', '/cart/cmd_vel'}
    assert all(d.max_difference is not None and d.max_difference < 1e-12
               for d in report.comparison)


def test_bag_without_commands_has_no_comparison(tmp_path: Path, run: RecordedRun) -> None:
    """A pose-only bag is scored; there is nothing to compare."""
    path = tmp_path / 'poses'
    write_run_bag(path, run.poses)
    report = replay_bag(path, CONFIG)
    assert report.comparison == []
    assert report.as_dict()['comparison'] == {}


def test_json_object_has_every_metric(tmp_path: Path, run: RecordedRun) -> None:
    """as_dict() holds the metric keys of DESIGN.md section 5 and the replay's own keys."""
    out = replay_bag(_bag(tmp_path, run), CONFIG).as_dict()
    for key in ('rms_lateral_error', 'max_lateral_error', 'final_lateral_error', 'overshoot',
                'settling_time', 'steering_saturated_fraction',
                'steering_rate_saturated_fraction', 'watchdog_stops', 'diverged',
                'mean_speed', 'poses', 'rejected_poses', 'pose_topic', 'pose_type',
                'stamps', 'duration', 'comparison', 'written'):
        assert key in out, key
    assert out['poses'] == len(run.poses)
    assert out['comparison']['steering']['compared'] == len(run.commands)
