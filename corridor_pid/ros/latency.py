# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Pose -> ``steering_angle`` latency of the controller node against a bare rclpy relay.

Both run as processes of their own on a private local DDS domain, with reliable QoS; this
process publishes poses at a fixed rate (paced on an absolute schedule) and times each
output from just before its pose is published to its arrival, on one monotonic clock.

* The **relay** (``python -m corridor_pid.ros.latency relay``) is the least an rclpy node
  does per pose: subscribe to ``pose``, publish a ``Float64`` on ``steering_angle``
  (the pose's stamp, so every output names its pose), spin with ``rclpy.spin``. This is
  the baseline of the goals.
* The same relay on rclpy's events executor (``relay --events``) is measured too, for
  context: the node runs on that executor where rclpy has it.
* The **node** is ``corridor_pid_node`` tracking (``start_enabled``). Its
  ``steering_angle`` carries no stamp, so outputs are matched to poses by order: exact
  when none is lost (reliable QoS keeps the order), approximate after a drop. Nothing else
  of the node is subscribed, so it does only its own work (no ``~/terms``).

The three are measured one after the other in the same run. A pose without its output is
a drop. The goals (issue 7): node p50 within 1.2x and p99 within 1.5x of the relay's
(``rclpy.spin``), no drops. Reuse: ``corridor-pid bench`` and
``scripts/bench_node_latency.py`` call :func:`measure_latency`.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
import os
from pathlib import Path
import sys
import tempfile
import threading
import time
from typing import NamedTuple

from corridor_pid.ros import isolation
from corridor_pid.ros.loadgen import cart_pose, pose_stamped, publish_paced, qos_named
from corridor_pid.ros.testing import (
    NodeProcess,
    Spinner,
    start_node,
    wait_for_publishers,
    wait_for_subscribers,
    wait_until,
)

__all__ = [
    'GOAL_P50_RATIO', 'GOAL_P99_RATIO', 'LatencyReport', 'LatencyStats', 'measure_latency',
    'relay_main',
]

GOAL_P50_RATIO = 1.2
"""Node p50 / relay p50 must not exceed this."""

GOAL_P99_RATIO = 1.5
"""Node p99 / relay p99 must not exceed this."""

QOS_DEPTH = 10
"""Queue depth of the relay's endpoints (the node's own command and reliable pose depth)."""

_WARMUP = 200
_DRAIN_SECONDS = 5.0


class LatencyStats(NamedTuple):
    """Latency of one target [s] and its losses."""

    name: str
    sent: int
    received: int
    p50: float
    p99: float
    worst: float
    mean: float

    @property
    def drops(self) -> int:
        """Poses without an output."""
        return self.sent - self.received


class LatencyReport(NamedTuple):
    """The relays and the node measured in the same run, at ``rate`` [Hz]."""

    rate: float
    relay: LatencyStats
    node: LatencyStats
    worst_late: float
    """Worst lateness of a pose against its schedule in this process [s]."""
    relay_events: LatencyStats | None = None
    """The relay on the events executor (context; None when not measured)."""

    @property
    def p50_ratio(self) -> float:
        """Node p50 / relay p50."""
        return self.node.p50 / self.relay.p50

    @property
    def p99_ratio(self) -> float:
        """Node p99 / relay p99."""
        return self.node.p99 / self.relay.p99

    @property
    def meets_goals(self) -> bool:
        """p50 and p99 ratios within the goals and no drops."""
        return (self.p50_ratio <= GOAL_P50_RATIO and self.p99_ratio <= GOAL_P99_RATIO
                and self.node.drops == 0 and self.relay.drops == 0)

    def as_dict(self) -> dict[str, object]:
        """Return the report as a JSON-ready dict (times in microseconds)."""
        def stats(s: LatencyStats) -> dict[str, object]:
            return {'sent': s.sent, 'received': s.received, 'drops': s.drops,
                    'p50_us': s.p50 * 1e6, 'p99_us': s.p99 * 1e6, 'max_us': s.worst * 1e6,
                    'mean_us': s.mean * 1e6}
        return {'rate_hz': self.rate, 'relay': stats(self.relay), 'node': stats(self.node),
                'relay_events': None if self.relay_events is None else stats(
                    self.relay_events),
                'p50_ratio': self.p50_ratio, 'p99_ratio': self.p99_ratio,
                'goal_p50_ratio': GOAL_P50_RATIO, 'goal_p99_ratio': GOAL_P99_RATIO,
                'worst_publish_late_us': self.worst_late * 1e6,
                'meets_goals': self.meets_goals}


def _quantile(sorted_values: Sequence[float], q: float) -> float:
    """Return the q-quantile (nearest rank) of sorted values."""
    if not sorted_values:
        return float('nan')
    index = min(len(sorted_values) - 1, max(0, int(round(q * len(sorted_values) + 0.5)) - 1))
    return sorted_values[index]


def _stats(name: str, sent: int, latencies: Sequence[float]) -> LatencyStats:
    ordered = sorted(latencies)
    mean = sum(ordered) / len(ordered) if ordered else float('nan')
    return LatencyStats(name, sent, len(ordered), _quantile(ordered, 0.5),
                        _quantile(ordered, 0.99), ordered[-1] if ordered else float('nan'),
                        mean)


# -- the relay --------------------------------------------------------------------------

def relay_main(args: Sequence[str] | None = None, events: bool = False) -> int:
    """Run the bare relay node until SIGINT/SIGTERM (rclpy's own handlers); return 0.

    With ``events`` it spins on rclpy's events executor instead of ``rclpy.spin``.
    """
    from geometry_msgs.msg import PoseStamped
    import rclpy
    from rclpy.executors import ExternalShutdownException
    from rclpy.node import Node
    from rclpy.utilities import get_default_context, try_shutdown
    from std_msgs.msg import Float64

    rclpy.init(args=list(sys.argv if args is None else args))
    context = get_default_context()
    node = Node('latency_relay')
    pub = node.create_publisher(Float64, 'steering_angle', qos_named('reliable', QOS_DEPTH))

    def pose_callback(msg: PoseStamped) -> None:
        out = Float64()
        out.data = msg.header.stamp.sec + msg.header.stamp.nanosec * 1e-9
        pub.publish(out)

    node.create_subscription(PoseStamped, 'pose', pose_callback,
                             qos_named('reliable', QOS_DEPTH))
    try:
        if events:
            from rclpy.experimental.events_executor import EventsExecutor
            executor = EventsExecutor()
            executor.add_node(node)
            while context.ok():
                executor.spin_once(timeout_sec=0.1)
        else:
            rclpy.spin(node)
    except (KeyboardInterrupt, ExternalShutdownException):
        pass
    finally:
        try_shutdown()
    return 0


# -- the measurement --------------------------------------------------------------------

class _Target:
    """One measured process seen from here: pose publisher, output times, confirmations."""

    def __init__(self, node: object, name: str, ns: str, proc: NodeProcess) -> None:
        from geometry_msgs.msg import PoseStamped
        from std_msgs.msg import Float64

        self.name = name
        self.proc = proc
        self.arrivals: list[int] = []
        self.values: list[float] = []
        self._lock = threading.Lock()
        # A deep writer queue here: a stall of this process must not drop poses on this
        # side; drops then come from the target's own (depth-10) subscription only.
        self.pub = node.create_publisher(  # type: ignore[attr-defined]
            PoseStamped, f'{ns}/pose', qos_named('reliable', 1000))
        self.sub = node.create_subscription(  # type: ignore[attr-defined]
            Float64, f'{ns}/steering_angle', self._output, qos_named('reliable', 10000))

    def _output(self, msg: object) -> None:
        now = time.perf_counter_ns()
        with self._lock:
            self.arrivals.append(now)
            self.values.append(msg.data)  # type: ignore[attr-defined]

    def received(self) -> int:
        with self._lock:
            return len(self.arrivals)

    def reset(self) -> None:
        with self._lock:
            self.arrivals.clear()
            self.values.clear()


def _run(target: _Target, count: int, rate: float, first_ns: int) -> tuple[list[int], float]:
    """Publish ``count`` cart poses at ``rate``; return their send times [ns], lateness."""
    step_ns = int(round(1e9 / rate))
    sends = [0] * count
    pub = target.pub

    def publish(k: int) -> None:
        x, y, yaw = cart_pose(k * step_ns * 1e-9)
        msg = pose_stamped(first_ns + k * step_ns, x, y, yaw)
        sends[k] = time.perf_counter_ns()
        pub.publish(msg)

    report = publish_paced(publish, count, rate)
    deadline = time.monotonic() + _DRAIN_SECONDS
    while target.received() < count and time.monotonic() < deadline:
        time.sleep(0.01)
    return sends[:report.sent], report.worst_late


def _measure(target: _Target, count: int, rate: float, first_stamp: float,
             stamps_in_output: bool) -> tuple[LatencyStats, float, float]:
    """Warm up, then measure one target; return its stats, worst lateness, next stamp."""
    step = 1.0 / rate
    target.reset()
    _run(target, _WARMUP, rate, int(round(first_stamp * 1e9)))
    start = first_stamp + (_WARMUP + 10) * step
    target.reset()
    sends, worst = _run(target, count, rate, int(round(start * 1e9)))
    with target._lock:
        arrivals = list(target.arrivals)
        values = list(target.values)
    n = min(len(arrivals), len(sends))
    if stamps_in_output:
        # The relay names each pose: time only the prefix whose stamps agree.
        expected = [start + k * step for k in range(len(sends))]
        n = next((k for k in range(n) if abs(values[k] - expected[k]) > 1e-6), n)
    latencies = [(arrivals[k] - sends[k]) * 1e-9 for k in range(n)]
    stats = _stats(target.name, len(sends), latencies)._replace(
        received=min(len(arrivals), len(sends)))
    return stats, worst, start + (count + 10) * step


def measure_latency(count: int = 3000, rate: float = 1000.0,
                    env: Mapping[str, str] | None = None,
                    log_dir: str | os.PathLike[str] | None = None,
                    events_relay: bool = True) -> LatencyReport:
    """Measure the relay(s) and the node in one run; return them and the ratios.

    Args:
        count: poses per target (after a warm-up of 200).
        rate: pose rate [Hz].
        env: environment of the processes (default: local DDS in a claimed domain).
        log_dir: folder for the processes' output (default: a temporary folder).
        events_relay: also measure the relay on the events executor (if rclpy has it).

    """
    import rclpy
    from rclpy.context import Context
    from rclpy.node import Node
    from rclpy.utilities import try_shutdown

    run_env = dict(isolation.local_dds_env() if env is None else env)
    for key in ('ROS_AUTOMATIC_DISCOVERY_RANGE', 'ROS_DOMAIN_ID'):
        os.environ[key] = run_env[key]
    folder = Path(log_dir) if log_dir is not None else Path(
        tempfile.mkdtemp(prefix='corridor_pid_latency_'))
    params = folder / 'bench_node.yaml'
    from corridor_pid.core.paramsfile import write_params_file
    write_params_file(params, {'start_enabled': True, 'pose_qos': 'reliable',
                               'pose_frame': 'map', 'watchdog.timeout': 10.0},
                      node_name='/latency_node/corridor_pid')
    node_proc = start_node(params, namespace='/latency_node', env=run_env, log_dir=folder)
    relay_proc = start_node(
        None, namespace='/latency_relay', env=run_env, log_dir=folder,
        command=[sys.executable, '-m', 'corridor_pid.ros.latency', 'relay'])
    events_proc = None
    if events_relay and _has_events_executor():
        events_proc = start_node(
            None, namespace='/latency_relay_events', env=run_env, log_dir=folder,
            command=[sys.executable, '-m', 'corridor_pid.ros.latency', 'relay', '--events'])
    context = Context()
    rclpy.init(context=context)
    try:
        probe = Node('latency_probe', context=context)
        relay = _Target(probe, 'relay', '/latency_relay', relay_proc)
        node = _Target(probe, 'node', '/latency_node', node_proc)
        targets = [relay, node]
        events = None
        if events_proc is not None:
            events = _Target(probe, 'relay_events', '/latency_relay_events', events_proc)
            targets.append(events)
        with _probe_spinner(probe):
            for target in targets:
                wait_for_subscribers(target.pub, process=target.proc)
                wait_for_publishers(target.sub, process=target.proc)
            stamp = time.time()
            for target in targets:
                _prime(target, stamp)
                stamp += 1.0
            relay_stats, late_r, stamp = _measure(relay, count, rate, stamp, True)
            node_stats, late_n, stamp = _measure(node, count, rate, stamp, False)
            events_stats = None
            if events is not None:
                events_stats, late_e, stamp = _measure(events, count, rate, stamp, True)
                late_n = max(late_n, late_e)
        probe.destroy_node()  # type: ignore[no-untyped-call]
        return LatencyReport(rate, relay_stats, node_stats, max(late_r, late_n),
                             events_stats)
    finally:
        try_shutdown(context=context)
        for proc in (node_proc, relay_proc, events_proc):
            if proc is not None:
                proc.stop()


class _EventsSpinner:
    """Spin the probe on rclpy's events executor in a thread (less overhead, less noise)."""

    def __init__(self, node: object) -> None:
        from rclpy.experimental.events_executor import EventsExecutor

        self.context = node.context  # type: ignore[attr-defined]
        self.executor = EventsExecutor(context=self.context)
        self.executor.add_node(node)  # type: ignore[arg-type]
        self._stop = threading.Event()
        self._thread = threading.Thread(target=self._run, name='probe', daemon=True)
        self._thread.start()

    def _run(self) -> None:
        while not self._stop.is_set() and self.context.ok():
            self.executor.spin_once(timeout_sec=0.05)

    def __enter__(self) -> _EventsSpinner:
        return self

    def __exit__(self, *exc: object) -> None:
        self._stop.set()
        self._thread.join()
        self.executor.shutdown()


def _probe_spinner(node: object) -> Spinner | _EventsSpinner:
    """Return a running spinner for the probe node: events executor where rclpy has it."""
    if _has_events_executor():
        return _EventsSpinner(node)
    return Spinner(node)  # type: ignore[arg-type]


def _has_events_executor() -> bool:
    try:
        from rclpy.experimental.events_executor import EventsExecutor  # noqa: F401
    except ImportError:
        return False
    return True


def _prime(target: _Target, stamp: float) -> None:
    """Send single poses until one comes back (both directions matched)."""
    for k in range(600):
        before = target.received()
        target.pub.publish(pose_stamped(int(round((stamp + k * 1e-3) * 1e9)), 0.0, 0.0, 0.0))
        try:
            wait_until(lambda n=before: target.received() > n,  # type: ignore[misc]
                       f'{target.name} output', timeout=0.2, process=target.proc)
            return
        except TimeoutError:
            continue
    raise TimeoutError(f'{target.name}: no output for a priming pose')


if __name__ == '__main__':
    if len(sys.argv) > 1 and sys.argv[1] == 'relay':
        rest = sys.argv[2:]
        with_events = bool(rest) and rest[0] == '--events'
        sys.exit(relay_main(sys.argv[:1] + rest[with_events:], events=with_events))
    print('usage: python -m corridor_pid.ros.latency relay [--events] [--ros-args ...]',
          file=sys.stderr)
    sys.exit(2)
