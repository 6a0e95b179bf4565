# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Fixed-rate mode (``control.rate`` > 0) under sim time: commands on the control timer.

With ``control.rate`` the node keeps the latest pose and computes on a timer; every cycle
publishes, a cycle without a new pose holds the last command, and the watchdog still stops
a stale stream. Sim time makes the tick instants exact multiples of the period.
"""

from __future__ import annotations

from collections.abc import Iterator

from corridor_pid.ros.testing import wait_until
import pytest
from ros_helpers import node_and_peer, Peer, seconds_of

pytestmark = pytest.mark.dds

NS = '/fixedrate'
RATE = 20.0                # control.rate [Hz]: ticks every 0.05 s
PERIOD = 1.0 / RATE
VALUES = {
    'start_enabled': True,
    'pose_qos': 'reliable',
    'control.rate': RATE,
    'watchdog.timeout': 0.4,
    'diagnostics.rate': RATE,    # a status at every tick instant
}


@pytest.fixture(scope='module')
def peer(tmp_path_factory: pytest.TempPathFactory, ros_domain_id: int) -> Iterator[Peer]:
    """Run one fixed-rate node on sim time, and a DDS peer that owns /clock."""
    with node_and_peer(tmp_path_factory.mktemp('fixedrate'), NS, VALUES,
                       ros_args=['-p', 'use_sim_time:=true'], sim_time=True) as p:
        yield p


def _tick(peer: Peer, clock: float) -> None:
    """Publish /clock = ``clock`` (a tick instant); wait for the status stamped with it."""
    peer.publish_clock(clock)
    wait_until(lambda: any(abs(stamp - clock) < 1e-6 for stamp, _ in peer.statuses()),
               f'the status at {clock!r}', process=peer.proc)


def test_commands_come_on_the_control_timer_and_hold_without_poses(peer: Peer) -> None:
    """Computed at tick instants; ticks without a new pose repeat the last command."""
    clock = 20.0
    _tick(peer, clock)
    peer.enable(False)
    assert peer.enable(True).message == 'disabled -> waiting'
    peer.terms.clear()
    peer.publish_pose(20.001, 0.0, 0.2)
    ticks = 0
    while not peer.terms.snapshot() and ticks < 200:   # the pose may land after a tick
        clock = round(clock + PERIOD, 9)
        _tick(peer, clock)
        ticks += 1
    for _ in range(3):
        clock = round(clock + PERIOD, 9)
        _tick(peer, clock)
    rows = [m.data for m in peer.terms.wait_for(lambda m: len(m) >= 4, 'four cycles',
                                                process=peer.proc)]
    times = [row[1] for row in rows]
    assert times == sorted(set(times))
    for row in rows:
        assert row[1] / PERIOD == pytest.approx(round(row[1] / PERIOD), abs=1e-6)
        assert row[0] == pytest.approx(20.001)          # the one pose, held
    assert len({row[9] for row in rows}) == 1           # the same steering every cycle
    assert len({row[10] for row in rows}) == 1          # and speed


def test_watchdog_stops_a_stale_stream_in_fixed_rate_mode(peer: Peer) -> None:
    """No new pose for longer than the timeout -> stopped, ramp commands on the ticks."""
    clock = max(stamp for stamp, _ in peer.statuses())
    peer.cmd.clear()
    for _ in range(12):
        clock = round(clock + PERIOD, 9)
        _tick(peer, clock)
    peer.wait_status(lambda v: v['state'] == 'stopped', 'stopped', clear=False)
    stamps = [seconds_of(m.header.stamp) for m in peer.cmd.snapshot()]
    assert stamps and all(
        t / PERIOD == pytest.approx(round(t / PERIOD), abs=1e-6) for t in stamps)
