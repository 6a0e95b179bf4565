# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Faults between real processes: floods, hostile poses, publisher restarts, clock resets.

The rules under test are the controller's (corridor_pid/core/controller.py, DESIGN §3):

* an accepted pose is finite, has a stamp strictly newer than the last accepted one and
  matches ``pose_frame``; any other pose is rejected, counted (``rejected_poses`` in
  /diagnostics) and otherwise ignored; a finite pose that makes the law overflow is rejected
  the same way;
* a stamp that jumps back by more than ``watchdog.timeout`` (clock reset, bag loop) resets
  the controller and enters ``waiting``; the next newer pose resumes tracking;
* no accepted pose for ``watchdog.timeout`` on the node clock -> ``stopped`` (speed ramps to
  0); ``watchdog.recovery_count`` accepted poses -> ``tracking`` with the integrator reset.

Every step waits for what it needs (discovery, the ``~/terms`` of a pose, a /diagnostics
status) and asserts on values and ordering, never on wall-clock timing.
"""

from __future__ import annotations

from collections.abc import Iterator
import itertools
import json
import math
import os
from pathlib import Path
import signal
import subprocess
import sys
import threading
import time
from typing import Any

from corridor_pid.benchmarks.procstat import MIB, rss_bytes
from corridor_pid.ros.loadgen import Tally
from corridor_pid.ros.testing import (
    Recorder,
    reliable_qos,
    Spinner,
    start_node,
    wait_for_node,
    wait_for_publishers,
    wait_until,
)
from diagnostic_msgs.msg import DiagnosticArray
import pytest
import rclpy
from rclpy.context import Context
from rclpy.node import Node
from ros_helpers import node_and_peer, node_env, Peer, seconds_of, terms_dict, write_params
from std_msgs.msg import Float64, Float64MultiArray

pytestmark = pytest.mark.dds

MAX_ANGLE = 0.5   # default steering.max_angle [rad]
MAX_RATE = 1.0    # default steering.max_rate [rad/s]
MAX_ACCEL = 0.5   # default speed.max_accel [m/s^2]
RECOVERY = 5      # default watchdog.recovery_count
DT = 0.01         # pose stamp spacing [s] (100 Hz)

_bases = itertools.count(2000.0, 1000.0)


def all_finite(peer: Peer) -> bool:
    """Return whether every command the peer received so far is finite."""
    values = [m.data for m in peer.steering.snapshot()]
    values += [m.data for m in peer.speed.snapshot()]
    for cmd in peer.cmd.snapshot():
        values += [cmd.twist.linear.x, cmd.twist.angular.z]
    return all(math.isfinite(v) for v in values)


def rejected(peer: Peer) -> int:
    """Return the node's rejected-pose count from a freshly received status."""
    return int(peer.wait_status(lambda v: True, 'a status')['rejected_poses'])


def wait_rejected(peer: Peer, count: int) -> dict[str, str]:
    """Wait for a status reporting ``count`` rejected poses; fail if it ever says more."""
    status = peer.wait_status(lambda v: int(v['rejected_poses']) >= count,
                              f'{count} rejected poses')
    assert int(status['rejected_poses']) == count
    return status


# -- hostile poses ------------------------------------------------------------------------

@pytest.fixture(scope='module')
def guarded(tmp_path_factory: pytest.TempPathFactory, ros_domain_id: int) -> Iterator[Peer]:
    """Run a node that checks the frame, with a watchdog long enough for slow steps."""
    values = {'start_enabled': True, 'pose_qos': 'reliable', 'pose_frame': 'map',
              'watchdog.timeout': 5.0, 'diagnostics.rate': 10.0, 'gains.ki': 0.1}
    with node_and_peer(tmp_path_factory.mktemp('faults'), '/faults', values) as peer:
        yield peer


def fresh(peer: Peer) -> float:
    """Start the controller over (disable, enable) and return a new stamp base [s]."""
    peer.enable(False)
    peer.wait_state('disabled')
    peer.enable(True)
    return next(_bases)


