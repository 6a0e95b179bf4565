# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""The simulated vehicle node: a scenario's vehicle behind real topics (m, rad, s).

The plant, pose sensor and timeline are :class:`corridor_pid.demo.world.SimWorld` (built on
``corridor_pid.sim``: kinematic bicycle, steering actuator with dead time, rate limit and
lag, drive lag, pose sensor with rate, noise, delay and dropouts). This node puts them on
ROS topics (all names relative, so remappable):

* sub ``steering_angle``, ``target_speed`` (std_msgs/Float64, rad and m/s): the commands;
  each acts on the plant from the moment it is received (the steering after the plant's
  dead time).
* pub ``pose``: ``geometry_msgs/PoseStamped`` (``--pose-type pose_stamped``, default) or
  ``nav_msgs/Odometry`` (``odometry``, with the true speed and yaw rate) at the scenario's
  pose rate, with its noise, delay and dropouts; header stamp = the time the sample was
  taken.
* pub ``~/state`` (std_msgs/Float64MultiArray): after every pose slot, hold and at the end,
  the true state of the vehicle, layout :data:`corridor_pid.demo.world.SIM_STATE_FIELDS`.
* srv ``~/resume`` (std_srvs/Trigger): continue after a hold. The run starts held at t = 0.
* srv ``~/blackout`` (std_srvs/SetBool): true silences the pose sensor (samples taken while
  it is on are lost), false restores it: a localization outage on demand.

Pace (``--pace``):

* ``realtime``: simulated time follows the wall clock from the first resume; stamps are
  ROS time (the system clock) of the moment each sample was taken. Holds other than the
  start are not allowed (the controller would see the pose stream stall).
* ``fast``: simulated time runs as fast as the controller keeps up, on ``/clock``
  (rosgraph_msgs/Clock; run the controller with ``use_sim_time: true``). Lock-step: at each
  pose slot the node publishes ``/clock``, then the pose, and waits until the controller has
  answered that pose before the plant moves on. The answer is recognised by the
  controller's ``corridor_pid/terms`` message (Float64MultiArray whose ``stamp`` field is the
  pose's stamp) followed by the ``steering_angle`` and ``target_speed`` values it lists.
  While the controller's ``/diagnostics`` say it is not tracking (stopped, finished,
  disabled), no answer is expected and the node only lets pending messages in for a moment
  (``--idle-wait``), so a run stays fast while the watchdog holds the vehicle: after the
  ``/clock`` of a slot (so a watchdog tick the controller's timer makes at that clock
  value comes before the pose, the order the offline replay assumes) and after the pose.
  Those waits are wall-clock ones: a controller that needs longer to handle a ``/clock``
  may tick later, and that stretch of a run is then not exactly repeatable.

