# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Log times of the demo's recording: each message at the time it was sent, not heard.

The messages are built and serialized with rosbags' Jazzy type store (the reference
implementation of the ROS 2 message definitions and CDR) and read back from the written
bag with rosbags' reader.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

from corridor_pid.core.ackermann import yaw_rate_from
from corridor_pid.demo.logtimes import aligned, HeldMessage, log_times, RANKS
from corridor_pid.demo.recording import BagRecorder
from corridor_pid.demo.world import STATE_NAMES
import numpy as np
from rosbags.rosbag2 import Reader
from rosbags.typesys import get_typestore, Stores

STORE = get_typestore(Stores.ROS2_JAZZY)
T = STORE.types
TERMS_LABELS = 'stamp,time,error,steering,speed'
DELAY_NS = 20_000_000
LAG_NS = 700_000_000
"""How far the recorder's own clock lags the run in these tests (ns)."""


def _time(ns: int) -> Any:
    return T['builtin_interfaces/msg/Time'](sec=ns // 1_000_000_000, nanosec=ns % 1_000_000_000)


def _header(ns: int) -> Any:
    return T['std_msgs/msg/Header'](stamp=_time(ns), frame_id='map')


def _array(labels: str, values: list[float]) -> Any:
    dim = T['std_msgs/msg/MultiArrayDimension'](label=labels, size=len(values),
                                                stride=len(values))
    return T['std_msgs/msg/Float64MultiArray'](
        layout=T['std_msgs/msg/MultiArrayLayout'](dim=[dim], data_offset=0),
        data=np.asarray(values, dtype=np.float64))


def _held(topic: str, msg: Any, receive_ns: int) -> HeldMessage:
    msgtype = msg.__msgtype__
    return HeldMessage(topic, msgtype, bytes(STORE.serialize_cdr(msg, msgtype)), receive_ns)


def _state_row(t: float, pose_stamp: float, node_time: float) -> Any:
    values = dict.fromkeys(STATE_NAMES, 0.0)
    values.update(time=t, pose_stamp=pose_stamp, node_time=node_time)
    return _array(','.join(STATE_NAMES), [values[name] for name in STATE_NAMES])


def _cycle(slot_ns: int, *, answered: bool = True, node_ns: int | None = None,
           speed: float = 0.8, origin_ns: int = 0) -> list[tuple[str, Any]]:
    """Return one control cycle's messages as the run sent them, in causal order."""
    node_ns = slot_ns if node_ns is None else node_ns
    stamp_ns = slot_ns - DELAY_NS
    pose = T['geometry_msgs/msg/PoseStamped'](
        header=_header(stamp_ns), pose=T['geometry_msgs/msg/Pose'](
            position=T['geometry_msgs/msg/Point'](x=1.0, y=0.2, z=0.0),
            orientation=T['geometry_msgs/msg/Quaternion'](x=0.0, y=0.0, z=0.0, w=1.0)))
    out: list[tuple[str, Any]] = [
        ('/clock', T['rosgraph_msgs/msg/Clock'](clock=_time(slot_ns))), ('/pose', pose)]
    if answered:
        vector = T['geometry_msgs/msg/Vector3']
        twist = T['geometry_msgs/msg/Twist'](linear=vector(x=speed, y=0.0, z=0.0),
                                             angular=vector(x=0.0, y=0.0, z=0.1))
        out += [
            ('/steering_angle', T['std_msgs/msg/Float64'](data=0.1)),
            ('/target_speed', T['std_msgs/msg/Float64'](data=speed)),
            ('/cmd_vel', T['geometry_msgs/msg/TwistStamped'](header=_header(node_ns),
                                                             twist=twist)),
            ('/corridor_pid/terms', _array(TERMS_LABELS,
                                           [stamp_ns * 1e-9, node_ns * 1e-9, 0.0, 0.1, speed])),
        ]
    out.append(('/corridor_pid_sim/state', _state_row(
        (slot_ns - origin_ns) * 1e-9, stamp_ns * 1e-9,
        node_ns * 1e-9 if answered else float('nan'))))
    return out


def _heard_late(cycles: list[list[tuple[str, Any]]]) -> list[HeldMessage]:
    """Return the messages as a lagging recorder hears them: topic by topic, late clock."""
    by_topic: dict[str, list[Any]] = {}
    for cycle in cycles:
        for topic, msg in cycle:
            by_topic.setdefault(topic, []).append(msg)
    held = []
    receive = 5_000_000_000 + LAG_NS
    for topic in sorted(by_topic):             # one topic's backlog after another
        for msg in by_topic[topic]:
            held.append(_held(topic, msg, receive))
            receive += 1_000
    return held


def test_every_message_is_timed_by_when_it_was_sent() -> None:
    """Poses at the node time that took them; commands, terms, state, clock at their own."""
    slots = [4_000_000_000 + k * 20_000_000 for k in range(5)]
    cycles = [_cycle(ns, speed=0.5 + 0.01 * k) for k, ns in enumerate(slots)]
    held = _heard_late(cycles)
    timing = log_times(held)
    assert timing.by_receive_clock == 0 and timing.by_send_time == len(held)
    by_topic: dict[str, list[int]] = {}
    for msg, t in zip(held, timing.times):
        by_topic.setdefault(msg.topic, []).append(t)
    for topic in ('/clock', '/pose', '/steering_angle', '/target_speed', '/cmd_vel',
                  '/corridor_pid/terms', '/corridor_pid_sim/state'):
        assert by_topic[topic] == slots, topic


def test_pose_taken_at_another_node_time_gets_that_time() -> None:
    """A controller whose clock lagged one slot: the pose's time is its node time."""
    held = _heard_late([_cycle(1_020_000_000, node_ns=1_000_000_000)])
    timing = log_times(held)
    pose = [t for m, t in zip(held, timing.times) if m.topic == '/pose']
    assert pose == [1_000_000_000]


def test_unanswered_pose_takes_the_slot_of_the_vehicle_in_real_time() -> None:
    """A pose not computed on (recovery): the vehicle's slot time plus the ROS origin."""
    origin = 1_700_000_000_123_456_789
    cycle = _cycle(origin + 3_020_000_000, answered=False, origin_ns=origin)
    held = _heard_late([cycle])
    timing = log_times(held, origin_ns=origin)
    times = dict(zip((m.topic for m in held), timing.times))
    # Slot time 3.02 s after the origin; the row carries the pose stamp in ROS seconds,
    # whose float64 loses ~0.2 us at this size: matched within 1 us, timed to the ns.
    assert times['/pose'] == origin + 3_020_000_000
    assert times['/corridor_pid_sim/state'] == origin + 3_020_000_000


def _drop(held: list[HeldMessage], topic: str, index: int) -> list[HeldMessage]:
    """Return ``held`` without the ``index``-th message of ``topic`` (lost on the way)."""
    seen = [i for i, m in enumerate(held) if m.topic == topic]
    return [m for i, m in enumerate(held) if i != seen[index]]


def test_real_time_node_times_are_exact_to_the_nanosecond() -> None:
    """At ROS system-time sizes ~/terms' float seconds lose ~0.1 us; cmd_vel gives the ns."""
    origin = 1_796_203_000_000_000_000
    slot = origin + 3_020_000_000
    node = slot + 987_654        # the controller took the pose ~1 ms after it was sent
    held = _heard_late([_cycle(slot, node_ns=node, origin_ns=origin)])
    timing = log_times(held, origin_ns=origin)
    times = dict(zip((m.topic for m in held), timing.times))
    assert times['/pose'] == times['/corridor_pid/terms'] == times['/cmd_vel'] == node
    assert times['/corridor_pid_sim/state'] == slot
    assert abs(round(node * 1e-9 * 1e9) - node) > 0     # the float alone is not exact


def test_commands_lost_on_either_side_keep_their_cycles() -> None:
    """A lost cmd_vel and a lost steering_angle: every other command keeps its cycle's time."""
    wheelbase = 0.9
    slots = [1_000_000_000 + k * 20_000_000 for k in range(12)]
    cycles = []
    for k, ns in enumerate(slots):
        steer, speed = 0.02 * k - 0.1, 0.5 + 0.01 * k
        cycle = _cycle(ns, speed=speed)
        for n, (topic, msg) in enumerate(cycle):
            if topic == '/steering_angle':
                cycle[n] = (topic, T['std_msgs/msg/Float64'](data=steer))
            elif topic == '/cmd_vel':
                msg.twist.angular.z = yaw_rate_from(steer, speed, wheelbase)
        cycles.append(cycle)
    held = _drop(_drop(_drop(_heard_late(cycles), '/cmd_vel', 3), '/steering_angle', 7),
                 '/target_speed', 0)
    timing = log_times(held, wheelbase=wheelbase)
    times: dict[str, list[int]] = {}
    for msg, t in zip(held, timing.times):
        times.setdefault(msg.topic, []).append(t)
    lost_cmd = slots[3]
    assert times['/cmd_vel'] == [ns for ns in slots if ns != lost_cmd]
    # The steering and speed of the cycle whose cmd_vel was lost have no time to take.
    assert times['/steering_angle'][:3] == slots[:3]
    assert times['/steering_angle'][4:] == [ns for k, ns in enumerate(slots) if k > 3 and k != 7]
    assert times['/target_speed'][3:] == slots[4:]
    assert timing.by_receive_clock == 2


def test_alignment_skips_the_smallest_gap_that_agrees_again() -> None:
    """Partners 2 and 5 lost, message 8 lost: every other message finds its own partner."""
    cycles = list(range(20))
    partners = [c for c in cycles if c not in (2, 5)]
    messages = [c for c in cycles if c != 8]
    pairs = aligned(len(messages), len(partners),
                    lambda k, j: messages[k] == partners[j])
    for k, j in enumerate(pairs):
        if messages[k] in (2, 5):
            assert j is None
        else:
            assert j is not None and partners[j] == messages[k]


def test_recorder_writes_in_log_time_order_with_the_cycle_order_at_ties(
        tmp_path: Path) -> None:
    """The bag reads back (rosbags) in time order; at one time: clock, pose, commands."""
    cycles = [_cycle(2_000_000_000 + k * 20_000_000) for k in range(3)]
    held = _heard_late(cycles)
    recorder = BagRecorder(tmp_path / 'run', {m.topic: m.msgtype for m in held})
    for msg in held:
        recorder.write(msg.topic, msg.receive_ns, msg.data)
    recorder.close(log_times)
    assert recorder.timing is not None and recorder.timing.by_receive_clock == 0
    with Reader(tmp_path / 'run') as reader:
        read = [(conn.topic, ns) for conn, ns, _ in reader.messages()]
    assert len(read) == len(held)
    assert [ns for _, ns in read] == sorted(ns for _, ns in read)
    first = [topic for topic, ns in read if ns == 2_000_000_000]
    assert first == ['/clock', '/pose', '/steering_angle', '/target_speed', '/cmd_vel',
                     '/corridor_pid/terms', '/corridor_pid_sim/state']
    assert RANKS['clock'] < RANKS['parameters'] < RANKS['pose'] < RANKS['command']
