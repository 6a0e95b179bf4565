# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""A test-side DDS peer of one controller node process: poses in, commands and terms out.

Every exchange waits for what it needs (matched endpoints, service availability, the
``~/terms`` message of a pose) instead of sleeping; assertions are on values and ordering.
The node's own clock (``~/terms`` time, ``cmd_vel`` stamps) is used where time matters.
"""

from __future__ import annotations

from collections.abc import Iterator, Mapping, Sequence
import contextlib
import itertools
import math
import os
from pathlib import Path
from typing import Any

from builtin_interfaces.msg import Time
from corridor_pid.core.paramsfile import params_yaml
from corridor_pid.ros.node import TERMS_FIELDS
from corridor_pid.ros.testing import (
    NodeProcess,
    Recorder,
    reliable_qos,
    Spinner,
    start_node,
    wait_for_node,
    wait_for_publishers,
    wait_for_subscribers,
    wait_until,
)
from diagnostic_msgs.msg import DiagnosticArray
from geometry_msgs.msg import PoseStamped, Twist, TwistStamped
from nav_msgs.msg import Odometry
from rcl_interfaces.msg import SetParametersResult
import rclpy
from rclpy.context import Context
from rclpy.node import Node
from rclpy.parameter import Parameter, parameter_value_to_python
from rclpy.parameter_client import AsyncParameterClient
from rosgraph_msgs.msg import Clock
from std_msgs.msg import Float64, Float64MultiArray
from std_srvs.srv import SetBool

REPO = Path(__file__).resolve().parents[2]
TIMEOUT = 60.0
PRIME_STAMP = 1.0
"""Stamp [s] of the first priming pose; test stamps start later."""


def node_env() -> dict[str, str]:
    """Return this run's environment (local DDS, claimed domain) with the repo importable."""
    env = dict(os.environ)
    env['PYTHONPATH'] = os.pathsep.join(
        [str(REPO)] + ([env['PYTHONPATH']] if env.get('PYTHONPATH') else []))
    return env


TEST_VALUES: dict[str, object] = {
    'gains.kp': 0.6, 'gains.ki': 0.0, 'gains.kd': 0.25, 'gains.reference_speed': 0.0,
    'lookahead': 1.0, 'target_offset': 0.0, 'derivative.filter_time': 0.05,
    'derivative.source': 'measurement', 'derivative.rate_from': 'difference',
    'retune.blend_time': 1.0, 'smoothing.enabled': False, 'delay_compensation.enabled': False,
    'feedforward.enabled': True, 'vehicle.wheelbase': 0.9, 'steering.max_angle': 0.5,
    'steering.max_rate': 1.0, 'steering.trim': 0.0, 'speed.cruise': 1.0, 'speed.max': 1.5,
    'speed.max_accel': 0.5, 'speed.max_decel': 1.0, 'speed.max_lateral_accel': 1.0,
    'speed.slowdown_error': 0.5, 'tuning.guard': 'reject',
}
"""The controller settings every DDS test states explicitly (independent of the defaults)."""


def write_params(path: Path, values: Mapping[str, object], node_name: str = '/**') -> Path:
    """Write a params file: TEST_VALUES, then ``values``.

    ROS applies a section only to the node of that fully qualified name (a namespaced node
    does not take a ``corridor_pid:`` section), so the default is the wildcard ``/**``.
    """
    merged = {**TEST_VALUES, **values}
    path.write_text(params_yaml(merged, node_name=node_name),  # type: ignore[arg-type]
                    encoding='utf-8')
    return path