Caution: a simulation, not a vehicle. It says nothing about a real vehicle's safety.
"""

from __future__ import annotations

import argparse
from collections.abc import Callable, Sequence
import math
import sys
import textwrap
import time
from typing import Any

from builtin_interfaces.msg import Time as TimeMsg
from corridor_pid.core.errors import CorridorPidError, ScenarioError
from corridor_pid.demo.world import EventKind, Phase, SimWorld, STATE_NAMES
from corridor_pid.ros.process import caught_signals, ros_context, RosStartError
from corridor_pid.sim.scenario import load_scenario
from corridor_pid.sim.vehicle import yaw_rate
from diagnostic_msgs.msg import DiagnosticArray
from geometry_msgs.msg import PoseStamped
from nav_msgs.msg import Odometry
from rclpy.executors import ExternalShutdownException, SingleThreadedExecutor
from rclpy.node import Node
from rclpy.qos import QoSProfile, ReliabilityPolicy
from rosgraph_msgs.msg import Clock
from std_msgs.msg import Float64, Float64MultiArray, MultiArrayDimension
from std_srvs.srv import SetBool, Trigger

__all__ = ['NODE_NAME', 'PACES', 'POSE_TYPES', 'SimVehicleNode', 'build_parser', 'main',
           'stamp_message']

NODE_NAME = 'corridor_pid_sim'

PACES = ('realtime', 'fast')
POSE_TYPES = ('pose_stamped', 'odometry')

ANSWER_WAIT = 5.0
"""Wall seconds the fast pace waits for the controller's answer to a pose while it tracks.
Only a failure lasts this long (a controller that died); then the run goes on without it."""

MATCH_WAIT = 1.0
"""Wall seconds to wait for the command messages an answer lists."""

_TRACKING_STATES = ('tracking', 'waiting', '')


def stamp_message(seconds: float) -> TimeMsg:
    """Return ``builtin_interfaces/Time`` for ``seconds`` [s] (rounded to the nanosecond)."""
    return _time_message(round(seconds * 1e9))


def _time_message(ns: int) -> TimeMsg:
    return TimeMsg(sec=ns // 1_000_000_000, nanosec=ns % 1_000_000_000)


def _quaternion_z_w(yaw: float) -> tuple[float, float]:
    return math.sin(0.5 * yaw), math.cos(0.5 * yaw)


class SimVehicleNode(Node):
    """Simulated vehicle: commands in, pose (and /clock) out, on a :class:`SimWorld`."""

    def __init__(self, world: SimWorld, pace: str, pose_type: str = 'pose_stamped',
                 idle_wait: float = 0.01, pose_readers: int = 1, **kwargs: Any) -> None:
        """Create publishers, subscriptions and services; the run starts held at t = 0."""
        super().__init__(NODE_NAME, **kwargs)
        self.log = self.get_logger()  # type: ignore[no-untyped-call]
        self.world = world
        self.pace = pace
        self.pose_type = pose_type
        self.idle_wait = idle_wait
        self.pose_readers = pose_readers
        deep = QoSProfile(  # type: ignore[no-untyped-call]
            depth=100, reliability=ReliabilityPolicy.RELIABLE)
        # A deep history: a slow reliable reader (the demo's recorder under load) can
        # still have a lost sample repaired.
        self._pose_pub = self.create_publisher(
            Odometry if pose_type == 'odometry' else PoseStamped, 'pose', deep)
        self._state_pub = self.create_publisher(Float64MultiArray, '~/state', deep)
        self._clock_pub = (self.create_publisher(Clock, '/clock', deep)
                           if pace == 'fast' else None)
        self._state_layout = [MultiArrayDimension(
            label=','.join(STATE_NAMES), size=len(STATE_NAMES), stride=len(STATE_NAMES))]
        self._command_subs = [
            self.create_subscription(Float64, 'steering_angle', self.steering_callback, deep),
            self.create_subscription(Float64, 'target_speed', self.speed_callback, deep)]
        self._terms_sub = self.create_subscription(
            Float64MultiArray, 'corridor_pid/terms', self.terms_callback, deep)
        self.create_subscription(DiagnosticArray, '/diagnostics', self.diagnostics_callback,
                                 deep)
        self.create_service(Trigger, '~/resume', self.resume_callback)
        self.create_service(SetBool, '~/blackout', self.blackout_callback)
        self.controller_state = ''
        self.resumed = False
        self.origin_ns = 0
        """ROS time [ns] of simulated time 0 (realtime pace; 0 in the fast pace)."""
        self._wall_origin = 0.0
        self._answers: dict[float, tuple[float, float, float]] = {}
        self._terms_index: dict[str, int] = {}
        self.answered = 0
        self.unanswered = 0
        self.clock_lags = 0
        self.log.info(
            f'{pace} pace, {world.duration:g} s, pose {pose_type} at '
            f'{world.scenario.pose_rate:g} Hz; held at t = 0 until ~/resume')

    # -- callbacks ----------------------------------------------------------------------

    def _catch_up(self) -> None:
        if self.pace == 'realtime' and self.resumed:
            self.world.advance_to(time.monotonic() - self._wall_origin)

    def steering_callback(self, msg: Float64) -> None:
        """Steer the plant with the received angle [rad]."""
        self._catch_up()
        self.world.steer(float(msg.data))

    def speed_callback(self, msg: Float64) -> None:
        """Drive the plant with the received speed [m/s]."""
        self._catch_up()
        self.world.drive(float(msg.data))

    def terms_callback(self, msg: Float64MultiArray) -> None:
        """Note the controller's answer to a pose: stamp -> (node time, steering, speed)."""
        if not self._terms_index:
            labels = msg.layout.dim[0].label.split(',') if msg.layout.dim else []
            self._terms_index = {name: i for i, name in enumerate(labels)}
        index = self._terms_index
        try:
            data = msg.data
            self._answers[round(data[index['stamp']], 6)] = (
                data[index['time']], data[index['steering']], data[index['speed']])
        except (KeyError, IndexError):
            return

    def diagnostics_callback(self, msg: DiagnosticArray) -> None:
        """Follow the controller's state (for the fast pace's waits)."""
        for status in msg.status:
            for kv in status.values:
                if kv.key == 'state':
                    self.controller_state = kv.value

    def resume_callback(self, request: Trigger.Request,
                        response: Trigger.Response) -> Trigger.Response:
        """Continue after a hold."""
        self.resumed = True
        response.success = True
        response.message = f'resumed at t = {self.world.time:g} s'
        return response

    def blackout_callback(self, request: SetBool.Request,
                          response: SetBool.Response) -> SetBool.Response:
        """Switch the pose blackout on (true) or off (false)."""
        self._catch_up()
        before = self.world.blackout
        self.world.blackout = bool(request.data)
        response.success = True
        response.message = (f"blackout {'on' if request.data else 'off'} at "
                            f't = {self.world.time:g} s'
                            + ('' if before != self.world.blackout else ' (unchanged)'))
        self.log.info(response.message)
        return response

    # -- publishing ---------------------------------------------------------------------

    def ros_stamp_ns(self, sim_time: float) -> int:
        """Return the ROS time [ns] of a simulated time [s] (exact to the nanosecond)."""
        return self.origin_ns + round(sim_time * 1e9)

    def publish_clock(self, sim_time: float) -> None:
        """Publish /clock at ``sim_time`` [s] (fast pace only)."""
        if self._clock_pub is not None:
            msg = Clock()
            msg.clock = stamp_message(sim_time)
            self._clock_pub.publish(msg)

    def publish_pose(self, stamp_ns: int, x: float, y: float, yaw: float,
                     frame_id: str) -> None:
        """Publish one pose sample: stamp [ns] (ROS time), x, y [m], yaw [rad]."""
        qz, qw = _quaternion_z_w(yaw)
        plant = self.world.plant
        msg: Any
        if self.pose_type == 'odometry':
            msg = Odometry()
            msg.child_frame_id = 'base_link'
            pose = msg.pose.pose
            msg.twist.twist.linear.x = plant.drive.speed
            msg.twist.twist.angular.z = yaw_rate(plant.drive.speed, plant.steering.angle,
                                                 plant.wheelbase)
        else:
            msg = PoseStamped()
            pose = msg.pose
        msg.header.stamp = _time_message(stamp_ns)
        msg.header.frame_id = frame_id
        pose.position.x = x
        pose.position.y = y
        pose.orientation.z = qz
        pose.orientation.w = qw
        self._pose_pub.publish(msg)

    def publish_state(self, pose_stamp: float = math.nan, node_time: float = math.nan,
                      phase: Phase = Phase.RUNNING) -> None:
        """Publish the true state row (:data:`SIM_STATE_FIELDS`)."""
        msg = Float64MultiArray()
        msg.layout.dim = self._state_layout
        msg.data = list(self.world.row(pose_stamp, node_time, phase))
        self._state_pub.publish(msg)

    def connected(self) -> bool:
        """Return whether the controller is matched: pose readers, command and clock links."""
        ok = (self._pose_pub.get_subscription_count() >= self.pose_readers
              and all(sub.get_publisher_count() >= 1 for sub in self._command_subs))
        if self._clock_pub is not None:
            ok = (ok and self._clock_pub.get_subscription_count() >= 1
                  and self._terms_sub.get_publisher_count() >= 1)
        return ok

    # -- the run ------------------------------------------------------------------------

    def take_answer(self, stamp: float) -> tuple[float, float, float] | None:
        """Return and forget the controller's answer to the pose stamped ``stamp`` [s]."""
        answer = self._answers.pop(round(stamp, 6), None)
        # Answers to older poses (late ones) are of no more use.
        for key in [k for k in self._answers if k < stamp]:
            del self._answers[key]
        return answer

    def matches(self, steering: float, speed: float) -> bool:
        """Return whether the last commands received are ``steering`` and ``speed``."""
        return (self.world.steer_command == steering and self.world.speed_command == speed)


