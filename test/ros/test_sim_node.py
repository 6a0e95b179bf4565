# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""The simulated vehicle: its timeline (no DDS), then the node against the real controller."""

from __future__ import annotations

from collections.abc import Iterator
import contextlib
import dataclasses
import math
from pathlib import Path
import sys
from typing import Any

from corridor_pid.core.config import config_from_params, default_config
from corridor_pid.core.paramsfile import write_params_file
from corridor_pid.demo.world import EventKind, Phase, SimWorld, STATE_NAMES
from corridor_pid.ros import sim_node
from corridor_pid.ros.testing import (
    NodeProcess,
    Recorder,
    Spinner,
    start_node,
    wait_for_publishers,
    wait_for_service,
    wait_until,
)
from corridor_pid.sim.loop import controller_config, simulate
from corridor_pid.sim.scenario import Scenario, scenario_from_mapping
from diagnostic_msgs.msg import DiagnosticArray
from geometry_msgs.msg import PoseStamped
import numpy as np
import pytest
import rclpy
from rclpy.context import Context
from rclpy.node import Node
from std_msgs.msg import Float64MultiArray
from std_srvs.srv import SetBool, Trigger
import yaml

RATE = 50.0
DELAY = 0.02
CART: dict[str, Any] = {
    'vehicle': {'wheelbase': 0.9, 'steer_time_constant': 0.1, 'steer_delay': 0.05,
                'speed_time_constant': 0.2},
    'steering': {'max_angle': 0.5, 'max_rate': 1.0},
    'corridor_width': 2.4, 'start': {'y': 0.3, 'heading': 0.1},
    'course': {'points': [[0.0, 0.0], [6.0, 0.0], [12.0, 1.0], [30.0, 1.0]]},
    'speed': 0.8, 'duration': 6.0, 'pose_rate': RATE, 'pose_delay': DELAY,
    'pose_noise': {'position': 0.01, 'heading': 0.005, 'seed': 3},
}
"""An invented delivery cart leaving a corridor bay (test input, not a reference)."""

COL = {name: i for i, name in enumerate(STATE_NAMES)}


def cart(**changes: Any) -> Scenario:
    """Return the test cart with top-level changes."""
    return scenario_from_mapping({**CART, **changes}, 'test_cart')


# -- the timeline, without DDS ------------------------------------------------------------

def test_hold_comes_before_the_pose_of_the_same_instant() -> None:
    """A hold at a pose arrival time is returned first; then that pose; slots at 1/rate."""
    world = SimWorld(cart(), duration=0.2, holds=[0.1])
    events = []
    while (event := world.next_event()).kind is not EventKind.END:
        events.append(event)
    kinds = [(e.kind, round(e.time, 9)) for e in events]
    hold = kinds.index((EventKind.HOLD, 0.1))
    assert kinds[hold + 1] == (EventKind.POSE, 0.1)
    poses = [e for e in events if e.kind is EventKind.POSE]
    # Sample k taken at k/rate arrives DELAY later; the last one arriving by 0.2 s is k = 9.
    assert [e.slot for e in poses] == list(range(10))
    assert all(e.time == pytest.approx(e.slot / RATE + DELAY, abs=1e-12) for e in poses)
    assert all(e.sample is not None and e.sample.stamp == e.slot / RATE for e in poses)
    assert world.next_event().kind is EventKind.END
    assert world.time == pytest.approx(0.2)


def test_real_time_waits_for_each_sample_so_poses_keep_their_delay() -> None:
    """With sample events, every pose is due (next_time) exactly when it arrives.

    The real-time pace waits for next_time() and then takes the next event. Without the
    sample events, a pose whose arrival float lies an ulp past the next sample time (0.14 +
    0.02 vs 0.16) went out when that sample was taken, pose_delay early.
    """
    world = SimWorld(cart(), duration=6.0)
    poses = samples = 0
    while True:
        due = world.next_time()
        event = world.next_event(samples=True)
        if event.kind is EventKind.END:
            break
        assert event.time == due
        if event.kind is EventKind.SAMPLE:
            samples += 1
            assert event.time == event.slot / RATE
        else:
            poses += 1
            assert event.sample is not None
            assert event.time == pytest.approx(event.sample.stamp + DELAY, abs=1e-12)
    assert poses == round((6.0 - DELAY) * RATE) + 1 and samples >= poses


