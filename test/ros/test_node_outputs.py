# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""The node over real DDS: signs, limits, output forms and order, live retune, rejections.

One node process (namespace /outputs) serves every test of this module; each test starts
from a fresh controller state (disable + enable over ~/enable) and from pose stamps far
after the previous test's. Poses go one at a time and each waits for the ``~/terms`` of
its cycle, so the assertions follow the node's own sequence, never wall-clock timing.
"""

from __future__ import annotations

from collections.abc import Iterator
import itertools
import math

import pytest
from ros_helpers import node_and_peer, Peer, seconds_of

pytestmark = pytest.mark.dds

NS = '/outputs'
VALUES = {
    'start_enabled': True,
    'pose_qos': 'reliable',
    'pose_frame': 'map',
    # A long timeout: parameter calls between poses must never trip the watchdog here
    # (the watchdog has its own test module).
    'watchdog.timeout': 5.0,
    'diagnostics.rate': 10.0,
}
WHEELBASE = 0.9   # default vehicle.wheelbase [m]
MAX_ANGLE = 0.5   # default steering.max_angle [rad]
MAX_RATE = 1.0    # default steering.max_rate [rad/s]
DT = 0.02         # pose stamp spacing [s] (50 Hz)

_bases = itertools.count(1000.0, 1000.0)


@pytest.fixture(scope='module')
def peer(tmp_path_factory: pytest.TempPathFactory, ros_domain_id: int) -> Iterator[Peer]:
    """Run one node for the module and a DDS peer talking to it."""
    with node_and_peer(tmp_path_factory.mktemp('outputs'), NS, VALUES) as p:
        yield p


def fresh(peer: Peer) -> float:
    """Reset the controller and return a new stamp base [s].

    Disables (the command ramps to rest: speed 0, steering at trim), waits for rest, and
    enables again, so every test starts from the same controller and command state.
    """
    peer.enable(False)
    peer.wait_status(lambda v: v['state'] == 'disabled' and float(v['speed']) == 0.0
                     and float(v['steering']) == 0.0, 'the command at rest')
    assert peer.enable(True).message == 'disabled -> waiting'
    return next(_bases)


def cmd_at(peer: Peer, time: float) -> object:
    """Return the cmd_vel message stamped with node time ``time``."""
    msgs = peer.cmd.wait_for(
        lambda m: any(abs(seconds_of(c.header.stamp) - time) < 1e-6 for c in m),
        f'cmd_vel stamped {time!r}', process=peer.proc)
    return next(c for c in msgs if abs(seconds_of(c.header.stamp) - time) < 1e-6)


@pytest.mark.parametrize(('y', 'yaw', 'sign'), [
    (0.3, 0.0, -1.0),    # left of the centre -> steer right
    (-0.3, 0.0, 1.0),    # right of the centre -> steer left
    (0.0, 0.2, -1.0),    # heading left of the course -> steer right
])
def test_rep_103_signs(peer: Peer, y: float, yaw: float, sign: float) -> None:
    """REP 103: y > 0 or theta > 0 gives negative steering; cmd_vel turns the same way."""
    base = fresh(peer)
    terms = [peer.step(base + k * DT, k * DT, y, yaw) for k in range(12)]
    last = terms[-1]
    assert math.copysign(1.0, last['unclamped']) == sign
    assert math.copysign(1.0, last['steering']) == sign
    cmd = cmd_at(peer, last['time'])
    assert cmd.twist.linear.x == pytest.approx(last['speed'], abs=1e-12)
    assert cmd.twist.linear.x > 0.0
    assert math.copysign(1.0, cmd.twist.angular.z) == sign


def test_cmd_vel_is_the_yaw_rate_form(peer: Peer) -> None:
    """cmd_vel angular.z = speed * tan(steer) / wheelbase (Rajamani 2012, ch. 2), each cycle."""
    base = fresh(peer)
    terms = [peer.step(base + k * DT, k * DT, 0.25, 0.05) for k in range(15)]
    for t in terms[1:]:
        cmd = cmd_at(peer, t['time'])
        expected = t['speed'] * math.tan(t['steering']) / WHEELBASE
        assert cmd.twist.angular.z == pytest.approx(expected, rel=1e-9, abs=1e-15)
        assert cmd.header.frame_id == 'base_link'


def test_steering_angle_is_published_first(peer: Peer) -> None:
    """Each cycle writes steering_angle, then target_speed, then cmd_vel, then ~/terms.

    Checked on the DDS source timestamps the node's writers put on each sample.
    """
    base = fresh(peer)
    peer.step(base, 0.0, 0.2)
    for rec in (peer.steering, peer.speed, peer.cmd, peer.terms):
        rec.clear()
    for k in range(1, 6):
        peer.step(base + k * DT, k * DT, 0.2)
        for rec in (peer.steering, peer.speed, peer.cmd):
            rec.wait_for_count(k, process=peer.proc)
    assert len(peer.steering) == len(peer.speed) == len(peer.cmd) == len(peer.terms) == 5
    for k in range(5):
        order = [rec.infos[k]['source_timestamp']
                 for rec in (peer.steering, peer.speed, peer.cmd, peer.terms)]
        assert order == sorted(order)
        assert peer.steering.messages[k].data == peer.terms.messages[k].data[9]


def test_limits_hold_under_a_large_offset(peer: Peer) -> None:
    """A 3 m offset: steering clamps at max_angle, slews at most max_rate, speed slows.

    The rate is checked against the node's own clock between cycles (``~/terms`` time).
    Speed policy of corridor_pid.core.controller: cruise / (1 + |e| / slowdown_error).
    """
    base = fresh(peer)
    terms = [peer.step(base, 0.0, 3.0)]
    k = 0
    while terms[-1]['steering'] > -MAX_ANGLE and k < 5000:
        k += 1
        terms.append(peer.step(base + k * DT, k * DT, 3.0))
    assert terms[-1]['steering'] == -MAX_ANGLE
    assert terms[-1]['unclamped'] < -MAX_ANGLE
    for a, b in zip(terms, terms[1:]):
        assert abs(b['steering']) <= MAX_ANGLE
        assert abs(b['steering'] - a['steering']) <= MAX_RATE * (b['time'] - a['time']) + 1e-9
        assert 0.0 <= b['speed'] <= 1.5
    for j in range(k + 1, k + 40):
        last = peer.step(base + j * DT, j * DT, 3.0)
    assert last['speed'] <= 1.0 / (1.0 + 3.0 / 0.5) + 1e-9
    status = peer.wait_status(lambda v: v['angle_saturated'] == 'true', 'angle saturation')
    assert float(status['steering']) == -MAX_ANGLE


def _ramp(peer: Peer, base: float, start: int, count: int,
          yaw: float = 0.0) -> list[dict[str, float]]:
    """Send poses drifting left at 0.05 m/s; return their terms."""
    return [peer.step(base + k * DT, k * DT, 0.1 + 0.05 * k * DT, yaw)
            for k in range(start, start + count)]


def _jump(before: list[dict[str, float]], after: list[dict[str, float]]) -> float:
    """Return the step of the unclamped output across a change [rad]."""
    return abs(after[0]['unclamped'] - before[-1]['unclamped'])


def test_live_kd_change_is_bumpless(peer: Peer) -> None:
    """A live gains.kd change applies on the next cycle without a step in the unclamped output.

    Without the bumpless offset the step would be dkd * rate = 0.75 * 0.05 = 0.0375 rad;
    with it, the output moves by about one natural increment (Åström & Hägglund 2006,
    bumpless parameter changes).
    """
    base = fresh(peer)
    before = _ramp(peer, base, 0, 30)
    assert before[-1]['d'] == pytest.approx(0.25 * -0.05, rel=0.02)
    try:
        assert [r.successful for r in peer.set_params({'gains.kd': 1.0})] == [True]
        after = _ramp(peer, base, 30, 10)
    finally:
        assert peer.set_params({'gains.kd': 0.25})[0].successful
    assert after[0]['kd'] == 1.0
    assert after[0]['d'] == pytest.approx(1.0 * -0.05, rel=0.02)
    assert after[0]['blend'] == pytest.approx(0.0375, rel=0.05)
    assert _jump(before, after) < 0.1 * 0.0375


def test_live_lookahead_change_is_bumpless(peer: Peer) -> None:
    """A live lookahead change (1 m -> 2 m at theta = 0.2 rad) does not step the output.

    The error changes by -dL*sin(theta) = -0.199 m, which would step P by kp times that.
    """
    base = fresh(peer)
    before = _ramp(peer, base, 0, 30, yaw=0.2)
    try:
        assert peer.set_params({'lookahead': 2.0})[0].successful
        after = _ramp(peer, base, 30, 10, yaw=0.2)
    finally:
        assert peer.set_params({'lookahead': 1.0})[0].successful
    assert after[0]['error'] - before[-1]['error'] == pytest.approx(
        -math.sin(0.2), abs=0.01)
    assert after[0]['blend'] == pytest.approx(0.6 * math.sin(0.2), rel=0.05)
    assert _jump(before, after) < 0.1 * 0.6 * math.sin(0.2)


@pytest.mark.parametrize(('name', 'value', 'in_reason'), [
    ('gains.kd', -0.1, 'gains.kd'),               # negative (below the range)
    ('gains.kp', math.nan, 'gains.kp'),           # not a number
    ('gains.kp', 1, 'type'),                      # an integer where a double is declared
    ('gains.kp', 'high', 'type'),                 # a string
    ('gains.ki', 100.0, 'gains.ki'),              # above the range
    ('steering.max_angle', 0.4, 'read-only'),     # safety limit
    ('vehicle.wheelbase', 1.2, 'read-only'),      # vehicle fact
    ('speed.cruise', 2.0, 'speed.max'),           # inconsistent with speed.max = 1.5
    ('integral.tracking_time', 0.0, 'integral.tracking_time'),  # must be > 0
    ('integral.method', 'sometimes', 'integral.method'),        # not a choice
    ('gains.kp', 40.0, 'stability guard'),        # below the margin floors
])
def test_invalid_live_set_is_rejected_and_changes_nothing(
        peer: Peer, name: str, value: object, in_reason: str) -> None:
    """An invalid set is refused with a reason; parameters and control stay as they were."""
    base = fresh(peer)
    first = peer.step(base, 0.0, 0.2)
    before = peer.get_params([name, 'gains.kp', 'gains.kd'])
    results = peer.set_params({name: value})
    assert not results[0].successful
    assert in_reason in results[0].reason
    assert peer.get_params([name, 'gains.kp', 'gains.kd']) == before
    second = peer.step(base + DT, DT, 0.2)
    assert (second['kp'], second['kd'], second['blend']) == (first['kp'], first['kd'], 0.0)


def test_atomic_set_applies_all_or_none(peer: Peer) -> None:
    """set_parameters_atomically: one bad value (or a read-only one) refuses the whole set."""
    names = ['gains.kp', 'gains.kd', 'gains.ki', 'steering.max_rate']
    before = peer.get_params(names)
    bad = peer.set_atomically({'gains.kp': 0.7, 'gains.kd': 0.3, 'gains.ki': -1.0})
    assert not bad.successful and bad.reason
    read_only = peer.set_atomically({'gains.kp': 0.7, 'steering.max_rate': 2.0})
    assert not read_only.successful and 'steering.max_rate' in read_only.reason
    unstable = peer.set_atomically({'gains.kp': 0.7, 'gains.kd': 0.0})
    assert not unstable.successful and 'stability guard' in unstable.reason
    assert peer.get_params(names) == before
    base = fresh(peer)
    try:
        good = peer.set_atomically({'gains.kp': 0.7, 'gains.kd': 0.3})
        assert good.successful
        assert peer.get_params(names) == {**before, 'gains.kp': 0.7, 'gains.kd': 0.3}
        terms = peer.step(base, 0.0, 0.2)
        assert (terms['kp'], terms['kd']) == (0.7, 0.3)
    finally:
        assert peer.set_atomically({'gains.kp': 0.6, 'gains.kd': 0.25}).successful


def test_bad_poses_are_rejected_counted_and_ignored(peer: Peer) -> None:
    """NaN, stale-stamp and wrong-frame poses give no command and count in /diagnostics."""
    base = fresh(peer)
    peer.step(base, 0.0, 0.1)
    count = int(peer.wait_status(lambda v: True, 'a status')['rejected_poses'])
    peer.terms.clear()
    peer.publish_pose(base + DT, DT, math.nan)                 # not finite
    peer.publish_pose(base, 2 * DT, 0.1)                       # stamp not newer
    peer.publish_pose(base + 2 * DT, 2 * DT, 0.1, frame='odom')  # wrong pose_frame
    good = peer.step(base + 3 * DT, 3 * DT, 0.1)
    assert [m.data[0] for m in peer.terms.snapshot()] == [good['stamp']]
    status = peer.wait_status(
        lambda v: int(v['rejected_poses']) >= count + 3, 'three more rejected poses')
    assert int(status['rejected_poses']) == count + 3
    assert status['state'] == 'tracking'


def test_descriptors_come_from_the_parameter_table(peer: Peer) -> None:
    """Descriptors carry unit, range, read-only flag and choices (corridor_pid.core.params)."""
    desc = peer.describe(['gains.kp', 'steering.max_angle', 'integral.method',
                          'watchdog.recovery_count', 'course.points'])
    kp = desc['gains.kp']
    assert not kp.read_only and '[rad/m]' in kp.description
    assert (kp.floating_point_range[0].from_value, kp.floating_point_range[0].to_value) == (
        0.0, 50.0)
    assert desc['steering.max_angle'].read_only
    assert 'conditional' in desc['integral.method'].additional_constraints
    assert desc['watchdog.recovery_count'].integer_range[0].from_value == 1
    assert desc['course.points'].read_only
    assert peer.get_params(['course.points']).get('course.points') is None  # unset: x-axis


def test_enable_service_switches_states(peer: Peer) -> None:
    """~/enable false -> disabled: speed ramps to 0 at <= max_decel, then silence; true -> on.

    The ramp is checked against the node clock (cmd_vel stamps); max_decel = 1 m/s^2.
    """
    base = fresh(peer)
    k = 0
    moving = peer.step(base, 0.0, 0.0)
    while moving['speed'] < 0.3 and k < 100000:
        k += 1
        moving = peer.step(base + k * DT, k * DT, 0.0)
    peer.cmd.clear()
    assert peer.enable(False).message == 'tracking -> disabled'
    peer.wait_state('disabled')
    cmds = peer.cmd.wait_for(lambda m: bool(m) and m[-1].twist.linear.x == 0.0,
                             'speed ramped to 0', process=peer.proc)
    ramp = [(seconds_of(c.header.stamp), c.twist.linear.x) for c in cmds]
    assert len(ramp) >= 3 and ramp[0][1] <= moving['speed']
    for (t0, v0), (t1, v1) in zip(ramp, ramp[1:]):
        assert 0.0 <= v0 - v1 <= 1.0 * (t1 - t0) + 1e-6
    peer.terms.clear()
    peer.publish_pose(base + (k + 1) * DT, (k + 1) * DT, 0.0)
    peer.wait_status(lambda v: abs(float(v['last_pose_stamp']) - base - (k + 1) * DT) < 1e-6,
                     'the pose sent while disabled')
    assert peer.terms.snapshot() == []
    assert peer.enable(False).message == 'unchanged: disabled'
    assert peer.enable(True).message == 'disabled -> waiting'
    peer.step(base + (k + 2) * DT, (k + 2) * DT, 0.0)
    assert peer.wait_state('tracking')['state'] == 'tracking'


def test_params_file_values_are_in_force(peer: Peer) -> None:
    """The values of the params file the node started with are its parameters."""
    got = peer.get_params(list(VALUES))
    assert got == VALUES