class _StopRequestedError(Exception):
    """A signal asked the run to end."""


def _spin_until(executor: SingleThreadedExecutor, condition: Callable[[], bool],
                timeout: float, stop: Callable[[], bool]) -> bool:
    """Spin until ``condition()`` or ``timeout`` wall seconds; return ``condition()``."""
    deadline = time.monotonic() + timeout
    while not condition():
        if stop():
            raise _StopRequestedError
        left = deadline - time.monotonic()
        if left <= 0.0:
            return condition()
        executor.spin_once(timeout_sec=min(left, 0.05))
    return True


HELD_REPEAT = 0.25
"""Wall seconds between repeats of the held state row (late subscribers see it too)."""


def _hold(node: SimVehicleNode, executor: SingleThreadedExecutor,
          stop: Callable[[], bool]) -> None:
    """Publish the held state row (repeatedly) until ``~/resume`` is called."""
    node.resumed = False
    while True:
        node.publish_state(phase=Phase.HELD)
        if _spin_until(executor, lambda: node.resumed, HELD_REPEAT, stop):
            return


def run(node: SimVehicleNode, executor: SingleThreadedExecutor,
        stop: Callable[[], bool]) -> None:
    """Run the timeline to its end, then keep serving until ``stop()``."""
    world = node.world
    fast = node.pace == 'fast'
    node.publish_clock(0.0)
    _hold(node, executor, stop)
    if not node.connected():
        node.log.info('waiting for the controller to be matched on every topic')
        _spin_until(executor, node.connected, math.inf, stop)
    if not fast:
        node.origin_ns = node.get_clock().now().nanoseconds
    node._wall_origin = time.monotonic()
    while True:
        if not fast:
            # Real time: let commands in until the wall clock reaches the next event.
            due = node._wall_origin + world.next_time()
            while (left := due - time.monotonic()) > 0.0:
                if stop():
                    raise _StopRequestedError
                executor.spin_once(timeout_sec=min(left, 0.05))
        # Real time: stop at each sample taken too, so the pose waits out its delay.
        event = world.next_event(samples=not fast)
        if event.kind is EventKind.SAMPLE:
            continue
        node.publish_clock(event.time)
        if event.kind is EventKind.END:
            node.publish_state(phase=Phase.FINISHED)
            node.log.info(
                f'end of run at t = {event.time:g} s; {node.answered} poses answered in '
                f'lock-step, {node.unanswered} not, {node.clock_lags} on a late clock')
            break
        if event.kind is EventKind.HOLD:
            if fast:
                _hold(node, executor, stop)
            continue
        sample = event.sample
        if sample is None:
            if fast:
                # Let the controller's timer-driven commands (watchdog ramp) in.
                _spin_until(executor, lambda: False, node.idle_wait, stop)
            node.publish_state()
            continue
        stamp_ns = node.ros_stamp_ns(sample.stamp)
        stamp = stamp_ns * 1e-9
        expecting = node.controller_state in _TRACKING_STATES
        if fast and not expecting:
            # Let a timer tick of the controller at this clock value go first.
            _spin_until(executor, lambda: False, node.idle_wait, stop)
        node.publish_pose(stamp_ns, sample.x, sample.y, sample.yaw, sample.frame_id)
        node_time = math.nan
        if fast:
            wait = ANSWER_WAIT if expecting else node.idle_wait
            found: list[tuple[float, float, float]] = []

            def answered(stamp: float = stamp, found: list[Any] = found) -> bool:
                if not found:
                    answer = node.take_answer(stamp)
                    if answer is not None:
                        found.append(answer)
                return bool(found)

            if _spin_until(executor, answered, wait, stop):
                node_time, steering, speed = found[0]
                _spin_until(executor, _matching(node, steering, speed), MATCH_WAIT, stop)
                node.answered += 1
                if abs(node_time - event.time) > 1e-6:
                    node.clock_lags += 1
            else:
                node.unanswered += 1
        node.publish_state(stamp, node_time)
    while not stop():
        executor.spin_once(timeout_sec=0.1)


