# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""The node under ``use_sim_time`` with /clock published by the test.

Sim time stands still between /clock messages, so the instant of the watchdog stop is
exact: the clock is advanced one diagnostics period at a time (each step waits for the
status stamped with it), and the first ramp command carries the instant of the tick that
stopped the vehicle.
"""

from __future__ import annotations

from collections.abc import Iterator
import math

from corridor_pid.ros.testing import wait_until
import pytest
from ros_helpers import node_and_peer, Peer, seconds_of

pytestmark = pytest.mark.dds

NS = '/simtime'
TIMEOUT = 0.4      # watchdog.timeout [s]
RECOVERY = 3       # watchdog.recovery_count
DIAG_RATE = 20.0   # diagnostics.rate [Hz]: period 0.05 s
PERIOD = min(TIMEOUT / 4.0, 1.0 / DIAG_RATE)   # watchdog period [s], DESIGN/core.timing
MAX_DECEL = 1.0    # speed.max_decel [m/s^2]
VALUES = {
    'start_enabled': True,
    'pose_qos': 'reliable',
    'watchdog.timeout': TIMEOUT,
    'watchdog.recovery_count': RECOVERY,
    'diagnostics.rate': DIAG_RATE,
}


@pytest.fixture(scope='module')
def peer(tmp_path_factory: pytest.TempPathFactory, ros_domain_id: int) -> Iterator[Peer]:
    """Run one node on sim time for the module, and a DDS peer that owns /clock."""
    with node_and_peer(tmp_path_factory.mktemp('simtime'), NS, VALUES,
                       ros_args=['-p', 'use_sim_time:=true'], sim_time=True) as p:
        yield p


def status_at(peer: Peer, clock: float) -> dict[str, str]:
    """Publish /clock = ``clock`` (a diagnostics instant) and return the status stamped then."""
    peer.publish_clock(clock)
    found: list[dict[str, str]] = []

    def stamped() -> bool:
        for stamp, values in peer.statuses():
            if abs(stamp - clock) < 1e-6:
                found.append(values)
                return True
        return False

    wait_until(stamped, f'the status at clock {clock!r}', process=peer.proc)
    return found[0]


def test_watchdog_stops_within_timeout_plus_one_period_on_sim_time(peer: Peer) -> None:
    """Stale poses: stopped at the first watchdog tick past timeout; exact ramp from there."""
    # Poses at clock = stamp, 100 Hz for 1.2 s (the speed ramps up at max_accel 0.5).
    start = 10.005
    peer.publish_clock(start - 0.005)
    peer.enable(False)
    assert peer.enable(True).message == 'disabled -> waiting'
    terms = {}
    for k in range(121):
        clock = start + k * 0.01
        peer.publish_clock(clock)
        terms = peer.step(clock, k * 0.01, 0.05)
    t_last = terms['time']   # the node clock at the last accepted pose
    assert t_last == pytest.approx(start + 1.2, abs=0.011)
    assert terms['speed'] > 0.5
    peer.cmd.clear()
    first = math.ceil(t_last / (1.0 / DIAG_RATE)) * (1.0 / DIAG_RATE)
    states = []
    clock = first
    while clock < t_last + TIMEOUT + 1.0:
        states.append((clock, status_at(peer, clock)['state']))
        clock = round(clock + 1.0 / DIAG_RATE, 9)
    stopped = [c for c, s in states if s == 'stopped']
    assert stopped
    # The watchdog tick publishes the first ramp command, stamped with its instant; the
    # status sent at that same instant may come before or after it (timer order).
    cmds = peer.cmd.wait_for(lambda m: bool(m) and m[-1].twist.linear.x == 0.0,
                             'speed ramped to 0', process=peer.proc)
    stop = min(seconds_of(c.header.stamp) for c in cmds
               if seconds_of(c.header.stamp) > t_last + 1e-6)
    assert t_last + TIMEOUT < stop <= t_last + TIMEOUT + PERIOD + 1e-9
    assert stopped[0] - stop <= 1.0 / DIAG_RATE + 1e-9
    assert all(s == 'tracking' for c, s in states if c < stop)
    # Ramp on sim time: the first stop command steps down by one watchdog period of
    # max_decel (the ramp starts at the stop), then exactly max_decel per second down to 0.
    ramp = [(t_last, terms['speed'])] + [
        (seconds_of(c.header.stamp), c.twist.linear.x) for c in cmds
        if seconds_of(c.header.stamp) > t_last + 1e-6]
    assert ramp[1][0] == stop
    assert ramp[0][1] - ramp[1][1] == pytest.approx(MAX_DECEL * PERIOD, abs=1e-6)
    for (t0, v0), (t1, v1) in zip(ramp[1:], ramp[2:]):
        if v1 > 0.0:
            assert v0 - v1 == pytest.approx(MAX_DECEL * (t1 - t0), abs=1e-6)
        else:
            assert v0 <= MAX_DECEL * (t1 - t0) + 1e-6


def test_recovery_after_recovery_count_poses_on_sim_time(peer: Peer) -> None:
    """From stopped: no command for the first two poses, tracking on the third."""
    clock = seconds_of(peer.cmd.snapshot()[-1].header.stamp) if len(peer.cmd) else 20.0
    peer.publish_clock(clock + 5.0)
    assert peer.wait_state('stopped')['state'] == 'stopped'
    peer.terms.clear()
    base = clock + 5.0
    for j in range(1, RECOVERY):
        peer.publish_clock(base + j * 0.01)
        peer.publish_pose(base + j * 0.01, 0.0, 0.05)
    peer.publish_clock(base + RECOVERY * 0.01)
    resumed = peer.step(base + RECOVERY * 0.01, 0.0, 0.05)
    assert [m.data[0] for m in peer.terms.snapshot()] == [resumed['stamp']]
    # The clock stands still: the status sent at the transition itself tells.
    states = [v['state'] for _, v in peer.statuses()]
    peer.wait_status(lambda v: v['state'] == 'tracking', 'tracking', clear=False)
    assert states[0] == 'stopped'


def test_bad_poses_are_counted_on_sim_time(peer: Peer) -> None:
    """A NaN pose and a stale-stamp pose are rejected and counted under sim time too."""
    now = seconds_of(peer.cmd.snapshot()[-1].header.stamp) + 1.0 if len(peer.cmd) else 40.0
    peer.publish_clock(now)
    peer.enable(False)
    assert peer.enable(True).message == 'disabled -> waiting'
    good = peer.step(now, 0.0, 0.05)
    count = int(status_at(peer, math.ceil(now * DIAG_RATE + 1) / DIAG_RATE)['rejected_poses'])
    peer.terms.clear()
    peer.publish_pose(now + 0.01, 0.0, math.nan)
    peer.publish_pose(now, 0.0, 0.05)
    after = peer.step(now + 0.02, 0.0, 0.05)
    assert [m.data[0] for m in peer.terms.snapshot()] == [after['stamp']]
    assert good['stamp'] < after['stamp']
    clock = math.ceil(now * DIAG_RATE + 2) / DIAG_RATE
    assert int(status_at(peer, clock)['rejected_poses']) == count + 2
