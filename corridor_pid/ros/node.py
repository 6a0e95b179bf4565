# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""The ``corridor_pid`` controller node: a thin rclpy shell around ``Controller.step``.

Interface (all names relative, so remappable; see DESIGN §4):

* sub ``pose`` — ``PoseStamped`` (``pose_type``: ``pose_stamped``), ``PoseWithCovarianceStamped``
  (``pose_with_covariance``) or ``Odometry`` (``odometry``; also gives speed and yaw rate);
  QoS ``pose_qos``: ``sensor_data`` (best effort) or ``reliable``.
* pub, in this order on every control cycle: ``steering_angle`` (Float64, rad),
  ``target_speed`` (Float64, m/s), ``cmd_vel`` (TwistStamped, or Twist with
  ``cmd_vel_stamped: false``; linear.x = speed, angular.z = speed * tan(steer) / wheelbase),
  ``ackermann_drive`` (AckermannDriveStamped, only with ``output_type: ackermann``), and
  ``~/terms`` (Float64MultiArray, the terms of the cycle, layout :data:`TERMS_FIELDS`).
* pub ``/diagnostics`` (DiagnosticArray) at ``diagnostics.rate`` and at once on every state
  change: state, rejected-pose count, watchdog stops, saturation flags, the terms and the
  gains in force (keys :data:`DIAGNOSTIC_KEYS`).
* srv ``~/enable`` (std_srvs/SetBool); the node starts disabled unless ``start_enabled``.

Timing: a command is computed on each pose arrival (``control.rate: 0.0``) or on a timer at
``control.rate`` (each tick steps on the newest pose received since the last tick, or holds
the last command when none came; a pose overtaken before a tick is neither used nor counted);
``t`` is always the node clock, so ``use_sim_time`` works. A watchdog
timer (ticking twice per ``corridor_pid.core.timing.watchdog_period``) steps the controller
without a pose, so a stale pose stream stops the vehicle within ``watchdog.timeout`` plus
one period, with half a period of slack for a late timer.
While not tracking, that timer publishes the ramp-down (speed to 0 at ``speed.max_decel``,
counted from the last command sent; a watchdog stop starts its ramp at the stop, so its first
command steps down by one timer period of deceleration; steering back to trim within its
rate limit). While
``stopped`` or ``finished`` it keeps publishing the resting command; while ``disabled`` or
``waiting`` it publishes until the command is at rest and then stays silent, so another
driver may command the vehicle.

Executor: rclpy's events executor where the installed rclpy has it (lowest latency), else
the single-threaded executor; ``CORRIDOR_PID_EXECUTOR=single`` forces the latter.

Shutdown rule: every stop ramps at ``speed.max_decel`` while the node runs. On SIGINT or
SIGTERM the process is about to end and cannot ramp, so the node publishes one final
command with speed 0 and steering at trim on every command output, waits (briefly) for
reliable subscribers to acknowledge it, and exits 0. rclpy is initialised without its own
signal handlers; the node installs its own.

Caution: the watchdog and the stop on exit are conveniences, not safety-rated functions.
Test on a stand and at low speed, and keep a hardware emergency stop within reach.
"""

from __future__ import annotations

from collections.abc import Sequence
import math
import os
import signal
import sys
from typing import Any

from builtin_interfaces.msg import Time as BuiltinTime
from corridor_pid.core.config import Config
from corridor_pid.core.controller import Controller, PoseSample, State, StepResult
from corridor_pid.core.errors import ConfigError
from corridor_pid.core.pid import scheduled_gains
from corridor_pid.core.timing import watchdog_tick
from corridor_pid.ros.convert import (
    ackermann_class,
    ackermann_message,
    pose_converter,
    set_stamp,
    set_twist,
)
from corridor_pid.ros.parameters import (
    declare_parameters,
    LiveRetune,
    split_ros_args,
    startup_config,
)
from corridor_pid.ros.process import caught_signals, ros_context, RosStartError
from diagnostic_msgs.msg import DiagnosticArray, DiagnosticStatus, KeyValue
from geometry_msgs.msg import Twist, TwistStamped
from rclpy.context import Context
from rclpy.duration import Duration
from rclpy.executors import ExternalShutdownException, SingleThreadedExecutor
from rclpy.node import Node
from rclpy.qos import qos_profile_sensor_data, QoSProfile, ReliabilityPolicy
from rclpy.time import Time
from std_msgs.msg import Float64, Float64MultiArray, MultiArrayDimension
from std_srvs.srv import SetBool

__all__ = [
    'CMD_FRAME', 'CorridorPidNode', 'DIAGNOSTIC_KEYS', 'NODE_NAME', 'TERMS_FIELDS', 'main',
]

NODE_NAME = 'corridor_pid'

EXECUTOR_VARIABLE = 'CORRIDOR_PID_EXECUTOR'
"""Environment variable: ``single`` runs the node on rclpy's single-threaded executor."""