def test_blackout_loses_what_a_dropout_window_loses() -> None:
    """Blackout switched on at hold t0 and off at hold t1 = a scenario dropout [t0, t1)."""
    live = SimWorld(cart(), duration=2.0, holds=[1.0, 1.5])
    lost_live = []
    while (event := live.next_event()).kind is not EventKind.END:
        if event.kind is EventKind.HOLD:
            live.blackout = event.time == 1.0
        elif event.sample is None:
            lost_live.append(event.slot)
    scripted = SimWorld(cart(dropouts=[[1.0, 1.5]]), duration=2.0)
    lost_scripted = []
    while (event := scripted.next_event()).kind is not EventKind.END:
        if event.sample is None:
            lost_scripted.append(event.slot)
    assert lost_live == lost_scripted == list(range(50, 75))
    assert live.blacked_out == 25


def test_constant_commands_drive_the_bicycle_on_its_circle() -> None:
    """Held steering and speed give the yaw rate v tan(delta) / L of the kinematic bicycle.

    Reference: Rajamani, Vehicle Dynamics and Control, 2nd ed. (2012), ch. 2.
    """
    world = SimWorld(cart(pose_noise={'position': 0.0, 'heading': 0.0}), duration=8.0)
    world.steer(0.2)
    world.drive(0.5)
    yaws, times = [], []
    while (event := world.next_event()).kind is not EventKind.END:
        if event.time >= 5.0:   # the actuator lags have settled
            times.append(world.time)
            yaws.append(world.plant.yaw)
    rate = np.polyfit(times, yaws, 1)[0]
    assert rate == pytest.approx(0.5 * math.tan(0.2) / 0.9, rel=1e-6)


def test_state_row_holds_the_truth_and_the_commands() -> None:
    """A state row is the true pose, its projection and the commands, in the documented order."""
    world = SimWorld(cart(), duration=1.0)
    world.steer(-0.1)
    world.drive(0.3)
    world.next_event()
    row = world.row(pose_stamp=0.0, node_time=0.02, phase=Phase.RUNNING)
    assert len(row) == len(STATE_NAMES)
    assert row[COL['y']] == pytest.approx(0.3, abs=1e-3)
    assert row[COL['lateral']] == pytest.approx(row[COL['y']])  # first segment on the x-axis
    assert (row[COL['steer_command']], row[COL['speed_command']]) == (-0.1, 0.3)
    assert (row[COL['pose_stamp']], row[COL['node_time']], row[COL['phase']]) == (0.0, 0.02, 0.0)


def test_bad_scenario_is_one_error_line(tmp_path: Path, capsys: pytest.CaptureFixture[str]
                                        ) -> None:
    """A missing scenario file or a bad option ends with one ERROR line, before ROS starts."""
    assert sim_node.main([str(tmp_path / 'missing.yaml')]) == 1
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and err[0].startswith('ERROR: ') and 'missing.yaml' in err[0]
    scenario_file = tmp_path / 'cart.yaml'
    scenario_file.write_text(yaml.safe_dump(CART), encoding='utf-8')
    assert sim_node.main([str(scenario_file), '--pace', 'realtime', '--hold', '2.0']) == 2
    assert '--hold' in capsys.readouterr().err
    assert sim_node.main([str(scenario_file), '--duration', 'nan']) == 2
    assert sim_node.main([str(scenario_file), '--pose-readers', '-1']) == 2


def test_help_carries_the_safety_cautions(capsys: pytest.CaptureFixture[str]) -> None:
    """--help names the paces and ends with the cautions about real vehicles."""
    assert sim_node.main(['--help']) == 0
    text = capsys.readouterr().out
    assert '--pace {realtime,fast}' in text and '~/resume' in text
    assert 'emergency stop' in text and 'not a safety-rated function' in text


# -- the node with the real controller ----------------------------------------------------

