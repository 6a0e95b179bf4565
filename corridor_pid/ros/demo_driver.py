# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""The demo's own ROS node: plays the script against the controller and the vehicle.

It talks to the two other processes only through their ROS interfaces:

* the controller (``/corridor_pid``): ``~/enable`` (std_srvs/SetBool) and the parameter
  services, through rclpy's :class:`AsyncParameterClient` (the same ``set_parameters`` and
  ``get_parameters`` calls ``ros2 param set`` / ``ros2 param get`` make);
* the simulated vehicle (``/corridor_pid_sim``): ``~/resume`` (std_srvs/Trigger) and
  ``~/blackout`` (std_srvs/SetBool).

It records :data:`RECORDED_TOPICS` (and ``/clock`` in the fast pace) as they come off the
wire (raw subscriptions, CDR bytes handed to the recorder, which writes them at the end at
the times they were sent: :mod:`corridor_pid.demo.logtimes`) and reads from them what the
report needs: the vehicle's state rows, the controller's terms and its state changes.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence
import time
from typing import Any

from corridor_pid.core.errors import DemoError
from corridor_pid.demo.recording import BagRecorder
from corridor_pid.demo.world import Phase, STATE_NAMES
from diagnostic_msgs.msg import DiagnosticArray
from geometry_msgs.msg import PoseStamped, TwistStamped
from nav_msgs.msg import Odometry
from rcl_interfaces.msg import ParameterEvent, ParameterValue
from rclpy.context import Context
from rclpy.executors import SingleThreadedExecutor
from rclpy.node import Node
from rclpy.parameter import Parameter, parameter_value_to_python
from rclpy.parameter_client import AsyncParameterClient
from rclpy.qos import QoSProfile, ReliabilityPolicy
from rclpy.serialization import deserialize_message
from rclpy.task import Future
from rosgraph_msgs.msg import Clock
from std_msgs.msg import Float64, Float64MultiArray
from std_srvs.srv import SetBool, Trigger

__all__ = [
    'CONTROLLER', 'DemoDriver', 'RECORDED_TOPICS', 'SIM', 'message_types', 'recorded_topics',
]

CONTROLLER = '/corridor_pid'
"""Fully qualified name of the controller node."""

SIM = '/corridor_pid_sim'
"""Fully qualified name of the simulated vehicle node."""

STATE_TOPIC = f'{SIM}/state'
TERMS_TOPIC = f'{CONTROLLER}/terms'

RECORDED_TOPICS: dict[str, type] = {
    '/pose': PoseStamped,
    '/steering_angle': Float64,
    '/target_speed': Float64,
    '/cmd_vel': TwistStamped,
    TERMS_TOPIC: Float64MultiArray,
    '/diagnostics': DiagnosticArray,
    STATE_TOPIC: Float64MultiArray,
    '/parameter_events': ParameterEvent,
}
"""Topics the demo records, with their message classes (``/pose`` as sent by default).
``/parameter_events`` carries the controller's accepted live changes (``replay
--follow-recorded-sets`` applies them)."""


def recorded_topics(pose_type: str, fast: bool = False) -> dict[str, type]:
    """Return :data:`RECORDED_TOPICS` with the pose topic's class for ``pose_type``.

    The fast pace adds ``/clock`` (the simulated vehicle publishes it; none in real time).
    """
    topics = dict(RECORDED_TOPICS)
    topics['/pose'] = Odometry if pose_type == 'odometry' else PoseStamped
    if fast:
        topics['/clock'] = Clock
    return topics


def _ros_type_name(msg_class: type) -> str:
    module = msg_class.__module__.split('.')[0]
    return f'{module}/msg/{msg_class.__name__}'


