# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Load for the node under test: paced pose streams, floods, and lean command tallies.

* :func:`cart_pose` is the pose of the benchmark cart (demo data, invented): a delivery
  cart rolling along a hospital corridor's centreline (the x-axis) at 1 m/s, weaving
  +/-5 cm with a 4 s period.
* :func:`publish_paced` publishes messages on an absolute schedule (no drift; a late
  message is sent at once, the schedule is not shifted), from the calling thread.
* :class:`Tally` counts the messages of a topic and keeps only the last value (no list that
  grows with a flood), noting any non-finite ``Float64``.
* ``python -m corridor_pid.ros.loadgen --topic /cart/pose --rate 2000 --count 60000`` is a
  pose publisher in a process of its own (for floods and publisher restarts): it waits for
  a subscriber, publishes, waits for the reliable acknowledgements, and prints one JSON line
  with what it sent. It keeps DDS on loopback; its domain id comes from the parent's
  environment (``ROS_DOMAIN_ID``; one is claimed when it is missing).
"""

from __future__ import annotations

import argparse
from collections.abc import Callable, Sequence
import json
import math
import os
import sys
import threading
import time
from typing import Any, NamedTuple

from corridor_pid.ros import isolation
from geometry_msgs.msg import PoseStamped
from rclpy.node import Node
from rclpy.qos import qos_profile_sensor_data, QoSProfile, ReliabilityPolicy

__all__ = [
    'CART_SPEED', 'PaceReport', 'Tally', 'cart_pose', 'main', 'pose_stamped', 'publish_paced',
    'qos_named',
]

CART_SPEED = 1.0
"""Speed of the benchmark cart along the corridor [m/s]."""


def qos_named(name: str, depth: int = 10) -> QoSProfile:
    """Return the QoS called ``name``: 'reliable' (reliable, volatile) or 'sensor_data'."""
    if name == 'sensor_data':
        return qos_profile_sensor_data
    return QoSProfile(  # type: ignore[no-untyped-call]
        depth=depth, reliability=ReliabilityPolicy.RELIABLE)


def pose_stamped(stamp_ns: int, x: float, y: float, yaw: float,
                 frame_id: str = 'map') -> PoseStamped:
    """Return a ``PoseStamped`` at (x, y) [m] heading ``yaw`` [rad], stamped ``stamp_ns``."""
    msg = PoseStamped()
    msg.header.stamp.sec, msg.header.stamp.nanosec = divmod(stamp_ns, 1_000_000_000)
    msg.header.frame_id = frame_id
    msg.pose.position.x = x
    msg.pose.position.y = y
    msg.pose.orientation.z = math.sin(yaw / 2.0)
    msg.pose.orientation.w = math.cos(yaw / 2.0)
    return msg


def cart_pose(t: float) -> tuple[float, float, float]:
    """Return (x, y, yaw) of the benchmark cart ``t`` [s] after its start (demo data)."""
    omega = 2.0 * math.pi / 4.0
    y = 0.05 * math.sin(omega * t)
    yaw = math.atan2(0.05 * omega * math.cos(omega * t), CART_SPEED)
    return CART_SPEED * t, y, yaw


class PaceReport(NamedTuple):
    """What :func:`publish_paced` did: messages sent, wall time [s], worst lateness [s]."""

    sent: int
    seconds: float
    worst_late: float


def publish_paced(publish: Callable[[int], None], count: int, rate: float, *,
                  stop: threading.Event | None = None) -> PaceReport:
    """Call ``publish(k)`` for k = 0..count-1, the k-th at ``k / rate`` s after the start.

    Sleeps until each message is due; a late one is sent at once (the schedule is absolute,
    so lateness never accumulates into a lower rate while the machine keeps up). Stops
    early when ``stop`` is set.
    """
    period = 1.0 / rate
    start = time.perf_counter()
    worst = 0.0
    sent = 0
    for k in range(count):
        if stop is not None and stop.is_set():
            break
        due = start + k * period
        wait = due - time.perf_counter()
        if wait > 0.0:
            time.sleep(wait)
        else:
            worst = max(worst, -wait)
        publish(k)
        sent += 1
    return PaceReport(sent, time.perf_counter() - start, worst)


class Tally:
    """Count the messages of a topic, keep the last one, note non-finite ``Float64`` data."""

    def __init__(self, node: Node, msg_type: type, topic: str,
                 qos: QoSProfile | None = None) -> None:
        """Subscribe ``node`` to ``topic`` (reliable unless ``qos`` is given)."""
        self.count = 0
        self.last: Any = None
        self.non_finite = 0
        self._lock = threading.Lock()
        self.subscription = node.create_subscription(
            msg_type, topic, self._callback, qos or qos_named('reliable', 1000))

    def _callback(self, msg: Any) -> None:
        data = getattr(msg, 'data', 0.0)
        with self._lock:
            self.count += 1
            self.last = msg
            if isinstance(data, float) and not math.isfinite(data):
                self.non_finite += 1

    def read(self) -> tuple[int, Any]:
        """Return (count, last message) at one instant."""
        with self._lock:
            return self.count, self.last


def _parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog='python -m corridor_pid.ros.loadgen',
        description='Publish the benchmark cart poses at a fixed rate (local DDS only).')
    parser.add_argument('--topic', required=True, help='pose topic (PoseStamped)')
    parser.add_argument('--rate', type=float, default=100.0, help='poses per second')
    parser.add_argument('--count', type=int, default=1000, help='poses to send')
    parser.add_argument('--qos', choices=('reliable', 'sensor_data'), default='reliable')
    parser.add_argument('--stamp-start', type=float, default=None,
                        help='stamp of the first pose [s] (default: the wall clock now)')
    parser.add_argument('--frame', default='map', help='frame id of the poses')
    parser.add_argument('--subscribers', type=int, default=1,
                        help='wait for this many matched subscriptions first')
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Publish the cart poses as the arguments say; print one JSON line; return 0."""
    import rclpy
    from rclpy.context import Context
    from rclpy.duration import Duration
    from rclpy.utilities import try_shutdown

    args = _parser().parse_args(argv)
    os.environ['ROS_AUTOMATIC_DISCOVERY_RANGE'] = 'LOCALHOST'
    if not os.environ.get('ROS_DOMAIN_ID'):
        isolation.isolate_this_process()
    context = Context()
    rclpy.init(context=context)
    try:
        node = Node(f'corridor_pid_loadgen_{os.getpid()}', context=context)
        pub = node.create_publisher(PoseStamped, args.topic, qos_named(args.qos, 1000))
        deadline = time.monotonic() + 60.0
        while pub.get_subscription_count() < args.subscribers:
            if time.monotonic() > deadline:
                print(json.dumps({'error': f'no subscriber on {args.topic}'}), flush=True)
                return 1
            time.sleep(0.01)
        start_s = time.time() if args.stamp_start is None else args.stamp_start
        start_ns = int(round(start_s * 1e9))
        step_ns = int(round(1e9 / args.rate))

        def publish(k: int) -> None:
            x, y, yaw = cart_pose(k * step_ns * 1e-9)
            pub.publish(pose_stamped(start_ns + k * step_ns, x, y, yaw, args.frame))

        report = publish_paced(publish, args.count, args.rate)
        acked = pub.wait_for_all_acked(Duration(seconds=30.0))
        last_stamp = (start_ns + (report.sent - 1) * step_ns) * 1e-9
        print(json.dumps({'sent': report.sent, 'seconds': report.seconds,
                          'worst_late': report.worst_late, 'acked': bool(acked),
                          'first_stamp': start_ns * 1e-9, 'last_stamp': last_stamp}),
              flush=True)
        node.destroy_node()  # type: ignore[no-untyped-call]
        return 0
    finally:
        try_shutdown(context=context)


if __name__ == '__main__':
    sys.exit(main())