@pytest.mark.parametrize(('what', 'fields'), [
    ('x NaN', {'x': math.nan}),
    ('y +inf', {'y': math.inf}),
    ('x -inf', {'x': -math.inf}),
    ('yaw NaN', {'yaw': math.nan}),
    ('stamp equal to the last', {'stamp': 0.0}),
    ('stamp 1 ms back', {'stamp': -0.001}),
    ('wrong frame', {'frame': 'odom'}),
    ('no frame', {'frame': ''}),
    ('teleport to 1e308 m', {'y': 1e308}),
])
def test_hostile_pose_is_rejected_counted_and_never_published(
        guarded: Peer, what: str, fields: dict[str, Any]) -> None:
    """Each hostile pose gives no command, adds one to rejected_poses, tracking goes on."""
    peer = guarded
    base = fresh(peer)
    for k in range(3):
        last = peer.step(base + k * DT, k * DT, 0.1)
    count = rejected(peer)
    seen = len(peer.terms)
    stamp = last['stamp'] + fields.get('stamp', DT)
    x = fields.get('x', 3 * DT)
    y = fields.get('y', 0.1)
    peer.publish_pose(stamp, x, y, fields.get('yaw', 0.0), frame=fields.get('frame'))
    good = peer.step(base + 4 * DT, 4 * DT, 0.1)
    # The hostile pose computed nothing: the only new cycle is the good pose's.
    assert [m.data[0] for m in peer.terms.snapshot()[seen:]] == [good['stamp']], what
    status = wait_rejected(peer, count + 1)
    assert status['state'] == 'tracking'
    assert math.isfinite(good['steering']) and math.isfinite(good['unclamped'])
    assert all_finite(peer), what


def test_teleport_within_float_range_is_limited_not_rejected(guarded: Peer) -> None:
    """A finite 1 km jump is accepted: the command stays inside the angle and rate limits."""
    peer = guarded
    base = fresh(peer)
    before = [peer.step(base + k * DT, k * DT, 0.05) for k in range(3)][-1]
    count = rejected(peer)
    jump = peer.step(base + 3 * DT, 3 * DT, 1000.0)
    back = peer.step(base + 4 * DT, 4 * DT, 0.05)
    for a, b in ((before, jump), (jump, back)):
        assert abs(b['steering']) <= MAX_ANGLE
        assert abs(b['steering'] - a['steering']) <= MAX_RATE * (b['time'] - a['time']) + 1e-9
    assert jump['unclamped'] < -MAX_ANGLE       # far left of the centre: steer hard right
    assert wait_rejected(peer, count)['state'] == 'tracking'
    assert all_finite(peer)


@pytest.mark.parametrize('back', [0.0, 100.0])
def test_stamp_jump_back_beyond_timeout_resets_and_waits(guarded: Peer, back: float) -> None:
    """A zero stamp (or one 100 s back) resets to waiting; the next newer pose tracks afresh."""
    peer = guarded
    base = fresh(peer)
    terms = [peer.step(base + k * DT, k * DT, 0.3) for k in range(10)]
    assert terms[-1]['i'] != 0.0                 # the integrator holds something
    count = rejected(peer)
    reset_stamp = 0.0 if back == 0.0 else base - back
    peer.diag.clear()
    peer.publish_pose(reset_stamp, 10 * DT, 0.3)
    peer.wait_state('waiting')
    after = peer.step(reset_stamp + DT, 11 * DT, 0.3)
    assert after['i'] == 0.0 and after['blend'] == 0.0
    assert peer.wait_state('tracking')['state'] == 'tracking'
    # A reset is not a rejection.
    assert wait_rejected(peer, count)['state'] == 'tracking'
    assert all_finite(peer)