class DemoDriver(Node):
    """Records, listens, and calls the services of the controller and the vehicle."""

    def __init__(self, context: Context, recorder: BagRecorder | None, *,
                 use_sim_time: bool, pose_type: str = 'pose_stamped',
                 check: Callable[[], None] = lambda: None,
                 on_row: Callable[[tuple[float, ...]], None] | None = None) -> None:
        """Create the subscriptions and clients.

        Args:
            context: the rclpy context to live in.
            recorder: the bag to write every recorded message to (None: record nothing).
            use_sim_time: follow /clock (fast pace).
            pose_type: 'pose_stamped' or 'odometry' (the pose topic's message).
            check: called on every spin; raises to abort (a child exited, Ctrl-C).
            on_row: called with every state row of the vehicle as it arrives.

        """
        sim_time = Parameter(  # type: ignore[no-untyped-call]
            'use_sim_time', Parameter.Type.BOOL, use_sim_time)
        super().__init__('corridor_pid_demo', context=context,
                         parameter_overrides=[sim_time])
        self.recorder = recorder
        self.check = check
        self.on_row = on_row
        self.executor_ = SingleThreadedExecutor(context=context)
        self.executor_.add_node(self)
        self.topics = recorded_topics(pose_type, use_sim_time)
        if recorder is not None:
            missing = set(self.topics) - set(recorder.counts)
            if missing:
                raise DemoError(f'the bag has no connection for {sorted(missing)!r}')
        qos = QoSProfile(  # type: ignore[no-untyped-call]
            depth=1000, reliability=ReliabilityPolicy.RELIABLE)
        self.subscriptions_by_topic = {
            topic: self.create_subscription(msg_class, topic, self._raw_callback(topic), qos,
                                            raw=True)
            for topic, msg_class in self.topics.items()}
        self.rows: list[tuple[float, ...]] = []
        self.terms: dict[float, dict[str, float]] = {}
        self.diagnostics: list[tuple[float, str, int]] = []
        """(stamp [s, ROS time], state, watchdog stops) of every /diagnostics message."""
        self._terms_names: list[str] = []
        self.enable_client = self.create_client(SetBool, f'{CONTROLLER}/enable')
        self.resume_client = self.create_client(Trigger, f'{SIM}/resume')
        self.blackout_client = self.create_client(SetBool, f'{SIM}/blackout')
        self.params = AsyncParameterClient(self, CONTROLLER)

    # -- what is heard ------------------------------------------------------------------

    def _raw_callback(self, topic: str) -> Callable[[bytes], None]:
        handlers: dict[str, Callable[[bytes], None]] = {
            STATE_TOPIC: self._state_row, TERMS_TOPIC: self._terms,
            '/diagnostics': self._diagnostics}
        handler = handlers.get(topic)

        def callback(data: bytes) -> None:
            if self.recorder is not None:
                self.recorder.write(topic, self.get_clock().now().nanoseconds, data)
            if handler is not None:
                handler(data)

        return callback

    def _state_row(self, data: bytes) -> None:
        msg = deserialize_message(data, Float64MultiArray)
        row = tuple(float(v) for v in msg.data)
        if len(row) != len(STATE_NAMES):
            return
        self.rows.append(row)
        if self.on_row is not None:
            self.on_row(row)

    def _terms(self, data: bytes) -> None:
        msg = deserialize_message(data, Float64MultiArray)
        if not self._terms_names and msg.layout.dim:
            self._terms_names = msg.layout.dim[0].label.split(',')
        names = self._terms_names
        if len(names) != len(msg.data) or 'stamp' not in names:
            return
        values = dict(zip(names, (float(v) for v in msg.data)))
        self.terms[round(values['stamp'], 6)] = values

    def _diagnostics(self, data: bytes) -> None:
        msg = deserialize_message(data, DiagnosticArray)
        stamp = msg.header.stamp.sec + msg.header.stamp.nanosec * 1e-9
        for status in msg.status:
            values = {kv.key: kv.value for kv in status.values}
            if 'state' in values:
                stops = values.get('watchdog_stops', '0')
                self.diagnostics.append(
                    (stamp, values['state'], int(stops) if stops.isdigit() else 0))

    @property
    def last_row(self) -> tuple[float, ...] | None:
        """The latest state row of the vehicle (None before the first)."""
        return self.rows[-1] if self.rows else None

    def sim_time(self) -> float:
        """Return the simulated time [s] of the latest state row (0 before the first)."""
        return self.rows[-1][0] if self.rows else 0.0

    # -- waiting ------------------------------------------------------------------------

    def spin_until(self, condition: Callable[[], bool], what: str,
                   timeout: float = 60.0) -> None:
        """Spin until ``condition()``; raise DemoError naming ``what`` after ``timeout`` s."""
        deadline = time.monotonic() + timeout
        while not condition():
            self.check()
            if time.monotonic() > deadline:
                raise DemoError(f'timed out after {timeout:g} s waiting for {what}')
            self.executor_.spin_once(timeout_sec=0.02)

    def result(self, future: Future, what: str, timeout: float = 30.0) -> Any:
        """Return the result of ``future`` once done (spinning meanwhile)."""
        self.spin_until(future.done, what, timeout)
        error = future.exception()  # type: ignore[no-untyped-call]
        if error is not None:
            raise DemoError(f'{what} failed: {error}')
        return future.result()  # type: ignore[no-untyped-call]

    def wait_for_graph(self, pose_readers: int, timeout: float = 60.0) -> None:
        """Wait until both processes are up and every recorded topic is matched."""
        def ready() -> bool:
            return (self.enable_client.service_is_ready()
                    and self.resume_client.service_is_ready()
                    and self.blackout_client.service_is_ready()
                    and self.params.services_are_ready()
                    and self.count_subscribers('/pose') >= pose_readers
                    and all(sub.get_publisher_count() >= 1
                            for sub in self.subscriptions_by_topic.values()))
        self.spin_until(ready, 'the controller and the simulated vehicle to appear on DDS '
                        '(services and topics)', timeout)

    def wait_for_row(self, condition: Callable[[tuple[float, ...]], bool], what: str,
                     timeout: float = 600.0) -> tuple[float, ...]:
        """Spin until the latest state row satisfies ``condition``; return it."""
        self.spin_until(lambda: self.last_row is not None and condition(self.last_row),
                        what, timeout)
        row = self.last_row
        assert row is not None
        return row

    def wait_for_hold(self, t: float) -> None:
        """Fast pace: wait until the vehicle holds at simulated time ``t`` [s]."""
        phase = STATE_NAMES.index('phase')
        self.wait_for_row(lambda r: r[phase] == Phase.HELD and abs(r[0] - t) < 1e-9,
                          f'the simulated vehicle to hold at t = {t:g} s')

    def wait_for_time(self, t: float) -> None:
        """Real-time pace: wait until simulated time reaches ``t`` [s]."""
        self.wait_for_row(lambda r: r[0] >= t - 1e-9, f'simulated time {t:g} s')

    def wait_for_end(self, timeout: float) -> None:
        """Wait until the vehicle reports the end of the run."""
        phase = STATE_NAMES.index('phase')
        self.wait_for_row(lambda r: r[phase] == Phase.FINISHED, 'the end of the run', timeout)

    # -- calls --------------------------------------------------------------------------

    def enable(self, on: bool = True) -> str:
        """Call the controller's ``~/enable``; return its message."""
        response = self.result(self.enable_client.call_async(SetBool.Request(data=on)),
                               f'{CONTROLLER}/enable')
        return str(response.message)

    def resume(self) -> None:
        """Let the simulated vehicle go on from a hold."""
        self.result(self.resume_client.call_async(Trigger.Request()), f'{SIM}/resume')

    def blackout(self, on: bool) -> str:
        """Switch the vehicle's pose blackout on or off; return its message."""
        response = self.result(self.blackout_client.call_async(SetBool.Request(data=on)),
                               f'{SIM}/blackout')
        return str(response.message)

    def set_parameter(self, name: str, value: float) -> tuple[bool, str]:
        """Set one parameter of the controller; return (successful, reason)."""
        param = Parameter(  # type: ignore[no-untyped-call]
            name, Parameter.Type.DOUBLE, float(value))
        future = self.params.set_parameters([param])
        response = self.result(future, f'{CONTROLLER}/set_parameters ({name})')
        outcome = response.results[0]
        return bool(outcome.successful), str(outcome.reason)

    def parameters_in_force(self, names: Sequence[str]) -> dict[str, object]:
        """Return the controller's values in force for ``names``."""
        response = self.result(self.params.get_parameters(list(names)),
                               f'{CONTROLLER}/get_parameters')
        values: Sequence[ParameterValue] = response.values
        return {name: parameter_value_to_python(value) for name, value in zip(names, values)}

    def close(self) -> None:
        """Stop spinning and destroy the node."""
        self.executor_.shutdown(timeout_sec=1.0)
        self.destroy_node()  # type: ignore[no-untyped-call]


def message_types(topics: Mapping[str, type]) -> dict[str, str]:
    """Return topic -> ROS type name ('std_msgs/msg/Float64') for message classes."""
    return {topic: _ros_type_name(cls) for topic, cls in topics.items()}