CMD_FRAME = 'base_link'
"""Frame id of the stamped commands: the vehicle body (rear-axle centre)."""

TERMS_FIELDS = (
    'stamp', 'time', 'error', 'p', 'i', 'd', 'feedforward', 'blend', 'unclamped',
    'steering', 'speed', 'kp', 'ki', 'kd', 'lateral', 'heading',
)
"""Layout of ``~/terms`` (Float64MultiArray, one message per computed cycle, after the
commands): pose stamp [s], node time t [s], error e [m], P, I, D, feedforward, blend,
unclamped output [rad], limited steering [rad], limited speed [m/s], kp, ki, kd in force,
lateral offset y [m], heading error theta [rad]. The names are also in ``layout.dim[0].label``
(comma-separated)."""

DIAGNOSTIC_KEYS = (
    'state', 'rejected_poses', 'watchdog_stops', 'angle_saturated', 'rate_saturated',
    'steering', 'speed', 'error', 'p', 'i', 'd', 'feedforward', 'blend', 'unclamped',
    'kp', 'ki', 'kd', 'lookahead', 'target_offset', 'last_pose_stamp',
)
"""Keys of the ``/diagnostics`` status values (floats printed with repr, flags true/false)."""

_LEVELS = {
    State.DISABLED: DiagnosticStatus.OK,
    State.WAITING: DiagnosticStatus.OK,
    State.TRACKING: DiagnosticStatus.OK,
    State.STOPPED: DiagnosticStatus.WARN,
    State.FINISHED: DiagnosticStatus.OK,
}

_STATE_TEXT = {
    State.DISABLED: 'disabled: call ~/enable to start',
    State.WAITING: 'waiting for the first accepted pose',
    State.TRACKING: 'tracking',
    State.STOPPED: 'stopped: pose stream stale (watchdog), resumes after recovery poses',
    State.FINISHED: 'finished: past the end of the course',
}


def _reliable(depth: int) -> QoSProfile:
    return QoSProfile(  # type: ignore[no-untyped-call]
        depth=depth, reliability=ReliabilityPolicy.RELIABLE)


def _pose_qos(name: str) -> QoSProfile:
    if name == 'sensor_data':
        return qos_profile_sensor_data
    return _reliable(10)