def _matching(node: SimVehicleNode, steering: float, speed: float) -> Callable[[], bool]:
    return lambda: node.matches(steering, speed)


def build_parser() -> argparse.ArgumentParser:
    """Return the argument parser of the simulated vehicle node."""
    from corridor_pid.cli import SAFETY

    parser = argparse.ArgumentParser(
        prog='corridor_pid_sim', formatter_class=argparse.RawDescriptionHelpFormatter,
        description=textwrap.fill(
            'Simulated vehicle for corridor_pid: subscribes to steering_angle and '
            "target_speed, publishes the pose of a scenario's vehicle (and /clock with "
            '--pace fast). Starts held at t = 0: call ~/resume to run. ROS arguments go '
            'after --ros-args.', width=79),
        epilog='A simulation only: it says nothing about the safety of a real vehicle.\n\n'
               + SAFETY)
    parser.add_argument('scenario', metavar='SCENARIO', help='scenario YAML file')
    parser.add_argument('--pace', choices=PACES, default='realtime',
                        help='realtime (wall clock) or fast (lock-step on /clock); '
                             'default: %(default)s')
    parser.add_argument('--duration', metavar='S', type=float,
                        help="length of the run [s] (default: the scenario's)")
    parser.add_argument('--hold', metavar='T', type=float, action='append', default=[],
                        help='stop the timeline at simulated time T [s] until ~/resume '
                             '(fast pace; repeatable)')
    parser.add_argument('--pose-type', choices=POSE_TYPES, default='pose_stamped',
                        help='message of the pose topic (default: %(default)s)')
    parser.add_argument('--frame-id', default='map',
                        help='frame id of the poses (default: %(default)s)')
    parser.add_argument('--pose-readers', metavar='N', type=int, default=1,
                        help='start only once N subscriptions read the pose (default: '
                             '%(default)s)')
    parser.add_argument('--idle-wait', metavar='S', type=float, default=0.01,
                        help='fast pace: wall seconds to let messages in at a slot with no '
                             'answer expected (default: %(default)s)')
    return parser


