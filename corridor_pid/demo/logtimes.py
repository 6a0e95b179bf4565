# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Log times of the demo's recording: when each message was sent, on the run's clock (ns).

The demo's recorder hears every topic through its own subscriptions, and its own clock lags
the run under load (in the fast pace it follows ``/clock``, of which rclpy keeps only the
latest, while the topics queue up). Its receive times are therefore not the times at which
the controller and the simulated vehicle sent or took the messages. The bag is written at
the end of the run instead, each message at the time its sender gave it on the run's clock
(ROS time: simulated time in the fast pace, the system clock in real time), read from the
message itself or from the message it belongs with:

========================================  ===============================================
message                                   log time
========================================  ===============================================
``rosgraph_msgs/Clock`` (``/clock``)      its clock value
``TwistStamped`` (``cmd_vel``)            its header stamp (the controller's node time)
``DiagnosticArray``                       its header stamp
``ParameterEvent``                        its stamp (node time of the accepted set)
``~/terms`` (Float64MultiArray with a     its ``time`` field (node time of the cycle; to
``time`` and no ``phase`` label)          the ns: the stamp of the cycle's ``cmd_vel``
                                          when one is within 1 us)
the vehicle's ``~/state`` (labels with    its ``time`` field (simulated time) + ``origin``
``phase``)
``Float64`` (``steering_angle``,          the header stamp of the ``cmd_vel`` sent in the
``target_speed``)                         same cycle (see below)
pose (``PoseStamped``, ``Odometry``)      the controller's node time when it took the pose
                                          (the time of the first ``~/terms`` whose
                                          ``stamp`` is the pose's header stamp); for a pose
                                          it took without computing (recovery after a
                                          watchdog stop) the time the vehicle sent it (the
                                          ``~/state`` row whose ``pose_stamp`` it is)
========================================  ===============================================

The controller sends ``steering_angle``, ``target_speed`` and ``cmd_vel`` once each per
cycle, so the k-th message of each topic belong together. Under load a reliable writer with
a short history can still lose a few messages to a slow subscriber, so the pairing checks
the values and skips over a loss: a ``target_speed`` must equal its ``cmd_vel``'s
``linear.x``, and a ``steering_angle`` must give its ``angular.z``
(:func:`corridor_pid.core.ackermann.yaw_rate_from`, with the controller's wheelbase);
after a mismatch the pairing resumes at the smallest skip (at most :data:`RESYNC_WINDOW`
messages) after which a pair agrees again. Over a stretch of equal commands a loss cannot
be told apart from its neighbours; those messages may be placed a cycle off, at a time
when the same command was in force.

A message none of these rules times keeps the recorder's receive time and is counted in
:attr:`LogTimes.by_receive_clock`. At equal log times messages follow the cycle's causal
order (:data:`RANKS`): clock, parameter change, pose, commands, terms, diagnostics, state;
within a topic, the order they were heard in.

Decoding uses rosbags' Jazzy type store (the ``offline`` extra the recorder needs anyway).
"""

from __future__ import annotations

import bisect
from collections.abc import Callable, Sequence
import math
from typing import Any, NamedTuple

from corridor_pid.core.ackermann import yaw_rate_from
from corridor_pid.replay.bag import CLOCK_TYPE, FLOAT64_TYPE, jazzy_typestore, POSE_KINDS

__all__ = ['PARAMETER_EVENT_TYPE', 'RANKS', 'RESYNC_WINDOW', 'HeldMessage', 'LogTimes',
           'aligned', 'log_times']

PARAMETER_EVENT_TYPE = 'rcl_interfaces/msg/ParameterEvent'
_STAMPED_COMMANDS = ('geometry_msgs/msg/TwistStamped',
                     'ackermann_msgs/msg/AckermannDriveStamped')
_HEADER_STAMPED = (*_STAMPED_COMMANDS, 'diagnostic_msgs/msg/DiagnosticArray')
_ARRAY_TYPE = 'std_msgs/msg/Float64MultiArray'

RANKS: dict[str, int] = {
    'clock': 0, 'parameters': 1, 'pose': 2, 'float64': 3, 'command': 4, 'terms': 5,
    'diagnostics': 6, 'state': 7, 'other': 8,
}
"""Order of messages with equal log times, by kind (the order of one control cycle)."""

RESYNC_WINDOW = 50
"""Most messages skipped (of both topics together) to find the pairing again."""

_POSE_MATCH = 1e-6
"""Largest difference [s] between a pose's header stamp and the ``stamp`` a ``~/terms`` or
state row gives for it (both are float seconds of the same nanoseconds)."""


class HeldMessage(NamedTuple):
    """One recorded message waiting to be written."""

    topic: str
    msgtype: str
    data: bytes
    """CDR bytes as heard."""
    receive_ns: int
    """The recorder's receive time (ns, its own clock)."""


class LogTimes(NamedTuple):
    """The log time [ns] and tie rank of every held message, and how many were timed how."""

    times: list[int]
    ranks: list[int]
    by_send_time: int
    """Messages timed by a rule of the module docstring."""
    by_receive_clock: int
    """Messages no rule could time (kept at the recorder's receive time)."""


def _ns(seconds: float) -> int:
    return round(seconds * 1e9)


def _stamp_ns(stamp: Any) -> int:
    return int(stamp.sec) * 1_000_000_000 + int(stamp.nanosec)


def _labels(msg: Any) -> list[str]:
    return str(msg.layout.dim[0].label).split(',') if msg.layout.dim else []


def _nearest(keys: list[float], values: list[float], stamp: float) -> float | None:
    """Return the value whose key is within :data:`_POSE_MATCH` of ``stamp`` (None: none)."""
    at = bisect.bisect_left(keys, stamp - _POSE_MATCH)
    if at < len(keys) and abs(keys[at] - stamp) <= _POSE_MATCH:
        return values[at]
    return None


def aligned(count: int, partners: int, agree: Callable[[int, int], bool]) -> list[int | None]:
    """Return, for each of ``count`` messages, the index of its partner (None: none found).

    Messages and partners are two in-order sequences of the same cycles, each with a few
    cycles missing. ``agree(k, j)`` says whether message k can belong with partner j.
    Pairs go in step while they agree; after a mismatch, the smallest skip (of messages,
    partners, or both; at most :data:`RESYNC_WINDOW` in all) after which a pair agrees is
    taken (a message with no such skip stays unpaired).
    """
    out: list[int | None] = [None] * count
    k = j = 0
    while k < count and j < partners:
        if agree(k, j):
            out[k] = j
            k += 1
            j += 1
            continue
        skip = _resync(k, j, count, partners, agree)
        if skip is None:
            k += 1
        else:
            k += skip[0]
            j += skip[1]
    return out


def _resync(k: int, j: int, count: int, partners: int, agree: Callable[[int, int], bool]
            ) -> tuple[int, int] | None:
    """Return the smallest (messages, partners) skip after which the pairs agree again."""
    for total in range(1, RESYNC_WINDOW + 1):
        for a in range(total + 1):
            b = total - a
            if k + a < count and j + b < partners and agree(k + a, j + b):
                return a, b
    return None


class _Timer:
    """Works out the log times of the held messages (see the module docstring)."""

    def __init__(self, messages: Sequence[HeldMessage], origin_ns: int,
                 wheelbase: float | None) -> None:
        self.messages = messages
        self.origin_ns = origin_ns
        self.wheelbase = wheelbase
        self.store = jazzy_typestore()
        n = len(messages)
        self.times: list[int | None] = [None] * n
        self.ranks = [RANKS['other']] * n
        self.answers: dict[float, float] = {}
        """Pose stamp [s] -> node time [s] of the first cycle that took it."""
        self.slots: dict[float, float] = {}
        """Pose stamp [s] -> simulated time [s] of the slot that sent it."""
        self.commands: list[tuple[int, float, float]] = []
        """(stamp [ns], speed [m/s], yaw rate [rad/s]) of each stamped command, in order."""
        self.poses: list[tuple[int, float]] = []
        self.float64: dict[str, list[int]] = {}
        self.command_stamps: list[int] = []
        self.cycle_times: list[int] = []
        """Indices of the ``~/terms`` messages (timed from float seconds, then snapped)."""

    def decode(self, msg: HeldMessage) -> Any:
        return self.store.deserialize_cdr(msg.data, msg.msgtype)

    def first_pass(self) -> None:
        """Time what carries its own time; note answers, slots, commands, poses."""
        for i, held in enumerate(self.messages):
            kind = held.msgtype
            if kind == FLOAT64_TYPE:
                self.ranks[i] = RANKS['float64']
                self.float64.setdefault(held.topic, []).append(i)
                continue
            msg = self.decode(held)
            if kind == CLOCK_TYPE:
                self.timed(i, _stamp_ns(msg.clock), 'clock')
            elif kind in _HEADER_STAMPED:
                rank = 'command' if kind in _STAMPED_COMMANDS else 'diagnostics'
                self.timed(i, _stamp_ns(msg.header.stamp), rank)
                if kind in _STAMPED_COMMANDS:
                    self.commands.append(_command(msg, self.wheelbase))
            elif kind == PARAMETER_EVENT_TYPE:
                self.timed(i, _stamp_ns(msg.stamp), 'parameters')
            elif kind == _ARRAY_TYPE:
                self.array(i, msg)
            elif kind in POSE_KINDS:
                self.ranks[i] = RANKS['pose']
                stamp = msg.header.stamp
                self.poses.append((i, int(stamp.sec) + int(stamp.nanosec) * 1e-9))

    def timed(self, i: int, ns: int, rank: str) -> None:
        self.times[i] = ns
        self.ranks[i] = RANKS[rank]

    def array(self, i: int, msg: Any) -> None:
        names = _labels(msg)
        values = [float(v) for v in msg.data]
        if len(names) != len(values) or 'time' not in names:
            return
        row = dict(zip(names, values))
        if not math.isfinite(row['time']):
            return
        if 'phase' in names:
            self.timed(i, _ns(row['time']) + self.origin_ns, 'state')
            stamp = row.get('pose_stamp', math.nan)
            if math.isfinite(stamp):
                self.slots.setdefault(stamp, row['time'])
        else:
            self.timed(i, _ns(row['time']), 'terms')
            self.cycle_times.append(i)
            stamp = row.get('stamp', math.nan)
            if math.isfinite(stamp):
                self.answers.setdefault(stamp, row['time'])

    def commands_pass(self) -> None:
        """Time each Float64 command by the stamped command of its cycle."""
        commands = self.commands
        for topic, indices in self.float64.items():
            values = [float(self.decode(self.messages[i]).data) for i in indices]
            agree = _agreement(topic, values, commands, self.wheelbase)
            for i, j in zip(indices, aligned(len(values), len(commands), agree)):
                if j is not None:
                    self.times[i] = commands[j][0]

    def poses_pass(self) -> None:
        """Time each pose by the cycle that took it, else by the slot that sent it."""
        answers = sorted(self.answers.items())
        slots = sorted(self.slots.items())
        a_keys, a_values = [k for k, _ in answers], [v for _, v in answers]
        s_keys, s_values = [k for k, _ in slots], [v for _, v in slots]
        for i, stamp in self.poses:
            node_time = _nearest(a_keys, a_values, stamp)
            if node_time is not None:
                self.times[i] = self.snapped(_ns(node_time))
                continue
            slot = _nearest(s_keys, s_values, stamp)
            if slot is not None:
                self.times[i] = _ns(slot) + self.origin_ns

    def snapped(self, ns: int) -> int:
        """Return the stamped command's exact time [ns] when ``ns`` is within 1 us of one.

        A node time sent as float seconds (``~/terms``) loses up to ~0.1 us at the size of
        a ROS system time; its cycle's ``cmd_vel`` carries the same instant to the ns.
        """
        stamps = self.command_stamps
        at = bisect.bisect_left(stamps, ns - 1_000)
        if at < len(stamps) and abs(stamps[at] - ns) <= 1_000:
            return stamps[at]
        return ns

    def snap_cycles(self) -> None:
        """Snap the ``~/terms`` times to their cycle's command stamps."""
        self.command_stamps = sorted(ns for ns, _, _ in self.commands)
        for i in self.cycle_times:
            ns = self.times[i]
            if ns is not None:
                self.times[i] = self.snapped(ns)

    def result(self) -> LogTimes:
        times = [t if t is not None else m.receive_ns
                 for t, m in zip(self.times, self.messages)]
        timed = sum(t is not None for t in self.times)
        return LogTimes(times, self.ranks, timed, len(times) - timed)


def _agreement(topic: str, values: list[float], commands: list[tuple[int, float, float]],
               wheelbase: float | None) -> Callable[[int, int], bool]:
    """Return whether value k of a Float64 command topic can be stamped command j's."""
    name = topic.rstrip('/').rpartition('/')[2]

    def same_speed(k: int, j: int) -> bool:
        return values[k] == commands[j][1]

    def same_yaw_rate(k: int, j: int) -> bool:
        assert wheelbase is not None
        return yaw_rate_from(values[k], commands[j][1], wheelbase) == commands[j][2]

    if name == 'target_speed':
        return same_speed
    if name == 'steering_angle' and wheelbase is not None:
        return same_yaw_rate
    return lambda k, j: True


def _command(msg: Any, wheelbase: float | None) -> tuple[int, float, float]:
    """Return (stamp [ns], speed [m/s], yaw rate [rad/s]) of a stamped command."""
    stamp = _stamp_ns(msg.header.stamp)
    if hasattr(msg, 'twist'):
        return stamp, float(msg.twist.linear.x), float(msg.twist.angular.z)
    speed = float(msg.drive.speed)
    angle = float(msg.drive.steering_angle)
    return stamp, speed, yaw_rate_from(angle, speed, wheelbase) if wheelbase else math.nan


def log_times(messages: Sequence[HeldMessage], origin_ns: int = 0,
              wheelbase: float | None = None) -> LogTimes:
    """Return the log time of every message (see the module docstring).

    Args:
        messages: the recorded messages in the order they were heard.
        origin_ns: ROS time [ns] of simulated time 0 (0 in the fast pace): turns the
            simulated vehicle's ``time`` fields into ROS time.
        wheelbase: the controller's ``vehicle.wheelbase`` [m], to check that a
            ``steering_angle`` belongs with a ``cmd_vel``; None pairs them by order alone.

    """
    timer = _Timer(messages, origin_ns, wheelbase)
    timer.first_pass()
    timer.snap_cycles()
    timer.commands_pass()
    timer.poses_pass()
    return timer.result()