class CorridorPidNode(Node):
    """Controller node: pose in, steering and speed out, live parameters, watchdog."""

    def __init__(self, **kwargs: Any) -> None:
        """Declare parameters, build the controller, publishers, subscription, timers.

        Raises:
            ConfigError: an invalid parameter, or an output the installation cannot give.

        """
        super().__init__(NODE_NAME, **kwargs)
        config = declare_parameters(self)
        self._ackermann_class = (
            ackermann_class() if config.output_type == 'ackermann' else None)
        self._controller = Controller(config, enabled=config.start_enabled)
        self._state = self._controller.state
        self._last: StepResult | None = None
        self._pending: PoseSample | None = None
        self._rested = True
        self._last_stamp = math.nan
        self._set_output_constants(config)

        self._log = self.get_logger()  # type: ignore[no-untyped-call]
        # Outputs keep 100 messages so a slow reliable reader (a recorder) loses none.
        reliable = _reliable(100)
        self._steer_pub = self.create_publisher(Float64, 'steering_angle', reliable)
        self._speed_pub = self.create_publisher(Float64, 'target_speed', reliable)
        self._cmd_pub = self.create_publisher(
            TwistStamped if config.cmd_vel_stamped else Twist, 'cmd_vel', reliable)
        self._steer_msg = Float64()
        self._speed_msg = Float64()
        self._cmd_msg: Any = TwistStamped() if config.cmd_vel_stamped else Twist()
        if config.cmd_vel_stamped:
            self._cmd_msg.header.frame_id = CMD_FRAME
        self._ackermann_pub = (
            None if self._ackermann_class is None
            else self.create_publisher(self._ackermann_class, 'ackermann_drive', reliable))
        self._terms_pub = self.create_publisher(Float64MultiArray, '~/terms', _reliable(100))
        self._diag_pub = self.create_publisher(DiagnosticArray, '/diagnostics', reliable)
        self._terms_layout = [MultiArrayDimension(
            label=','.join(TERMS_FIELDS), size=len(TERMS_FIELDS), stride=len(TERMS_FIELDS))]
        self._diag_name = f'{self.get_fully_qualified_name()}: corridor controller'

        msg_class, self._convert = pose_converter(config.pose_type)
        self._pose_sub = self.create_subscription(
            msg_class, 'pose', self.pose_callback, _pose_qos(config.pose_qos))
        self._enable_srv = self.create_service(SetBool, '~/enable', self.enable_callback)

        self._fixed_rate = config.control.rate > 0.0
        period = watchdog_tick(config)
        self._control_timer = None
        if self._fixed_rate:
            control_period = 1.0 / config.control.rate
            self._control_timer = self.create_timer(control_period, self.control_callback)
        self._watchdog_timer = None
        if not self._fixed_rate or 1.0 / config.control.rate > period:
            self._watchdog_timer = self.create_timer(period, self.watchdog_callback)
        self._diag_timer = self.create_timer(
            1.0 / config.diagnostics.rate, self.diagnostics_callback)

        self._retune = LiveRetune(
            self._controller, self._now_seconds, self._current_speed,
            self._log.warning, self._log.info, self._set_output_constants)
        self.add_on_set_parameters_callback(self._retune)
        self._log.info(
            f'started ({self._state.value}); pose: {config.pose_type}, '
            f'{config.pose_qos} QoS; '
            + (f'control at {config.control.rate:g} Hz' if self._fixed_rate
               else 'control on each pose') + f'; watchdog every {period:g} s')

    # -- helpers ------------------------------------------------------------------------

    @property
    def controller(self) -> Controller:
        """The controller this node drives."""
        return self._controller

    def warn_unapplied(self, expected: Config) -> None:
        """Warn when the parameters in force differ from what the ROS arguments give.

        ROS applies a params-file section only when its name matches the node's full name
        (or ``/**``); a file written for ``corridor_pid`` does not reach ``/cart/corridor_pid``.
        """
        want = expected.as_params()
        got = self._controller.config.as_params()
        differ = [name for name in want if want[name] != got[name]]
        if differ:
            name = differ[0]
            self._log.warning(
                f'{len(differ)} value(s) from the params file are not in force, e.g. {name} '
                f'(file {want[name]!r}, node {got[name]!r}); name the section '
                f"'{self.get_fully_qualified_name()}' or '/**' in the file")

    def log_info(self, text: str) -> None:
        """Log ``text`` at info level under the node's name."""
        self._log.info(text)

    def _set_output_constants(self, config: Config) -> None:
        self._wheelbase = config.vehicle.wheelbase
        self._trim = config.steering.trim
        self._stamped = config.cmd_vel_stamped

    def _now_seconds(self) -> float:
        return self.get_clock().now().nanoseconds * 1e-9

    def _current_speed(self) -> float:
        return 0.0 if self._last is None else self._last.speed

    # -- callbacks ----------------------------------------------------------------------

    def pose_callback(self, msg: Any) -> None:
        """Compute and publish the command for a pose (or keep it for the control timer)."""
        sample = self._convert(msg)
        if self._fixed_rate:
            self._pending = sample
            return
        now = self.get_clock().now()
        result = self._controller.step(sample, now.nanoseconds * 1e-9)
        if result.accepted:
            self._last_stamp = sample.stamp
        if result.computed:
            self._publish(result, now)
        self._after_step(result, now)

    def control_callback(self) -> None:
        """Fixed-rate mode: step on the latest pose (if any) and publish every cycle."""
        sample, self._pending = self._pending, None
        now = self.get_clock().now()
        result = self._controller.step(sample, now.nanoseconds * 1e-9)
        if result.accepted and sample is not None:
            self._last_stamp = sample.stamp
        if result.state == State.TRACKING:
            self._publish(result, now)
        else:
            self._publish_idle(result, now)
        self._after_step(result, now)

    def watchdog_callback(self) -> None:
        """Step without a pose: trips the watchdog; while not tracking, publish the ramp."""
        now = self.get_clock().now()
        result = self._controller.step(None, now.nanoseconds * 1e-9)
        if result.state != State.TRACKING:
            self._publish_idle(result, now)
        self._after_step(result, now)

    def diagnostics_callback(self) -> None:
        """Publish the /diagnostics status."""
        self._publish_diagnostics(self.get_clock().now())

    def enable_callback(self, request: SetBool.Request,
                        response: SetBool.Response) -> SetBool.Response:
        """Enable (-> waiting) or disable (-> disabled, ramping down) the controller."""
        now = self.get_clock().now()
        before = self._controller.state
        self._controller.enable(bool(request.data), now.nanoseconds * 1e-9)
        after = self._controller.state
        response.success = True
        if before == after:
            response.message = f'unchanged: {after.value}'
        else:
            response.message = f'{before.value} -> {after.value}'
        self._note_state(after, now)
        return response

    # -- publishing ---------------------------------------------------------------------

    def _send(self, steer: float, speed: float, nanoseconds: int) -> None:
        """Publish one command: steering_angle first, then target_speed, cmd_vel, ackermann.

        The messages are kept and refilled (publishing serialises them at once).
        """
        msg = self._steer_msg
        msg.data = steer
        self._steer_pub.publish(msg)
        msg = self._speed_msg
        msg.data = speed
        self._speed_pub.publish(msg)
        cmd = self._cmd_msg
        if self._stamped:
            set_stamp(cmd.header.stamp, nanoseconds)
            set_twist(cmd.twist, steer, speed, self._wheelbase)
        else:
            set_twist(cmd, steer, speed, self._wheelbase)
        self._cmd_pub.publish(cmd)
        if self._ackermann_pub is not None:
            stamp = BuiltinTime()
            set_stamp(stamp, nanoseconds)
            self._ackermann_pub.publish(ackermann_message(
                self._ackermann_class, steer, speed,  # type: ignore[arg-type]
                self._wheelbase, stamp, CMD_FRAME))

    def _publish(self, result: StepResult, now: Time) -> None:
        """Publish a control cycle: the command, then ``~/terms`` if anyone listens."""
        nanoseconds = now.nanoseconds
        self._send(result.steering, result.speed, nanoseconds)
        self._rested = False
        if self._terms_pub.get_subscription_count():
            terms = Float64MultiArray()
            terms.layout.dim = self._terms_layout
            terms.data = [
                self._last_stamp, nanoseconds * 1e-9, result.error, result.p, result.i,
                result.d, result.feedforward, result.blend, result.unclamped, result.steering,
                result.speed, result.kp, result.ki, result.kd, result.lateral, result.heading]
            self._terms_pub.publish(terms)

    def _publish_idle(self, result: StepResult, now: Time) -> None:
        """Publish a ramp-down command while not tracking (see the module docstring)."""
        holding = result.state in (State.STOPPED, State.FINISHED)
        if self._rested and not holding:
            return
        steer, speed = result.steering, result.speed
        self._send(steer, speed, now.nanoseconds)
        self._rested = speed == 0.0 and steer == self._trim

    def publish_stop(self) -> None:
        """Publish the final command (speed 0, steering at trim) and wait for its delivery."""
        self._send(self._trim, 0.0, self.get_clock().now().nanoseconds)
        publishers = [self._steer_pub, self._speed_pub, self._cmd_pub]
        if self._ackermann_pub is not None:
            publishers.append(self._ackermann_pub)
        for pub in publishers:
            pub.wait_for_all_acked(Duration(seconds=1.0))

    def _after_step(self, result: StepResult, now: Time) -> None:
        self._last = result
        if result.state != self._state:
            self._note_state(result.state, now)

    def _note_state(self, state: State, now: Time) -> None:
        """Log a state change once and publish /diagnostics at once."""
        if state == self._state:
            return
        old, self._state = self._state, state
        text = f'state {old.value} -> {state.value}'
        if state == State.STOPPED:
            self._log.warning(
                f'{text}: no accepted pose for more than '
                f'{self._controller.config.watchdog.timeout:g} s; ramping down')
        else:
            self._log.info(text)
        self._publish_diagnostics(now)

    def _publish_diagnostics(self, now: Time) -> None:
        config = self._controller.config
        state = self._controller.state
        last = self._last
        status = DiagnosticStatus()
        status.level = _LEVELS[state]
        status.name = self._diag_name
        status.message = _STATE_TEXT[state]
        status.hardware_id = ''
        speed = 0.0 if last is None else last.speed
        kp, ki, kd = scheduled_gains(config.gains, speed)
        ctl = self._controller
        values: dict[str, object] = {
            'state': state.value,
            'rejected_poses': ctl.rejected,
            'watchdog_stops': ctl.watchdog_stops,
            'angle_saturated': False if last is None else last.angle_saturated,
            'rate_saturated': False if last is None else last.rate_saturated,
            'steering': self._trim if last is None else last.steering,
            'speed': speed,
            'error': 0.0 if last is None else last.error,
            'p': 0.0 if last is None else last.p,
            'i': 0.0 if last is None else last.i,
            'd': 0.0 if last is None else last.d,
            'feedforward': 0.0 if last is None else last.feedforward,
            'blend': 0.0 if last is None else last.blend,
            'unclamped': self._trim if last is None else last.unclamped,
            'kp': kp, 'ki': ki, 'kd': kd,
            'lookahead': config.lookahead,
            'target_offset': config.target_offset,
            'last_pose_stamp': self._last_stamp,
        }
        status.values = [KeyValue(key=key, value=_text(values[key])) for key in DIAGNOSTIC_KEYS]
        array = DiagnosticArray()
        array.header.stamp = now.to_msg()
        array.status = [status]
        self._diag_pub.publish(array)