def test_stamp_far_in_the_future_then_normal_stamps(guarded: Peer) -> None:
    """A pose stamped a day ahead is accepted; the normal stream then resets once and goes on."""
    peer = guarded
    base = fresh(peer)
    for k in range(3):
        peer.step(base + k * DT, k * DT, 0.1)
    future = peer.step(base + 86400.0, 3 * DT, 0.1)
    assert math.isfinite(future['steering'])
    peer.diag.clear()
    peer.publish_pose(base + 4 * DT, 4 * DT, 0.1)      # 1 day back: reset, waiting
    peer.wait_state('waiting')
    resumed = peer.step(base + 5 * DT, 5 * DT, 0.1)
    assert resumed['i'] == 0.0
    assert peer.wait_state('tracking')['state'] == 'tracking'
    assert all_finite(peer)


# -- watchdog, restarts, bursts -----------------------------------------------------------

WATCHDOG_VALUES = {'start_enabled': True, 'pose_qos': 'reliable', 'diagnostics.rate': 10.0,
                   'gains.ki': 0.1}


def run_loadgen(topic: str, count: int, rate: float, stamp_start: float) -> dict[str, Any]:
    """Publish ``count`` cart poses from a process of its own; return its report.

    The publisher waits 0.5 s after it sees the node's subscription: the node's side of
    discovery may complete later, and poses sent before it did are lost.
    """
    out = subprocess.run(
        [sys.executable, '-m', 'corridor_pid.ros.loadgen', '--topic', topic,
         '--rate', str(rate), '--count', str(count), '--stamp-start', repr(stamp_start),
         '--settle', '0.5'],
        env=node_env(), capture_output=True, text=True, timeout=600,
        start_new_session=True, check=False)
    assert out.returncode == 0, out.stdout + out.stderr
    report: dict[str, Any] = json.loads(out.stdout.strip().splitlines()[-1])
    assert report['sent'] == count and report['acked']
    return report


def terms_in(peer: Peer, first: float, last: float) -> list[dict[str, float]]:
    """Return the ~/terms computed from poses stamped in [first, last]."""
    return [terms_dict(m) for m in peer.terms.snapshot()
            if first - 1e-7 <= m.data[0] <= last + 1e-7]


def states_seen(peer: Peer) -> list[str]:
    """Return the states of the received statuses, repeats collapsed, in arrival order."""
    out: list[str] = []
    for _, values in peer.statuses():
        if not out or out[-1] != values['state']:
            out.append(values['state'])
    return out


def test_publisher_restart_stops_then_recovers_with_a_fresh_integrator(
        tmp_path: Path, ros_domain_id: int) -> None:
    """Publisher gone -> stopped (watchdog); a new publisher -> tracking after 5 poses, I = 0."""
    with node_and_peer(tmp_path, '/restart', WATCHDOG_VALUES) as peer:
        fresh(peer)
        stops = int(peer.wait_status(lambda v: True, 'a status')['watchdog_stops'])
        first = run_loadgen('/restart/pose', 100, 100.0, 1000.0)
        # (A reliable stream on a busy machine may stall long enough for an extra stop and
        # recovery on the way: at least one stop, and the final state after the last pose.)
        peer.wait_status(
            lambda v: v['state'] == 'stopped' and float(v['speed']) == 0.0
            and int(v['watchdog_stops']) >= stops + 1
            and abs(float(v['last_pose_stamp']) - first['last_stamp']) < 1e-6,
            'stopped after the last pose, ramped to 0')
        before = terms_in(peer, first['first_stamp'], first['last_stamp'])
        assert before and before[-1]['stamp'] == pytest.approx(first['last_stamp'], abs=1e-6)
        assert any(t['i'] != 0.0 for t in before)
        peer.diag.clear()
        second = run_loadgen('/restart/pose', 50, 100.0, 2000.0)
        wait_until(lambda: bool(terms_in(peer, second['last_stamp'], second['last_stamp'])),
                   'the last pose of the new publisher', process=peer.proc)
        after = terms_in(peer, second['first_stamp'], second['last_stamp'])
        # At least recovery_count - 1 poses only count towards recovery (a new publisher's
        # very first samples may go before the node's side of discovery completes; the
        # exact count is checked in the burst test, on an established connection).
        assert after[0]['stamp'] >= second['first_stamp'] + (RECOVERY - 1) * DT - 1e-6
        assert after[0]['i'] == 0.0
        assert 'tracking' in states_seen(peer)
        assert all_finite(peer)


