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
* :func:`probe_node` gives a measuring node spun in the background; :class:`OutputTimer`
  times pose -> ``steering_angle`` of a running node in a long run (soak), window by window.
* :func:`measure_resources` feeds a process (the node, or the bare relay of
  :mod:`corridor_pid.ros.latency`) a paced pose stream and reads its CPU time and resident
  memory from ``/proc``.
* ``python -m corridor_pid.ros.loadgen --topic /cart/pose --rate 2000 --count 60000`` is a
  pose publisher in a process of its own (for floods and publisher restarts): it waits for
  a subscriber, prints ``{"started": true}``, publishes, waits for the reliable
  acknowledgements, and prints a last JSON line with what it sent. It keeps DDS on
  loopback; its domain id comes from the parent's environment (``ROS_DOMAIN_ID``; one is
  claimed when it is missing).
"""

from __future__ import annotations

import argparse
import collections
from collections.abc import Callable, Iterator, Mapping, Sequence
import contextlib
import json
import math
import os
from pathlib import Path
import signal
import subprocess
import sys
import threading
import time
from typing import Any, NamedTuple

from corridor_pid.ros import isolation
from geometry_msgs.msg import PoseStamped
from rclpy.node import Node
from rclpy.qos import qos_profile_sensor_data, QoSProfile, ReliabilityPolicy

__all__ = [
    'CART_SPEED', 'OutputTimer', 'PaceReport', 'ResourceUse', 'Tally', 'cart_pose', 'main',
    'measure_resources', 'pose_stamped', 'probe_node', 'publish_paced', 'qos_named',
    'status_values',
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


@contextlib.contextmanager
def probe_node(name: str) -> Iterator[Node]:
    """Yield a node in an rclpy context of its own, spun in a background thread.

    The caller's process must already be on a local DDS domain (see
    :func:`corridor_pid.ros.isolation.isolate_this_process`).
    """
    from corridor_pid.ros.testing import Spinner
    import rclpy
    from rclpy.context import Context
    from rclpy.utilities import try_shutdown

    context = Context()
    rclpy.init(context=context)
    node = Node(name, context=context)
    spinner = Spinner(node)
    try:
        yield node
    finally:
        spinner.close()
        node.destroy_node()  # type: ignore[no-untyped-call]
        try_shutdown(context=context)


class OutputTimer:
    """Time the node's ``steering_angle`` outputs from the sending of their poses.

    The node publishes ``steering_angle`` and then ``~/terms`` (which carries the pose
    stamp) once per computed cycle, so the n-th ``steering_angle`` and the n-th ``~/terms``
    belong to one pose; its latency is the ``steering_angle`` arrival minus the moment just
    before that pose was published, on this process's monotonic clock. Poses are keyed by
    their stamp in microseconds (stamps must be at least that far apart). Nothing grows
    without bound: :meth:`harvest` takes what has been matched.
    """

    def __init__(self, node: Node, namespace: str, depth: int = 1000) -> None:
        """Create the pose publisher and the two subscriptions (reliable QoS)."""
        from std_msgs.msg import Float64, Float64MultiArray

        qos = qos_named('reliable', depth)
        self.publisher = node.create_publisher(PoseStamped, f'{namespace}/pose', qos)
        self.steering = node.create_subscription(
            Float64, f'{namespace}/steering_angle', self._steering, qos)
        self.terms = node.create_subscription(
            Float64MultiArray, f'{namespace}/corridor_pid/terms', self._terms, qos)
        self._lock = threading.Lock()
        self._sent: dict[int, int] = {}
        self._arrivals: collections.deque[int] = collections.deque()
        self._stamps: collections.deque[int] = collections.deque()

    def _steering(self, msg: Any) -> None:
        now = time.perf_counter_ns()
        with self._lock:
            self._arrivals.append(now)

    def _terms(self, msg: Any) -> None:
        key = round(msg.data[0] * 1e6)
        with self._lock:
            self._stamps.append(key)

    def publish(self, stamp_ns: int, x: float, y: float, yaw: float) -> None:
        """Publish one pose stamped ``stamp_ns`` and note when it went."""
        msg = pose_stamped(stamp_ns, x, y, yaw)
        key = round(stamp_ns / 1000)
        with self._lock:
            self._sent[key] = time.perf_counter_ns()
        self.publisher.publish(msg)

    def clear(self) -> None:
        """Forget every pose sent and output received so far (e.g. after priming)."""
        with self._lock:
            self._sent.clear()
            self._arrivals.clear()
            self._stamps.clear()

    def pending(self) -> int:
        """Return the number of poses sent and not matched to an output yet."""
        with self._lock:
            return len(self._sent)

    def harvest(self) -> tuple[list[float], int]:
        """Return the latencies [s] matched since the last call, and the poses lost.

        A pose is lost when an output for a later pose has arrived and none for it.
        """
        latencies: list[float] = []
        with self._lock:
            newest = None
            while self._arrivals and self._stamps:
                arrival, key = self._arrivals.popleft(), self._stamps.popleft()
                sent = self._sent.pop(key, None)
                if sent is not None:
                    latencies.append((arrival - sent) * 1e-9)
                    newest = key
            lost = 0
            if newest is not None:
                for key in [k for k in self._sent if k < newest]:
                    del self._sent[key]
                    lost += 1
        return latencies, lost


def status_values(array: Any, name: str) -> dict[str, str] | None:
    """Return the values of the status called ``name`` in a DiagnosticArray, or None."""
    for status in array.status:
        if status.name == name:
            return {kv.key: kv.value for kv in status.values}
    return None


class ResourceUse(NamedTuple):
    """CPU and memory of one process under a paced pose stream."""

    name: str
    rate: float
    """Pose rate [Hz]."""
    cpu: float
    """CPU used over the window, as a share of one core (0.25 = a quarter of a core)."""
    rss: int
    """Resident memory at the end of the window [bytes]."""
    rss_growth: int
    """Resident memory at the end minus at the start of the window [bytes]."""
    window: float
    """Length of the window [s]."""


def measure_resources(name: str, command: Sequence[str] | None, params_file: Path | None,
                      namespace: str, rate: float, *, window: float = 5.0,
                      warmup: float = 1.0, env: Mapping[str, str] | None = None,
                      log_dir: str | os.PathLike[str] | None = None) -> ResourceUse:
    """Return the CPU share and resident memory of a process fed poses at ``rate`` Hz.

    The process (the controller node by default, or ``command``) runs in ``namespace``; a
    pose publisher of its own process (this module's ``main``) feeds ``namespace/pose``.
    ``/proc/<pid>/stat`` and ``status`` are read ``warmup`` s after the first pose and again
    ``window`` s later.

    Raises:
        RuntimeError: a process exited early (its output attached).

    """
    from corridor_pid.benchmarks.procstat import cpu_share, process_sample
    from corridor_pid.ros.testing import start_node

    run_env = isolation.local_dds_env() if env is None else dict(env)
    proc = start_node(params_file, namespace=namespace, env=run_env, command=command,
                      log_dir=log_dir)
    count = int(rate * (warmup + window + 2.0))
    feeder = subprocess.Popen(
        [sys.executable, '-m', 'corridor_pid.ros.loadgen', '--topic', f'{namespace}/pose',
         '--rate', repr(rate), '--count', str(count)],
        env=run_env, stdin=subprocess.DEVNULL, stdout=subprocess.PIPE,
        stderr=subprocess.STDOUT, text=True, start_new_session=True)
    try:
        assert feeder.stdout is not None
        line = feeder.stdout.readline()
        if 'started' not in line:
            proc.check_running()
            raise RuntimeError(f'the pose publisher did not start: {line.strip()!r}')
        time.sleep(warmup)
        proc.check_running()
        before = process_sample(proc.pid)
        time.sleep(window)
        after = process_sample(proc.pid)
        feeder.communicate(timeout=120.0)
        return ResourceUse(name, rate, cpu_share(before, after), after.rss,
                           after.rss - before.rss, after.wall - before.wall)
    finally:
        if feeder.poll() is None:
            feeder.send_signal(signal.SIGINT)
            try:
                feeder.wait(10.0)
            except subprocess.TimeoutExpired:
                feeder.kill()
                feeder.wait()
        proc.stop()


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
    parser.add_argument('--settle', type=float, default=0.0, metavar='SECONDS',
                        help='then wait this long before the first pose: this side sees the '
                        'match first, and poses sent before the subscriber has matched too '
                        'are lost (default: 0)')
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
        if args.settle > 0.0:
            time.sleep(args.settle)
        print(json.dumps({'started': True}), flush=True)
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