def stamp_of(seconds: float) -> Time:
    """Return a builtin_interfaces/Time for ``seconds`` (rounded to the nanosecond)."""
    ns = int(round(seconds * 1e9))
    return Time(sec=ns // 1_000_000_000, nanosec=ns % 1_000_000_000)


def seconds_of(stamp: Time) -> float:
    """Return seconds of a stamp."""
    return stamp.sec + stamp.nanosec * 1e-9


def quaternion_z(yaw: float) -> tuple[float, float]:
    """Return (z, w) of the unit quaternion for a rotation ``yaw`` [rad] about z."""
    return math.sin(yaw / 2.0), math.cos(yaw / 2.0)


class Peer:
    """The test's DDS side of one controller node in namespace ``ns``."""

    def __init__(self, proc: NodeProcess, ns: str, *, pose_type: str = 'pose_stamped',
                 stamped: bool = True, frame: str = 'map', sim_time: bool = False) -> None:
        """Create the test node, recorders, publishers and clients; wait for discovery.

        With ``sim_time`` each priming pose is followed by /clock 0.1 s further (the node's
        clock stands still until /clock arrives).
        """
        self.proc = proc
        self.sim_time = sim_time
        self.ns = ns
        self.frame = frame
        self.pose_type = pose_type
        self.context = Context()
        rclpy.init(context=self.context)
        node = Node(f'peer_{ns.strip("/")}', context=self.context)
        self.node = node
        self.steering = Recorder(node, Float64, f'{ns}/steering_angle')
        self.speed = Recorder(node, Float64, f'{ns}/target_speed')
        self.cmd: Recorder[Any] = Recorder(
            node, TwistStamped if stamped else Twist, f'{ns}/cmd_vel')
        self.terms = Recorder(node, Float64MultiArray, f'{ns}/corridor_pid/terms')
        self.diag = Recorder(node, DiagnosticArray, '/diagnostics')
        msg_type = Odometry if pose_type == 'odometry' else PoseStamped
        self.pose_pub = node.create_publisher(msg_type, f'{ns}/pose', reliable_qos())
        self.clock_pub = node.create_publisher(Clock, '/clock', reliable_qos())
        self.params = AsyncParameterClient(node, f'{ns}/corridor_pid')
        self.enable_client = node.create_client(SetBool, f'{ns}/corridor_pid/enable')
        self.diag_name = f'{ns}/corridor_pid: corridor controller'
        self.spinner = Spinner(node)
        wait_for_node(node, proc, ns)
        wait_for_subscribers(self.pose_pub, process=proc)
        for rec in (self.steering, self.speed, self.cmd, self.terms, self.diag):
            wait_for_publishers(rec.subscription, process=proc)
        wait_until(lambda: self.params.services_are_ready(), 'parameter services',
                   process=proc)
        wait_until(self.enable_client.service_is_ready, 'enable service', process=proc)
        self.prime()

    def prime(self) -> None:
        """Make sure the node's pose subscription has matched this peer's publisher.

        Matching is seen from each side at its own moment, and a pose sent before the
        node's side matched is lost. So priming poses (stamps from 1 s, far before any test
        stamp) are sent until /diagnostics reports one as the last pose taken; each retry
        has a newer stamp, so a pose is never sent twice.
        """
        import time

        for k in itertools.count():
            stamp = PRIME_STAMP + k * 1e-3
            self.publish_pose(stamp, 0.0, 0.0)
            if self.sim_time:
                # Past a tick of any timer up to 10 Hz (control.rate may compute on one).
                self.publish_clock(PRIME_STAMP + (k + 1) * 0.1)
            deadline = time.monotonic() + 1.0
            while time.monotonic() < deadline:
                self.proc.check_running()
                if any(v['last_pose_stamp'] == repr(stamp) for _, v in self.statuses()):
                    return
                time.sleep(0.005)
            if k > 60:
                raise TimeoutError('the node never took a priming pose')

    def close(self) -> None:
        """Stop spinning and shut the test node's context down."""
        self.spinner.close()
        self.node.destroy_node()
        rclpy.try_shutdown(context=self.context)

    # -- poses --------------------------------------------------------------------------

    def pose_msg(self, stamp: float, x: float, y: float, yaw: float = 0.0,
                 frame: str | None = None, speed: float = 0.0,
                 yaw_rate: float = 0.0) -> Any:
        """Return a pose message of the peer's type."""
        z, w = quaternion_z(yaw)
        if self.pose_type == 'odometry':
            msg: Any = Odometry()
            pose = msg.pose.pose
            msg.twist.twist.linear.x = speed
            msg.twist.twist.angular.z = yaw_rate
            msg.child_frame_id = 'base_link'
        else:
            msg = PoseStamped()
            pose = msg.pose
        msg.header.stamp = stamp_of(stamp)
        msg.header.frame_id = self.frame if frame is None else frame
        pose.position.x, pose.position.y = x, y
        pose.orientation.z, pose.orientation.w = z, w
        return msg

    def publish_pose(self, stamp: float, x: float, y: float, yaw: float = 0.0,
                     **kwargs: Any) -> None:
        """Publish one pose without waiting."""
        self.pose_pub.publish(self.pose_msg(stamp, x, y, yaw, **kwargs))

    def step(self, stamp: float, x: float, y: float, yaw: float = 0.0,
             **kwargs: Any) -> dict[str, float]:
        """Publish a pose and return the ``~/terms`` of the cycle it produced."""
        before = len(self.terms)
        self.publish_pose(stamp, x, y, yaw, **kwargs)
        msgs = self.terms.wait_for(
            lambda m: len(m) > before and abs(m[-1].data[0] - stamp) < 1e-6,
            f'terms of the pose stamped {stamp!r}', timeout=TIMEOUT, process=self.proc)
        return terms_dict(msgs[-1])

    def publish_clock(self, seconds: float) -> None:
        """Publish /clock = ``seconds``."""
        msg = Clock()
        msg.clock = stamp_of(seconds)
        self.clock_pub.publish(msg)

    # -- diagnostics --------------------------------------------------------------------

    def statuses(self) -> list[tuple[float, dict[str, str]]]:
        """Return (stamp [s], values) of this node's diagnostics so far."""
        out = []
        for array in self.diag.snapshot():
            for status in array.status:
                if status.name == self.diag_name:
                    out.append((seconds_of(array.header.stamp),
                                {kv.key: kv.value for kv in status.values}))
        return out

    def wait_status(self, predicate: Any, what: str, *, clear: bool = True) -> dict[str, str]:
        """Wait for a diagnostics status whose values satisfy ``predicate``; return it.

        With ``clear`` only statuses received from now on count.
        """
        found: list[dict[str, str]] = []

        def seen() -> bool:
            for _, values in self.statuses():
                if predicate(values):
                    found.append(values)
                    return True
            return False

        if clear:
            self.diag.clear()
        wait_until(seen, what, timeout=TIMEOUT, process=self.proc)
        return found[0]

    def wait_state(self, state: str) -> dict[str, str]:
        """Wait until the node reports ``state`` on /diagnostics (newly received)."""
        return self.wait_status(lambda v: v['state'] == state, f'state {state!r}')

    # -- services -----------------------------------------------------------------------

    def _result(self, future: Any, what: str) -> Any:
        wait_until(future.done, what, timeout=TIMEOUT, process=self.proc)
        return future.result()

    def set_params(self, values: Mapping[str, object]) -> list[SetParametersResult]:
        """Set parameters one by one (as ``ros2 param set`` does); return the results."""
        params = [Parameter(name, value=value) for name, value in values.items()]
        response = self._result(self.params.set_parameters(params), 'set_parameters')
        return list(response.results)

    def set_atomically(self, values: Mapping[str, object]) -> SetParametersResult:
        """Set parameters in one atomic call; return the result."""
        params = [Parameter(name, value=value) for name, value in values.items()]
        response = self._result(self.params.set_parameters_atomically(params),
                                'set_parameters_atomically')
        return response.result

    def get_params(self, names: Sequence[str]) -> dict[str, object]:
        """Return the node's current values of ``names`` (NOT_SET as None)."""
        response = self._result(self.params.get_parameters(list(names)), 'get_parameters')
        return {name: parameter_value_to_python(value) if value.type else None
                for name, value in zip(names, response.values)}

    def describe(self, names: Sequence[str]) -> dict[str, Any]:
        """Return the node's descriptors of ``names``."""
        response = self._result(self.params.describe_parameters(list(names)),
                                'describe_parameters')
        return dict(zip(names, response.descriptors))

    def enable(self, on: bool) -> Any:
        """Call ~/enable; return the response."""
        request = SetBool.Request()
        request.data = on
        return self._result(self.enable_client.call_async(request), '~/enable')


def terms_dict(msg: Float64MultiArray) -> dict[str, float]:
    """Return ``~/terms`` as a dict by field name."""
    return dict(zip(TERMS_FIELDS, msg.data))


@contextlib.contextmanager
def node_and_peer(tmp_dir: Path, ns: str, values: Mapping[str, object],
                  ros_args: Sequence[str] = (), **peer_kwargs: Any) -> Iterator[Peer]:
    """Start a node with ``values`` in namespace ``ns`` and a peer; stop both afterwards."""
    params = write_params(tmp_dir / f'{ns.strip("/")}.yaml', values, f'{ns}/corridor_pid')
    proc = start_node(params, namespace=ns, ros_args=ros_args, env=node_env(),
                      log_dir=tmp_dir)
    peer = None
    try:
        peer = Peer(proc, ns, **peer_kwargs)
        yield peer
    finally:
        if peer is not None:
            peer.close()
        proc.stop()
