# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""The watchdog over real DDS on the wall clock: stop on a stale pose stream, ramp, recovery.

Contract (DESIGN §3): no accepted pose for ``watchdog.timeout`` (node clock) -> ``stopped``,
speed ramps to 0 at ``speed.max_decel``; ``watchdog.recovery_count`` consecutive accepted
poses -> ``tracking``; a stamp jumping back by more than the timeout resets to ``waiting``.
Times are the node's own (cmd_vel stamps, ``~/terms`` time); the exact stop instant is
checked under sim time in test_node_sim_time.py.
"""

from __future__ import annotations

from collections.abc import Iterator
import itertools

import pytest
from ros_helpers import node_and_peer, Peer, seconds_of

pytestmark = pytest.mark.dds

NS = '/watchdog'
TIMEOUT = 0.5      # watchdog.timeout [s]
RECOVERY = 5       # watchdog.recovery_count
MAX_DECEL = 0.2    # speed.max_decel [m/s^2], low so the ramp spans several ticks
DT = 0.02
VALUES = {
    'start_enabled': True,
    'pose_qos': 'reliable',
    'watchdog.timeout': TIMEOUT,
    'watchdog.recovery_count': RECOVERY,
    'speed.max_decel': MAX_DECEL,
    'diagnostics.rate': 10.0,
}

_bases = itertools.count(1000.0, 1000.0)


@pytest.fixture(scope='module')
def peer(tmp_path_factory: pytest.TempPathFactory, ros_domain_id: int) -> Iterator[Peer]:
    """Run one node for the module and a DDS peer talking to it."""
    with node_and_peer(tmp_path_factory.mktemp('watchdog'), NS, VALUES) as p:
        yield p


def fresh(peer: Peer) -> float:
    """Restart the controller (disable, enable: waiting) and return a new stamp base [s]."""
    peer.enable(False)
    assert peer.enable(True).message == 'disabled -> waiting'
    return next(_bases)


def drive(peer: Peer, base: float, speed: float) -> tuple[int, dict[str, float]]:
    """Send poses (one per cycle) until the commanded speed reaches ``speed``."""
    k = 0
    terms = peer.step(base, 0.0, 0.05)
    while terms['speed'] < speed:
        k += 1
        terms = peer.step(base + k * DT, k * DT, 0.05)
    return k, terms


def test_stale_poses_stop_and_ramp_down_then_recover(peer: Peer) -> None:
    """Poses stop -> stopped, speed ramps to 0 at max_decel; 5 poses later -> tracking."""
    base = fresh(peer)
    k, last = drive(peer, base, 0.3)
    stops = int(peer.wait_status(lambda v: True, 'a status')['watchdog_stops'])
    peer.cmd.clear()
    peer.wait_state('stopped')
    cmds = peer.cmd.wait_for(lambda m: bool(m) and m[-1].twist.linear.x == 0.0,
                             'speed ramped to 0', process=peer.proc)
    ramp = [(seconds_of(c.header.stamp), c.twist.linear.x) for c in cmds]
    # Not before the timeout on the node clock since the last accepted pose.
    assert ramp[0][0] - last['time'] > TIMEOUT
    # From the last command sent (the last pose's) down to 0, never faster than max_decel.
    ramp.insert(0, (last['time'], last['speed']))
    assert len(ramp) >= 4
    for (t0, v0), (t1, v1) in zip(ramp, ramp[1:]):
        assert 0.0 <= v0 - v1 <= MAX_DECEL * (t1 - t0) + 1e-6
    status = peer.wait_status(lambda v: v['state'] == 'stopped', 'stopped status')
    assert int(status['watchdog_stops']) == stops + 1

    peer.terms.clear()
    for j in range(1, RECOVERY):
        peer.publish_pose(base + (k + j) * DT, (k + j) * DT, 0.05)
    resumed = peer.step(base + (k + RECOVERY) * DT, (k + RECOVERY) * DT, 0.05)
    assert [m.data[0] for m in peer.terms.snapshot()] == [resumed['stamp']]
    assert peer.wait_state('tracking')['watchdog_stops'] == str(stops + 1)


def test_backward_stamp_jump_resets_to_waiting(peer: Peer) -> None:
    """A stamp back by more than the timeout (clock reset, bag loop) resets, uncounted."""
    base = fresh(peer)
    for k in range(5):
        peer.step(base + k * DT, k * DT, 0.05)
    rejected = peer.wait_status(lambda v: v['state'] == 'tracking', 'tracking')[
        'rejected_poses']
    peer.diag.clear()
    jumped = base - 10.0
    peer.publish_pose(jumped, 0.0, 0.05)
    after = peer.step(jumped + DT, DT, 0.05)
    assert after['stamp'] == pytest.approx(jumped + DT)
    status = peer.wait_status(lambda v: v['state'] == 'tracking', 'tracking again',
                              clear=False)
    states = [v['state'] for _, v in peer.statuses()]
    assert 'waiting' in states and states.index('waiting') < states.index('tracking')
    assert status['rejected_poses'] == rejected