def test_restarted_publisher_with_a_reset_clock_waits_then_tracks(
        tmp_path: Path, ros_domain_id: int) -> None:
    """A new publisher whose stamps restart earlier: reset -> waiting -> tracking (no recovery)."""
    with node_and_peer(tmp_path, '/reclock', WATCHDOG_VALUES) as peer:
        fresh(peer)
        first = run_loadgen('/reclock/pose', 50, 100.0, 5000.0)
        peer.wait_status(lambda v: v['state'] == 'stopped' and abs(
            float(v['last_pose_stamp']) - first['last_stamp']) < 1e-6, 'stopped after the last')
        peer.diag.clear()
        second = run_loadgen('/reclock/pose', 20, 100.0, 50.0)
        wait_until(lambda: bool(terms_in(peer, second['last_stamp'], second['last_stamp'])),
                   'the last pose of the new publisher', process=peer.proc)
        after = terms_in(peer, second['first_stamp'], second['last_stamp'])
        # The first pose that arrives resets (it is not accepted); the next one tracks at
        # once, without the recovery poses a watchdog stop would ask for. (A node starved of
        # CPU may skip poses its queue no longer holds, so the later cycles are checked for
        # order and for ending at the last pose, not for one per stamp.)
        offsets = [round((t['stamp'] - second['first_stamp']) / DT) for t in after]
        assert 1 <= offsets[0] < RECOVERY - 1, offsets
        assert after[0]['i'] == 0.0
        stamps = [t['stamp'] for t in after]
        assert stamps == sorted(set(stamps))
        assert stamps[-1] == pytest.approx(second['last_stamp'], abs=1e-6)
        seen = states_seen(peer)
        assert 'waiting' in seen and seen.index('waiting') < len(seen) - 1 - seen[::-1].index(
            'tracking')


def test_burst_after_silence_recovers_within_the_limits(
        tmp_path: Path, ros_domain_id: int) -> None:
    """Silence -> stopped; 8 poses at once: 4 recover, then commands within rate limits."""
    with node_and_peer(tmp_path, '/burst', WATCHDOG_VALUES) as peer:
        fresh(peer)
        base = 3000.0
        for k in range(20):
            peer.step(base + k * DT, k * DT, 0.2)
        peer.wait_status(lambda v: v['state'] == 'stopped' and float(v['speed']) == 0.0
                         and float(v['steering']) == 0.0, 'stopped and at rest')
        peer.terms.clear()
        burst = [base + (30 + k) * DT for k in range(8)]
        for k, stamp in enumerate(burst):
            peer.publish_pose(stamp, (30 + k) * DT, 0.2)
        msgs = peer.terms.wait_for(lambda m: any(abs(x.data[0] - burst[-1]) < 1e-7 for x in m),
                                   'the last pose of the burst', process=peer.proc)
        got = [m.data[0] for m in msgs]
        assert got == pytest.approx(burst[RECOVERY - 1:], abs=1e-7)
        terms = [terms_dict(m) for m in msgs]
        assert terms[0]['i'] == 0.0
        # At rest when the burst came; the slew allowance of the first command counts from
        # a node time no earlier than the last resting command sent (cmd_vel stamps).
        rest = max(seconds_of(c.header.stamp) for c in peer.cmd.snapshot()
                   if seconds_of(c.header.stamp) < terms[0]['time'] - 1e-6)
        previous = (0.0, 0.0, rest)
        for t in terms:
            steer0, speed0, time0 = previous
            assert abs(t['steering'] - steer0) <= MAX_RATE * (t['time'] - time0) + 1e-9
            assert 0.0 <= t['speed'] - speed0 <= MAX_ACCEL * (t['time'] - time0) + 1e-9
            previous = (t['steering'], t['speed'], t['time'])
        assert all_finite(peer)