def _text(value: object) -> str:
    if isinstance(value, bool):
        return 'true' if value else 'false'
    if isinstance(value, float):
        return repr(value)
    return str(value)


def _executor(context: Context) -> Any:
    """Return rclpy's events executor where rclpy has it, else the single-threaded one.

    The events executor dispatches each ready entity without rebuilding a wait set per
    message, which keeps the pose-to-command latency low at kHz pose rates.
    ``CORRIDOR_PID_EXECUTOR=single`` forces the single-threaded executor.
    """
    if os.environ.get(EXECUTOR_VARIABLE, '') != 'single':
        try:
            from rclpy.experimental.events_executor import EventsExecutor
        except ImportError:
            pass
        else:
            return EventsExecutor(context=context)
    return SingleThreadedExecutor(context=context)


def _error(message: str) -> None:
    print(f'ERROR: {message}', file=sys.stderr, flush=True)


USAGE = """\
usage: corridor_pid_node [-h] [--ros-args ROS_ARGUMENTS ...]

Run the corridor_pid controller node: keeps a wheeled vehicle on the centre of a corridor
or lane. Subscribes to 'pose'; publishes 'steering_angle', 'target_speed', 'cmd_vel',
'~/terms' and '/diagnostics'; offers '~/enable' (the node starts disabled unless
start_enabled is true).

ROS arguments (after --ros-args), for example:
  --params-file config/corridor_pid.yaml    load parameters (checked before start)
  -p gains.kp:=0.8                          set one parameter
  -r pose:=/localization/pose               remap a topic
  -p use_sim_time:=true                     run on /clock (bag replay, simulators)

Bad parameters give one 'ERROR: ...' line and exit code 1. SIGINT/SIGTERM publish a
final zero-speed command and exit 0.

safety:
  This software steers and drives real vehicles. Test on a stand and at low speed first,
  keep a hardware emergency stop within reach, and remember that the pose watchdog is not
  a safety-rated function. Follow local regulations and have a qualified safety
  assessment done before the vehicle runs near people.
"""


