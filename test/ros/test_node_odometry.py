# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""The node with Odometry poses, best-effort pose QoS and plain Twist cmd_vel, over DDS.

The node starts disabled (``start_enabled`` at its default, false) and is enabled through
``~/enable``. Plain Twist carries no stamp; poses go one at a time and each waits for its
``~/terms`` and its cmd_vel, so the n-th cmd_vel belongs to the n-th cycle.
"""

from __future__ import annotations

from collections.abc import Iterator
import math

import pytest
from ros_helpers import node_and_peer, Peer

pytestmark = pytest.mark.dds

NS = '/odometry'
WHEELBASE = 0.9
DT = 0.02
VALUES = {
    'pose_type': 'odometry',
    'cmd_vel_stamped': False,
    'pose_qos': 'sensor_data',
    'watchdog.timeout': 5.0,
    'diagnostics.rate': 10.0,
}


@pytest.fixture(scope='module')
def peer(tmp_path_factory: pytest.TempPathFactory, ros_domain_id: int) -> Iterator[Peer]:
    """Run one node for the module and a DDS peer that sends Odometry."""
    with node_and_peer(tmp_path_factory.mktemp('odometry'), NS, VALUES,
                       pose_type='odometry', stamped=False) as p:
        yield p


def step_with_cmd(peer: Peer, stamp: float, y: float, **kwargs: float) -> tuple[dict, object]:
    """Send a pose; return its terms and the plain Twist of the same cycle."""
    count = len(peer.cmd)
    terms = peer.step(stamp, 0.0, y, **kwargs)
    cmd = peer.cmd.wait_for_count(count + 1, process=peer.proc)[-1]
    return terms, cmd


def test_starts_disabled_and_ignores_poses(peer: Peer) -> None:
    """Without start_enabled the node reports disabled and sends no command for a pose."""
    status = peer.wait_status(lambda v: True, 'a status')
    assert status['state'] == 'disabled'
    peer.terms.clear()
    peer.publish_pose(100.0, 0.0, 0.3)
    peer.wait_status(lambda v: abs(float(v['last_pose_stamp']) - 100.0) < 1e-6,
                     'the pose taken')
    assert peer.terms.snapshot() == []


def test_enabled_odometry_steers_by_rep_103_with_plain_twist(peer: Peer) -> None:
    """Enabled: y < 0 steers left; plain Twist angular.z = v tan(steer) / wheelbase."""
    assert peer.enable(True).message == 'disabled -> waiting'
    pairs = [step_with_cmd(peer, 200.0 + k * DT, -0.3, speed=0.5) for k in range(12)]
    terms, cmd = pairs[-1]
    assert terms['steering'] > 0.0 and terms['unclamped'] > 0.0
    for terms, cmd in pairs:
        assert cmd.linear.x == terms['speed']
        assert cmd.angular.z == pytest.approx(
            terms['speed'] * math.tan(terms['steering']) / WHEELBASE, rel=1e-9, abs=1e-15)
    assert peer.wait_state('tracking')['state'] == 'tracking'


def test_odometry_yaw_rate_feeds_the_derivative(peer: Peer) -> None:
    """derivative.rate_from: odometry uses the message's speed and yaw rate.

    On the straight course, d/dt of -(y + L sin(theta)) = -(v sin(theta) + L cos(theta) w)
    (Frenet kinematics, corridor_pid.core.controller); at theta = 0, w = 0.1 rad/s,
    L = 1 m the rate is -0.1 m/s although the pose itself does not move.
    """
    assert peer.set_params({'derivative.rate_from': 'odometry'})[0].successful
    try:
        for k in range(40):
            terms = peer.step(300.0 + k * DT, 0.0, 0.0, speed=0.5, yaw_rate=0.1)
    finally:
        assert peer.set_params({'derivative.rate_from': 'difference'})[0].successful
    assert terms['d'] == pytest.approx(0.25 * -0.1, rel=1e-3)
    for k in range(40):
        terms = peer.step(400.0 + k * DT, 0.0, 0.0, speed=0.5, yaw_rate=0.1)
    assert abs(terms['d']) < 1e-6