def seen_state(peer: Peer, state: str) -> dict[str, str]:
    """Wait for a status in ``state`` among those received since the last clear; return it.

    Under simulated time the periodic statuses wait for /clock, but every state change is
    reported at once, so nothing is cleared here.
    """
    found: list[dict[str, str]] = []

    def seen() -> bool:
        found[:] = [v for _, v in peer.statuses() if v['state'] == state][:1]
        return bool(found)

    wait_until(seen, f'state {state!r}', process=peer.proc)
    return found[0]


def test_clock_reset_under_sim_time(tmp_path: Path, ros_domain_id: int) -> None:
    """Bag loop: /clock and stamps jump back -> reset, waiting; then tracking and the watchdog."""
    values = {**WATCHDOG_VALUES, 'watchdog.timeout': 0.3}
    with node_and_peer(tmp_path, '/simclock', values, ros_args=['-p', 'use_sim_time:=true'],
                       sim_time=True) as peer:
        sim = 100.0
        peer.publish_clock(sim)
        # Start over; the status of each state change comes at once (the periodic ones
        # would wait for the simulated clock).
        peer.diag.clear()
        assert peer.enable(False).success
        wait_until(lambda: any(v['state'] == 'disabled' for _, v in peer.statuses()),
                   'state disabled', process=peer.proc)
        assert peer.enable(True).message == 'disabled -> waiting'
        stops = int(peer.statuses()[-1][1]['watchdog_stops'])
        terms = []
        for k in range(10):
            sim = 100.0 + k * DT
            peer.publish_clock(sim)
            terms.append(peer.step(sim, k * DT, 0.3))
        assert terms[-1]['time'] == pytest.approx(sim, abs=1e-6)   # the node runs on /clock
        assert terms[-1]['i'] != 0.0
        # The bag loops: the clock and the stamps start over at 0.5 s.
        peer.diag.clear()
        peer.publish_clock(0.5)
        peer.publish_pose(0.5, 0.0, 0.3)
        seen_state(peer, 'waiting')
        peer.publish_clock(0.51)
        again = peer.step(0.51, DT, 0.3)
        assert again['i'] == 0.0 and again['time'] == pytest.approx(0.51, abs=1e-6)
        seen_state(peer, 'tracking')
        # The watchdog still runs on the looped clock: no pose for > timeout -> stopped.
        peer.diag.clear()
        for k in range(1, 200):
            peer.publish_clock(0.51 + k * DT)
            if any(v['state'] == 'stopped' for _, v in peer.statuses()):
                break
            time.sleep(0.002)   # pacing of the simulated clock only, nothing is asserted on it
        status = seen_state(peer, 'stopped')
        assert int(status['watchdog_stops']) == stops + 1
        assert all_finite(peer)


# -- flood --------------------------------------------------------------------------------

FLOOD_RATE = 2000.0          # poses per second
FLOOD_SECONDS = 30.0
FLOOD_RSS_GROWTH = 8 * MIB
"""Stated bound on the node's resident-memory growth during the flood, from 5 s in to the
end [bytes]. Measured on the development machine: 0.0 MiB (69.6 MiB flat)."""