def main(args: Sequence[str] | None = None) -> int:
    """Run the node until SIGINT/SIGTERM; return the exit code (0, 1 bad input, 2 usage).

    Args:
        args: argv-style arguments (the program name first, may be left out), ROS arguments
            after ``--ros-args``; default ``sys.argv``.

    """
    argv = list(sys.argv if args is None else args)
    if not argv or argv[0].startswith('-'):
        argv.insert(0, 'corridor_pid_node')
    plain, ros_args = split_ros_args(argv[1:])
    if any(arg in ('-h', '--help') for arg in plain):
        print(USAGE, end='')
        return 0
    if plain:
        _error(f'unknown argument {plain[0]!r} (ROS arguments go after --ros-args; see -h)')
        return 2
    try:
        expected = startup_config(ros_args, NODE_NAME)
    except ConfigError as err:
        _error(str(err))
        return 1

    with caught_signals() as signals:
        try:
            with ros_context(argv) as context:
                return _spin(context, signals, expected)
        except (RosStartError, ConfigError) as err:
            _error(str(err))
            return 1


def _spin(context: Context, signals: list[int], expected: Config) -> int:
    """Run the node until a signal or an external shutdown; send the final stop command."""
    node: CorridorPidNode | None = None
    try:
        node = CorridorPidNode(context=context)
        node.warn_unapplied(expected)
        executor = _executor(context)
        executor.add_node(node)
        try:
            while not signals and context.ok():
                executor.spin_once(timeout_sec=0.1)
        except ExternalShutdownException:
            pass
        if signals:
            node.log_info(
                f'{signal.Signals(signals[0]).name}: final command speed 0, steering trim')
        node.publish_stop()
        executor.shutdown(timeout_sec=1.0)
        return 0
    finally:
        if node is not None:
            node.destroy_node()  # type: ignore[no-untyped-call]


if __name__ == '__main__':
    sys.exit(main())
