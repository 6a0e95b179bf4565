# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Replay a bag through a running controller node over DDS, and collect its commands.

The helper your own tests call to "replay a bag through it": :func:`play_bag` reads the pose
topic of a rosbag2 bag (sqlite3 or MCAP, with rosbags), publishes the poses to the node's
``pose`` topic and gathers what the node sends back: its ``steering_angle`` and
``target_speed`` messages, and per pose the command it computed (from the node's
``~/terms``, whose ``stamp`` field names the pose).

Two paces:

* ``sim_time=True`` (the node runs with ``use_sim_time: true``): lock-step on ``/clock``,
  as fast as the node answers. Before each pose the player publishes ``/clock`` = the
  pose's receive time (the node clock the recording saw), then the pose, then calls the
  node's ``get_parameters`` service and waits for the answer. The node's executor serves
  the service only after the pose that arrived before the request, so when the answer is
  in, the node has taken the pose at that clock; the next ``/clock`` cannot overtake it.
  Between poses ``/clock`` also visits every multiple of ``clock_step``, each taken,
  with the timer callbacks it made due, before the next (three answered requests, see
  ``_Player.settle_clock``), so the node's watchdog timer ticks where it would have
  (choose a ``clock_step`` that divides the node's watchdog tick). This pace is
  deterministic: the node sees the clock, stamps and ticks the offline replay
  (``corridor-pid replay``) uses, so the commands agree with it message for message (see
  the tests).
* ``sim_time=False``: the poses go out at the recorded pace (divided by ``rate``) on the
  wall clock; the node uses its own clock. Realistic, but not repeatable.

A pose published before the node's subscription has matched the player would be lost, so
the player first primes the subscription with poses the controller rejects (a NaN
position: nothing but the node's rejected-pose count changes) until the node's
``/diagnostics`` show one arrived, and under sim time sends one more at the first pose's
clock so the node's command history starts exactly where the offline replay's does. The
node's ``rejected_poses`` therefore includes :attr:`Playback.primed` poses from the player.

Every rclpy process must stay on this machine: call
:func:`corridor_pid.ros.isolation.isolate_this_process` (or run under the test suite's
conftest) before playing.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field
import importlib
import math
from pathlib import Path
import time
from typing import Any, NamedTuple

from builtin_interfaces.msg import Time as TimeMsg
from corridor_pid.core.errors import ReplayError
from corridor_pid.replay.bag import opened_bag, pose_connections, raw_streams
from corridor_pid.replay.track import pose_track, PoseTrack
from corridor_pid.ros.node import NODE_NAME, TERMS_FIELDS
from diagnostic_msgs.msg import DiagnosticArray
from rcl_interfaces.srv import GetParameters
import rclpy
from rclpy.context import Context
from rclpy.executors import SingleThreadedExecutor
from rclpy.node import Node
from rclpy.qos import QoSProfile, ReliabilityPolicy
from rclpy.serialization import deserialize_message
from rclpy.utilities import try_shutdown
from rosgraph_msgs.msg import Clock
from std_msgs.msg import Float64, Float64MultiArray

__all__ = ['DEFAULT_TIMEOUT', 'Playback', 'PlayedPose', 'play_bag']

DEFAULT_TIMEOUT = 60.0
"""Wall seconds any single wait may take before the player gives up (a failure bound only:
every wait ends as soon as its condition holds)."""

_STAMP = TERMS_FIELDS.index('stamp')
_TIME = TERMS_FIELDS.index('time')
_STEERING = TERMS_FIELDS.index('steering')
_SPEED = TERMS_FIELDS.index('speed')
_PRIME_STEP = 1.0  # s of /clock per priming attempt: at least one diagnostics period
_CLOCK_HOPS = 3   # answered requests after a /clock until its timers have surely run


class PlayedPose(NamedTuple):
    """One pose as played, and the node's answer to it."""

    bag_index: int
    """Index of the pose in the bag's pose topic."""
    stamp: float
    """Header stamp the node saw (s)."""
    clock: float | None
    """``/clock`` published for this pose (s); None at the recorded pace."""
    steering: float | None
    """Steering the node computed for this pose (rad); None when it computed nothing."""
    speed: float | None
    """Speed the node computed for this pose (m/s); None when it computed nothing."""
    node_time: float | None
    """The node's clock in that cycle (s), from ``~/terms``."""


@dataclass
class Playback:
    """What a play of a bag gave: per pose, and every command message in arrival order."""

    track: PoseTrack
    poses: list[PlayedPose]
    steering_angle: list[float] = field(default_factory=list)
    """Every ``steering_angle`` value the node sent while playing (rad)."""
    target_speed: list[float] = field(default_factory=list)
    """Every ``target_speed`` value the node sent while playing (m/s)."""
    primed: int = 0
    """Rejected priming poses the player sent before the bag's poses."""

    def commanded(self) -> list[PlayedPose]:
        """Return the poses the node computed a command for, in order."""
        return [p for p in self.poses if p.steering is not None]

    def clock_mismatches(self) -> list[PlayedPose]:
        """Return the poses the node took at another clock than the player published."""
        return [p for p in self.poses if p.clock is not None and p.node_time is not None
                and abs(p.node_time - p.clock) > 1e-6]


def _message_class(msgtype: str) -> Any:
    package, _, name = msgtype.partition('/msg/')
    return getattr(importlib.import_module(f'{package}.msg'), name)


def _time_msg(seconds_ns: int) -> TimeMsg:
    return TimeMsg(sec=seconds_ns // 1_000_000_000, nanosec=seconds_ns % 1_000_000_000)


def _reliable(depth: int = 1000) -> QoSProfile:
    reliable = ReliabilityPolicy.RELIABLE
    return QoSProfile(depth=depth, reliability=reliable)  # type: ignore[no-untyped-call]


def _bag_track(bag: str | Path, pose_topic: str | None, pose_kind: str | None,
               stamps: str) -> tuple[PoseTrack, list[bytes]]:
    with opened_bag(bag) as reader:
        conns = pose_connections(reader, pose_topic, pose_kind)
        stream = raw_streams(reader, conns)[conns[0].topic]
    return pose_track(stream, stamps), [bytes(raw) for raw in stream.data]


class _Player:
    """The player's rclpy side: publishers, recorders, the barrier client."""

    def __init__(self, context: Context, namespace: str, node_name: str, msg_class: Any,
                 pose_topic: str, sim_time: bool, timeout: float,
                 alive: Callable[[], None] | None) -> None:
        ns = namespace.rstrip('/')
        self.fqn = f'{ns}/{node_name}'
        self.timeout = timeout
        self.alive = alive
        self.node = Node('corridor_pid_bag_player', context=context,
                         start_parameter_services=False)
        self.executor = SingleThreadedExecutor(context=context)
        self.executor.add_node(self.node)
        self.pose_pub = self.node.create_publisher(msg_class, pose_topic, _reliable())
        self.clock_pub = (self.node.create_publisher(Clock, '/clock', _reliable(10))
                          if sim_time else None)
        self.steering: list[float] = []
        self.speed: list[float] = []
        self.terms: dict[float, tuple[float, float, float]] = {}
        self.rejected: list[int] = []
        node = self.node
        self.subs = [
            node.create_subscription(Float64, f'{ns}/steering_angle',
                                     self._steering_callback, _reliable()),
            node.create_subscription(Float64, f'{ns}/target_speed',
                                     self._speed_callback, _reliable()),
            node.create_subscription(Float64MultiArray, f'{self.fqn}/terms',
                                     self._terms_callback, _reliable()),
            node.create_subscription(DiagnosticArray, '/diagnostics',
                                     self._diagnostics_callback, _reliable()),
        ]
        self.barrier = node.create_client(GetParameters, f'{self.fqn}/get_parameters')

    def _steering_callback(self, msg: Float64) -> None:
        self.steering.append(float(msg.data))

    def _speed_callback(self, msg: Float64) -> None:
        self.speed.append(float(msg.data))

    def _terms_callback(self, msg: Float64MultiArray) -> None:
        data = msg.data
        self.terms[float(data[_STAMP])] = (
            float(data[_TIME]), float(data[_STEERING]), float(data[_SPEED]))

    def _diagnostics_callback(self, msg: DiagnosticArray) -> None:
        for status in msg.status:
            if status.name.startswith(f'{self.fqn}:'):
                for kv in status.values:
                    if kv.key == 'rejected_poses':
                        self.rejected.append(int(kv.value))

    def spin_until(self, condition: Callable[[], bool], what: str,
                   timeout: float | None = None) -> bool:
        """Spin until ``condition()``; False after ``timeout`` (None: raise ReplayError)."""
        limit = self.timeout if timeout is None else timeout
        deadline = time.monotonic() + limit
        while not condition():
            if self.alive is not None:
                self.alive()
            if time.monotonic() > deadline:
                if timeout is not None:
                    return False
                raise ReplayError(f'timed out after {limit:g} s waiting for {what}')
            self.executor.spin_once(timeout_sec=0.01)
        return True

    def drain(self) -> None:
        """Run every callback whose message has already arrived."""
        self.executor.spin_once(timeout_sec=0.0)
        self.executor.spin_once(timeout_sec=0.0)

    def wait_for_discovery(self) -> None:
        """Wait until the node's topics and its parameter service have matched the player."""
        pubs = [self.pose_pub] + ([self.clock_pub] if self.clock_pub is not None else [])
        self.spin_until(lambda: all(p.get_subscription_count() > 0 for p in pubs),
                        f'the node {self.fqn!r} to subscribe to the pose (and /clock)')
        self.spin_until(lambda: all(s.get_publisher_count() > 0 for s in self.subs),
                        f'the outputs of {self.fqn!r}')
        self.spin_until(self.barrier.service_is_ready, f'{self.fqn}/get_parameters')

    def sync(self) -> None:
        """Return once the node has served every message the player sent before."""
        future = self.barrier.call_async(GetParameters.Request(names=[]))
        self.spin_until(future.done, f'{self.fqn} to answer get_parameters')
        self.drain()

    def settle_clock(self) -> None:
        """Return once the node has taken the last ``/clock`` and run the timers it made due.

        On rclpy's events executor a timer made due by ``/clock`` runs two queued events
        after the clock message (the clock-jump handling, then the timer dispatch); a
        request sent after an answer is queued behind the next of them. So three answered
        requests in a row: the timer has run before the third is served, and a pose sent
        next cannot overtake it.
        """
        for _ in range(_CLOCK_HOPS):
            self.sync()

    def publish_clock(self, ns: int) -> None:
        assert self.clock_pub is not None
        self.clock_pub.publish(Clock(clock=_time_msg(ns)))

    def close(self) -> None:
        self.executor.shutdown()
        self.node.destroy_node()  # type: ignore[no-untyped-call]


def _rejected_pose(msg_class: Any) -> Any:
    """Return a pose the controller rejects (non-finite position) and otherwise ignores."""
    msg = msg_class()
    pose = msg.pose if hasattr(msg.pose, 'position') else msg.pose.pose
    pose.position.x = math.nan
    pose.orientation.w = 1.0
    return msg


def _prime(player: _Player, msg_class: Any, first_ns: int, sim_time: bool) -> int:
    """Send rejected poses until the node's diagnostics count one; return how many."""
    clock_ns = max(first_ns - 500 * 1_000_000_000, 1_000_000)
    for _ in range(60):
        if sim_time:
            player.publish_clock(clock_ns)
            clock_ns += int(_PRIME_STEP * 1e9)
        if player.spin_until(lambda: bool(player.rejected), 'diagnostics',
                             timeout=2.0 * _PRIME_STEP):
            break
    else:
        raise ReplayError(f'no /diagnostics from the node {player.fqn!r}')
    base = player.rejected[-1]
    sent = 0
    while True:
        player.pose_pub.publish(_rejected_pose(msg_class))
        sent += 1
        player.sync()
        if sim_time:
            clock_ns += int(_PRIME_STEP * 1e9)
            player.publish_clock(clock_ns)
        if player.spin_until(lambda: player.rejected[-1] > base, 'a rejected pose',
                             timeout=2.0 * _PRIME_STEP):
            return sent
        if sent > 100:
            raise ReplayError(f'the node {player.fqn!r} never took a pose of the player')


def play_bag(bag: str | Path, *, namespace: str = '', node_name: str = NODE_NAME,
             pose_topic: str | None = None, pose_kind: str | None = None,
             stamps: str = 'header', sim_time: bool = True, rate: float = 1.0,
             clock_step: float = 0.005, node_pose_topic: str | None = None,
             timeout: float = DEFAULT_TIMEOUT,
             alive: Callable[[], None] | None = None) -> Playback:
    """Play the pose topic of ``bag`` into a running controller node; return its answers.

    Args:
        bag: the rosbag2 bag directory (sqlite3 or MCAP).
        namespace: the node's namespace ('' or e.g. '/cart').
        node_name: the node's name.
        pose_topic: the bag's pose topic (default: as ``corridor-pid replay`` picks it).
        pose_kind: expected pose kind of that topic.
        stamps: 'header' (publish the poses as recorded) or 'receive' (rewrite each header
            stamp to the pose's receive time, as ``replay --stamps receive`` sees it).
        sim_time: lock-step on ``/clock`` (the node runs with ``use_sim_time: true``);
            False plays at the recorded pace on the wall clock.
        rate: speed-up of the recorded pace when ``sim_time`` is False.
        clock_step: between poses ``/clock`` also visits every multiple of this (s), so the
            node's timers fire on time; when the node's watchdog period is a multiple of it,
            at exactly the times the offline replay ticks.
        node_pose_topic: the node's pose topic (default ``<namespace>/pose``).
        timeout: wall seconds any single wait may take.
        alive: called while waiting; raise from it to stop early (e.g. the node process
            exited: ``NodeProcess.check_running``).

    Raises:
        ReplayError: the bag cannot be read, or the node does not answer in time.

    """
    if not rate > 0.0 or not clock_step > 0.0:
        raise ReplayError(f'rate and clock_step must be > 0, got {rate!r} and {clock_step!r}')
    track, raws = _bag_track(bag, pose_topic, pose_kind, stamps)
    msg_class = _message_class(
        {'pose_stamped': 'geometry_msgs/msg/PoseStamped',
         'pose_with_covariance': 'geometry_msgs/msg/PoseWithCovarianceStamped',
         'odometry': 'nav_msgs/msg/Odometry'}[track.kind])
    context = Context()
    rclpy.init(context=context)
    player: _Player | None = None
    try:
        player = _Player(context, namespace, node_name, msg_class,
                         node_pose_topic or f'{namespace.rstrip("/")}/pose', sim_time,
                         timeout, alive)
        player.wait_for_discovery()
        receive = track.receive_ns.tolist()
        primed = _prime(player, msg_class, receive[0], sim_time)
        if sim_time:
            # Start the node's command history at the first pose's clock, as offline.
            player.publish_clock(receive[0])
            player.settle_clock()
            player.pose_pub.publish(_rejected_pose(msg_class))
            primed += 1
            player.sync()
        clocks = _play(player, track, raws, msg_class, sim_time, rate, clock_step)
        if not sim_time:
            # The last answers may still be on their way: wait for the last pose's, or
            # for the outputs to stay quiet a moment.
            last = float(track.stamp[-1])
            player.spin_until(lambda: last in player.terms, 'the last answer', timeout=2.0)
        poses = []
        for i, stamp in enumerate(track.stamp.tolist()):
            answer = player.terms.get(stamp)
            poses.append(PlayedPose(
                i, stamp, clocks[i], None if answer is None else answer[1],
                None if answer is None else answer[2], None if answer is None else answer[0]))
        return Playback(track, poses, list(player.steering), list(player.speed), primed)
    finally:
        if player is not None:
            player.close()
        try_shutdown(context=context)


def _play(player: _Player, track: PoseTrack, raws: list[bytes], msg_class: Any,
          sim_time: bool, rate: float, clock_step: float) -> list[float | None]:
    """Publish every pose (lock-step or paced); return the clock published per pose (s)."""
    receive = track.receive_ns.tolist()
    step_ns = max(1, int(clock_step * 1e9))
    rewrite = track.stamps == 'receive'
    clocks: list[float | None] = []
    wall0 = time.monotonic()
    last_ns = receive[0]
    for i, raw in enumerate(raws):
        ns = receive[i]
        message: Any = raw
        if rewrite:
            message = deserialize_message(raw, msg_class)
            message.header.stamp = _time_msg(ns)
        if sim_time:
            # Every multiple of clock_step on the way, each taken before the next, so the
            # node's timers fire where they would have (at their period's multiples).
            grid = (last_ns // step_ns + 1) * step_ns
            while grid < ns:
                player.publish_clock(grid)
                player.settle_clock()
                grid += step_ns
            player.publish_clock(ns)
            last_ns = ns
            player.pose_pub.publish(message)
            player.sync()
            clocks.append(ns * 1e-9)
        else:
            due = wall0 + (ns - receive[0]) * 1e-9 / rate
            while time.monotonic() < due:
                player.executor.spin_once(timeout_sec=min(0.005, max(0.0, due - time.monotonic())))
            player.pose_pub.publish(message)
            player.drain()
            clocks.append(None)
    return clocks