class FloodProbe:
    """A lean test node: counts commands, buckets ~/terms by pose stamp, keeps /diagnostics."""

    def __init__(self, ns: str, first_stamp: float, seconds: float, buckets: int) -> None:
        """Subscribe in a context of its own and start spinning."""
        self.context = Context()
        rclpy.init(context=self.context)
        self.node = Node('flood_probe', context=self.context)
        self.steering = Tally(self.node, Float64, f'{ns}/steering_angle')
        self.buckets = [0] * buckets
        self.last_stamp = -math.inf
        self._first, self._width = first_stamp, seconds / buckets
        self._lock = threading.Lock()
        self.terms = self.node.create_subscription(
            Float64MultiArray, f'{ns}/corridor_pid/terms', self._terms_callback,
            reliable_qos(1000))
        self.diag = Recorder(self.node, DiagnosticArray, '/diagnostics')
        self.spinner = Spinner(self.node)

    def _terms_callback(self, msg: Float64MultiArray) -> None:
        stamp = msg.data[0]
        index = min(len(self.buckets) - 1, max(0, int((stamp - self._first) / self._width)))
        with self._lock:
            self.buckets[index] += 1
            self.last_stamp = max(self.last_stamp, stamp)

    def close(self) -> None:
        """Stop spinning and shut the context down."""
        self.spinner.close()
        self.node.destroy_node()
        rclpy.try_shutdown(context=self.context)


@pytest.mark.slow
def test_pose_flood_2khz_30s(tmp_path: Path, ros_domain_id: int) -> None:
    """2 kHz of poses for 30 s: no crash, bounded memory, commands throughout, watchdog after."""
    ns = '/flood'
    params = write_params(tmp_path / 'flood.yaml', {
        'start_enabled': True, 'pose_qos': 'reliable', 'diagnostics.rate': 10.0})
    proc = start_node(params, namespace=ns, env=node_env(), log_dir=tmp_path)
    first_stamp = 10_000.0
    probe = FloodProbe(ns, first_stamp, FLOOD_SECONDS, 6)
    try:
        wait_for_node(probe.node, proc, ns)
        wait_for_publishers(probe.steering.subscription, process=proc)
        wait_for_publishers(probe.terms, process=proc)
        count = int(FLOOD_RATE * FLOOD_SECONDS)
        gen = subprocess.Popen(
            [sys.executable, '-m', 'corridor_pid.ros.loadgen', '--topic', f'{ns}/pose',
             '--rate', repr(FLOOD_RATE), '--count', str(count),
             '--stamp-start', repr(first_stamp)],
            env=node_env(), stdout=subprocess.PIPE, stderr=subprocess.STDOUT, text=True,
            start_new_session=True)
        rss: list[tuple[float, int]] = []
        try:
            started = time.monotonic()
            while gen.poll() is None:
                proc.check_running()
                rss.append((time.monotonic() - started, rss_bytes(proc.pid)))
                time.sleep(0.5)
            out, _ = gen.communicate()
        finally:
            if gen.poll() is None:
                os.kill(gen.pid, signal.SIGINT)
                gen.wait(30)
        assert gen.returncode == 0, out
        report = json.loads(out.strip().splitlines()[-1])
        assert report['sent'] == count
        # The node took the very last pose of the flood (reliable, keep-last queue).
        wait_until(lambda: abs(probe.last_stamp - report['last_stamp']) < 1e-6,
                   'the command of the last flood pose', process=proc)
        # Commands flowed all through: every sixth of the stream produced some.
        assert all(n > 0 for n in probe.buckets), probe.buckets
        assert probe.steering.count > 0 and probe.steering.non_finite == 0
        warm = [r for t, r in rss if t >= 5.0] or [rss[-1][1]]
        assert max(warm) - warm[0] <= FLOOD_RSS_GROWTH, (
            f'node RSS grew {(max(warm) - warm[0]) / MIB:.1f} MiB during the flood')
        # The watchdog still works: silence after the flood stops and ramps the vehicle down.
        probe.diag.clear()

        def stopped_at_rest() -> bool:
            for array in probe.diag.snapshot():
                for status in array.status:
                    values = {kv.key: kv.value for kv in status.values}
                    if (values.get('state') == 'stopped' and values.get('speed') == '0.0'
                            and values.get('watchdog_stops') == '1'):
                        return True
            return False

        wait_until(stopped_at_rest, 'stopped with speed 0 after the flood', process=proc)
        assert proc.stop() == 0
    finally:
        probe.close()
        proc.stop()