class Rig:
    """The controller and the simulated vehicle as processes, and a test node listening."""

    def __init__(self, folder: Path, env: dict[str, str], pace: str, duration: float,
                 holds: tuple[float, ...] = ()) -> None:
        """Start both processes in ``folder``'s logs and wait until they are discovered."""
        self.scenario = cart()
        scenario_file = folder / 'cart.yaml'
        scenario_file.write_text(yaml.safe_dump(CART), encoding='utf-8')
        self.config = config_from_params(
            {'pose_qos': 'reliable', 'start_enabled': True},
            base=controller_config(self.scenario, default_config()))
        params = folder / 'params.yaml'
        write_params_file(params, self.config)
        fast = pace == 'fast'
        self.procs: list[NodeProcess] = []
        self.controller = start_node(
            params, ros_args=['-p', f'use_sim_time:={str(fast).lower()}'], env=env,
            log_dir=folder)
        self.procs.append(self.controller)
        command = [sys.executable, '-m', 'corridor_pid.ros.sim_node', str(scenario_file),
                   '--pace', pace, '--duration', repr(duration), '--pose-readers', '2']
        for t in holds:
            command += ['--hold', repr(t)]
        self.sim = start_node(command=command, env=env, log_dir=folder)
        self.procs.append(self.sim)
        self.context = Context()
        rclpy.init(context=self.context)
        self.node = Node('sim_node_test', context=self.context)
        self.rows = Recorder(self.node, Float64MultiArray, '/corridor_pid_sim/state')
        self.poses = Recorder(self.node, PoseStamped, '/pose')
        self.diag = Recorder(self.node, DiagnosticArray, '/diagnostics')
        self.resume_client = self.node.create_client(Trigger, '/corridor_pid_sim/resume')
        self.blackout_client = self.node.create_client(SetBool, '/corridor_pid_sim/blackout')
        self.spinner = Spinner(self.node)
        for rec in (self.rows, self.poses, self.diag):
            wait_for_publishers(rec.subscription, process=self.sim)
        wait_for_service(self.resume_client, process=self.sim)
        wait_for_service(self.blackout_client, process=self.sim)

    def call(self, client: Any, request: Any) -> Any:
        """Call a service and wait for the response."""
        future = client.call_async(request)
        wait_until(future.done, f'response of {client.srv_name}', process=self.sim)
        return future.result()

    def resume(self) -> None:
        """Let the vehicle go on from its hold."""
        assert self.call(self.resume_client, Trigger.Request()).success

    def wait_row(self, phase: Phase, t: float | None = None) -> None:
        """Wait for a state row in ``phase`` (at simulated time ``t``)."""
        def seen(rows: list[Any]) -> bool:
            return any(r.data[COL['phase']] == phase
                       and (t is None or abs(r.data[COL['time']] - t) < 1e-9) for r in rows)
        self.rows.wait_for(seen, f'a {phase.name} row at {t}', timeout=120.0,
                           process=self.sim)

    def run_through(self) -> None:
        """Resume from the start hold and wait for the end of the run."""
        self.wait_row(Phase.HELD, 0.0)
        self.resume()
        self.wait_row(Phase.FINISHED)

    def stamps_ns(self) -> np.ndarray:
        """Return the header stamps [ns] of the poses received."""
        return np.array([s.header.stamp.sec * 1_000_000_000 + s.header.stamp.nanosec
                         for s in self.poses.snapshot()], dtype=np.int64)

    def running_rows(self) -> np.ndarray:
        """Return the pose-slot rows received, as an array."""
        data = [list(r.data) for r in self.rows.snapshot()]
        return np.array([r for r in data if r[COL['phase']] == Phase.RUNNING])

    def states(self) -> list[str]:
        """Return the controller states in the order /diagnostics reported them."""
        out: list[str] = []
        for msg in self.diag.snapshot():
            for status in msg.status:
                for kv in status.values:
                    if kv.key == 'state' and (not out or out[-1] != kv.value):
                        out.append(kv.value)
        return out

    def close(self) -> None:
        """Stop the test node and both processes (by PID: SIGINT, then SIGTERM)."""
        self.spinner.close()
        self.node.destroy_node()
        rclpy.try_shutdown(context=self.context)
        for proc in reversed(self.procs):
            proc.stop()


@contextlib.contextmanager
def rig(folder: Path, env: dict[str, str], pace: str, duration: float,
        holds: tuple[float, ...] = ()) -> Iterator[Rig]:
    """Run a :class:`Rig` for the block."""
    r = Rig(folder, env, pace, duration, holds)
    try:
        yield r
    finally:
        r.close()