def _options(argv: Sequence[str]) -> tuple[argparse.Namespace, list[str]] | int:
    """Parse our part of ``argv``; return (options, ROS arguments) or an exit code."""
    from corridor_pid.ros.parameters import split_ros_args

    plain, ros_args = split_ros_args(argv)
    parser = build_parser()
    try:
        options = parser.parse_args(plain)
    except SystemExit as done:
        return done.code if isinstance(done.code, int) else 2
    if options.duration is not None and not (options.duration > 0.0
                                             and math.isfinite(options.duration)):
        _error(f'--duration: expected a finite number > 0, got {options.duration!r}')
        return 2
    if options.pose_readers < 0:
        _error(f'--pose-readers: expected a whole number >= 0, got {options.pose_readers!r}')
        return 2
    if options.idle_wait < 0.0 or not math.isfinite(options.idle_wait):
        _error(f'--idle-wait: expected a finite number >= 0, got {options.idle_wait!r}')
        return 2
    if options.pace == 'realtime' and any(t > 0.0 for t in options.hold):
        _error('--hold: only the fast pace can hold the timeline after the start')
        return 2
    return options, ros_args


def _error(message: str) -> None:
    print(f'ERROR: {message}', file=sys.stderr, flush=True)


def main(args: Sequence[str] | None = None) -> int:
    """Run the simulated vehicle until SIGINT/SIGTERM; return the exit code."""
    argv = list(sys.argv[1:] if args is None else args)
    parsed = _options(argv)
    if isinstance(parsed, int):
        return parsed
    options, ros_args = parsed
    try:
        scenario = load_scenario(options.scenario)
        world = SimWorld(scenario, options.duration, options.hold, options.frame_id)
    except (ScenarioError, CorridorPidError) as err:
        _error(str(err))
        return 1

    with caught_signals() as signals:
        try:
            with ros_context(['corridor_pid_sim', '--ros-args', *ros_args]) as context:
                node: SimVehicleNode | None = None
                try:
                    node = SimVehicleNode(world, options.pace, options.pose_type,
                                          options.idle_wait, options.pose_readers,
                                          context=context)
                    executor = SingleThreadedExecutor(context=context)
                    executor.add_node(node)
                    try:
                        run(node, executor, lambda: bool(signals) or not context.ok())
                    except (_StopRequestedError, ExternalShutdownException):
                        pass
                    executor.shutdown(timeout_sec=1.0)
                    return 0
                finally:
                    if node is not None:
                        node.destroy_node()  # type: ignore[no-untyped-call]
        except RosStartError as err:
            _error(str(err))
            return 1


if __name__ == '__main__':
    sys.exit(main())