@pytest.mark.dds
def test_fast_pace_runs_in_lock_step_with_the_controller(
        tmp_path: Path, dds_env: dict[str, str]) -> None:
    """Every pose is answered at its own instant, so the run equals the offline closed loop.

    The offline loop (corridor_pid.sim.loop) steps the same core at the same instants; the
    node over DDS must reproduce its true path to float precision of the stamps.
    """
    duration = 4.0
    with rig(tmp_path, dds_env, 'fast', duration) as r:
        r.run_through()
        rows = r.running_rows()
        stamps = r.stamps_ns() * 1e-9
        states = r.states()
    assert states[-1] == 'tracking' and 'stopped' not in states
    slots = int(round((duration - DELAY) * RATE)) + 1
    assert len(rows) == slots == len(stamps)
    assert np.allclose(np.diff(stamps), 1.0 / RATE, atol=1e-9)
    # Lock-step: each pose answered on a node clock equal to its arrival instant.
    assert np.all(np.isfinite(rows[:, COL['node_time']]))
    assert np.allclose(rows[:, COL['node_time']], rows[:, COL['time']], atol=1e-9)
    offline = simulate(dataclasses.replace(r.scenario, duration=duration), r.config)
    trace = offline.trace
    pick = trace['t'] > 0.0
    assert np.allclose(trace['t'][pick], rows[:, COL['time']], atol=1e-12)
    assert np.max(np.abs(trace['lateral'][pick] - rows[:, COL['lateral']])) < 1e-6
    assert abs(rows[-1, COL['lateral']]) < abs(CART['start']['y'])   # it did steer back


@pytest.mark.dds
def test_blackout_service_silences_the_sensor_and_the_watchdog_stops(
        tmp_path: Path, dds_env: dict[str, str]) -> None:
    """Blackout on at a hold, off at the next: no pose stamped in between; stop, then track."""
    with rig(tmp_path, dds_env, 'fast', 5.0, holds=(2.0, 3.0)) as r:
        r.wait_row(Phase.HELD, 0.0)
        r.resume()
        r.wait_row(Phase.HELD, 2.0)
        reply = r.call(r.blackout_client, SetBool.Request(data=True))
        assert reply.success and 'blackout on at t = 2 s' in reply.message
        r.resume()
        r.wait_row(Phase.HELD, 3.0)
        assert r.call(r.blackout_client, SetBool.Request(data=False)).success
        r.resume()
        r.wait_row(Phase.FINISHED)
        stamps = r.stamps_ns() * 1e-9
        rows = r.running_rows()
        states = r.states()
    assert not np.any((stamps >= 2.0 - 1e-9) & (stamps < 3.0 - 1e-9))
    assert np.any(stamps >= 3.0 - 1e-9)
    lost = ~np.isfinite(rows[:, COL['pose_stamp']])
    assert int(lost.sum()) == int(round(1.0 * RATE))
    assert states[-3:] == ['tracking', 'stopped', 'tracking']
    # The vehicle slowed down while the controller held it stopped.
    during = (rows[:, COL['time']] > 2.8) & (rows[:, COL['time']] < 3.0)
    before = (rows[:, COL['time']] > 1.8) & (rows[:, COL['time']] < 2.0)
    assert rows[during, COL['speed']].max() < rows[before, COL['speed']].min()


@pytest.mark.dds
def test_realtime_pace_sends_every_pose_at_the_pose_rate(
        tmp_path: Path, dds_env: dict[str, str]) -> None:
    """On the wall clock: one pose per slot, stamps 1/rate apart, the vehicle moves."""
    duration = 2.0
    with rig(tmp_path, dds_env, 'realtime', duration) as r:
        r.run_through()
        rows = r.running_rows()
        stamps = r.stamps_ns()
    slots = int(round((duration - DELAY) * RATE)) + 1
    assert len(rows) == len(stamps) == slots
    # Stamps are the instants the samples were taken: 20 ms apart to the nanosecond.
    assert np.all(np.abs(np.diff(stamps) - 20_000_000) <= 1)
    assert np.allclose(rows[:, COL['pose_stamp']], stamps * 1e-9, atol=1e-6)
    assert rows[-1, COL['x']] > rows[0, COL['x']] + 0.1
