# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Helpers for tests that run the controller node for real (your tests and ours).

* :func:`start_node` starts ``corridor_pid_node`` as a subprocess in a session of its own,
  with a params file, extra ROS arguments and a local-only DDS environment
  (``ROS_AUTOMATIC_DISCOVERY_RANGE=LOCALHOST`` and a claimed ``ROS_DOMAIN_ID``, see
  :mod:`corridor_pid.ros.isolation`). :meth:`NodeProcess.stop` ends it by its PID: SIGINT,
  then SIGTERM, then SIGKILL, each after a grace period.
* :func:`wait_for_node`, :func:`wait_for_subscribers`, :func:`wait_for_publishers` and
  :func:`wait_for_service` wait for discovery instead of sleeping; every wait fails at once
  (with the node's output) when the node process has exited.
* :class:`Spinner` spins your test node in a background thread; :class:`Recorder` keeps
  the messages of a topic (with their DDS message info) and waits for a count.

Use the same domain in your test process: call
:func:`corridor_pid.ros.isolation.isolate_this_process` before ``rclpy.init``, or pass the
environment you gave the node.

Example::

    with start_node('config/corridor_pid.yaml', ros_args=['-p', 'start_enabled:=true'],
                    namespace='/cart') as node_proc:
        ...  # create a test node, wait_for_node(test_node, node_proc, '/cart'), publish
"""

from __future__ import annotations

from collections.abc import Callable, Iterator, Mapping, Sequence
import contextlib
import os
from pathlib import Path
import signal
import subprocess
import sys
import tempfile
import threading
import time
from typing import Any, Generic, TypeVar

from corridor_pid.ros import isolation
from rclpy.executors import SingleThreadedExecutor
from rclpy.node import Node
from rclpy.qos import QoSProfile, ReliabilityPolicy

__all__ = [
    'NodeProcess', 'Recorder', 'Spinner', 'node_command', 'reliable_qos', 'running_node',
    'start_node', 'wait_for_node', 'wait_for_publishers', 'wait_for_service',
    'wait_for_subscribers', 'wait_until',
]

DEFAULT_TIMEOUT = 60.0
"""Seconds a wait allows before it fails; generous, the machine may be busy. Waits end as
soon as their condition holds, so this bounds only a failure."""

_POLL = 0.005


def node_command() -> list[str]:
    """Return the command that runs the node with this interpreter."""
    return [sys.executable, '-m', 'corridor_pid.ros.node']


def reliable_qos(depth: int = 1000) -> QoSProfile:
    """Return a reliable, volatile QoS with a deep queue (tests must not lose messages)."""
    return QoSProfile(  # type: ignore[no-untyped-call]
        depth=depth, reliability=ReliabilityPolicy.RELIABLE)


class NodeProcess:
    """A node subprocess in its own session, stopped by PID."""

    def __init__(self, popen: subprocess.Popen[bytes], log_path: Path,
                 namespace: str) -> None:
        """Wrap a started process whose stdout and stderr go to ``log_path``."""
        self.popen = popen
        self.log_path = log_path
        self.namespace = namespace

    @property
    def pid(self) -> int:
        """Process id."""
        return self.popen.pid

    @property
    def returncode(self) -> int | None:
        """Exit code, or None while running."""
        return self.popen.poll()

    def output(self) -> str:
        """Return what the node printed so far (stdout and stderr)."""
        try:
            return self.log_path.read_text(encoding='utf-8', errors='replace')
        except OSError:
            return ''

    def check_running(self) -> None:
        """Raise RuntimeError with the node's output if it has exited."""
        code = self.popen.poll()
        if code is not None:
            raise RuntimeError(f'node exited with code {code}:\n{self.output()}')

    def signal(self, signum: int) -> None:
        """Send ``signum`` to the node process (by PID)."""
        if self.popen.poll() is None:
            os.kill(self.popen.pid, signum)

    def wait(self, timeout: float = DEFAULT_TIMEOUT) -> int:
        """Wait for the exit; return the exit code (raises subprocess.TimeoutExpired)."""
        return self.popen.wait(timeout)

    def stop(self, grace: float = 20.0) -> int:
        """Stop the node: SIGINT, then SIGTERM, then SIGKILL; return the exit code."""
        for signum in (signal.SIGINT, signal.SIGTERM, signal.SIGKILL):
            if self.popen.poll() is not None:
                break
            self.signal(signum)
            with contextlib.suppress(subprocess.TimeoutExpired):
                self.popen.wait(grace)
        return self.popen.wait()

    def __enter__(self) -> NodeProcess:
        """Return self."""
        return self

    def __exit__(self, *exc: object) -> None:
        """Stop the node."""
        self.stop()


def start_node(params_file: str | os.PathLike[str] | None = None, *,
               ros_args: Sequence[str] = (), namespace: str = '',
               env: Mapping[str, str] | None = None,
               command: Sequence[str] | None = None,
               log_dir: str | os.PathLike[str] | None = None) -> NodeProcess:
    """Start the controller node as a subprocess in its own session.

    Args:
        params_file: ``--params-file`` to load (none: defaults).
        ros_args: more ROS arguments (``-p name:=value``, ``-r from:=to``, ...).
        namespace: node namespace (``__ns``), e.g. ``'/cart'``; keeps several nodes apart.
        env: environment; default :func:`isolation.local_dds_env` (local DDS, claimed id).
            It is isolated again here, so a given environment keeps its domain id but
            never leaves loopback.
        command: the program (default :func:`node_command`).
        log_dir: folder of the output file (default: a temporary folder).

    """
    if env is None:
        run_env = isolation.local_dds_env()
    else:
        given = env.get('ROS_DOMAIN_ID')
        run_env = isolation.local_dds_env(env, int(given) if given else None)
    args = list(command or node_command()) + ['--ros-args']
    if params_file is not None:
        args += ['--params-file', os.fspath(params_file)]
    if namespace:
        args += ['-r', f'__ns:={namespace}']
    args += list(ros_args)
    folder = Path(log_dir) if log_dir is not None else Path(tempfile.mkdtemp(
        prefix='corridor_pid_node_'))
    log_path = folder / f'node_{time.monotonic_ns()}.log'
    with open(log_path, 'wb') as log:
        popen = subprocess.Popen(
            args, env=run_env, stdin=subprocess.DEVNULL, stdout=log,
            stderr=subprocess.STDOUT, start_new_session=True)
    return NodeProcess(popen, log_path, namespace)


def wait_until(condition: Callable[[], bool], what: str, *,
               timeout: float = DEFAULT_TIMEOUT, process: NodeProcess | None = None) -> None:
    """Wait until ``condition()`` holds; fail on timeout or when ``process`` exits.

    Raises:
        TimeoutError: naming ``what``.
        RuntimeError: the node process exited (its output attached).

    """
    deadline = time.monotonic() + timeout
    while not condition():
        if process is not None:
            process.check_running()
        if time.monotonic() > deadline:
            raise TimeoutError(f'timed out after {timeout:g} s waiting for {what}')
        time.sleep(_POLL)


def wait_for_subscribers(publisher: Any, count: int = 1, *,
                         timeout: float = DEFAULT_TIMEOUT,
                         process: NodeProcess | None = None) -> None:
    """Wait until ``publisher`` is matched by at least ``count`` subscriptions."""
    wait_until(lambda: publisher.get_subscription_count() >= count,
               f'{count} subscriber(s) of {publisher.topic_name}', timeout=timeout,
               process=process)


def wait_for_publishers(subscription: Any, count: int = 1, *,
                        timeout: float = DEFAULT_TIMEOUT,
                        process: NodeProcess | None = None) -> None:
    """Wait until ``subscription`` is matched by at least ``count`` publishers."""
    wait_until(lambda: subscription.get_publisher_count() >= count,
               f'{count} publisher(s) of {subscription.topic_name}', timeout=timeout,
               process=process)


def wait_for_service(client: Any, *, timeout: float = DEFAULT_TIMEOUT,
                     process: NodeProcess | None = None) -> None:
    """Wait until the service of ``client`` is available."""
    wait_until(client.service_is_ready, f'service {client.srv_name}', timeout=timeout,
               process=process)


def wait_for_node(test_node: Node, process: NodeProcess, namespace: str | None = None, *,
                  timeout: float = DEFAULT_TIMEOUT) -> None:
    """Wait until the controller node in ``namespace`` offers its ``~/enable`` service."""
    from std_srvs.srv import SetBool

    ns = process.namespace if namespace is None else namespace
    client = test_node.create_client(SetBool, f'{ns.rstrip("/")}/corridor_pid/enable')
    try:
        wait_for_service(client, timeout=timeout, process=process)
    finally:
        test_node.destroy_client(client)


class Spinner:
    """Spin nodes in a background thread (callbacks then run while the test waits)."""

    def __init__(self, *nodes: Node) -> None:
        """Spin ``nodes`` (all of one rclpy context) until :meth:`close`."""
        context = nodes[0].context
        self.executor = SingleThreadedExecutor(context=context)
        for node in nodes:
            self.executor.add_node(node)
        self._stop = threading.Event()
        self._thread = threading.Thread(target=self._run, name='spinner', daemon=True)
        self._thread.start()

    def _run(self) -> None:
        while not self._stop.is_set() and self.executor.context.ok():
            self.executor.spin_once(timeout_sec=0.05)

    def close(self) -> None:
        """Stop spinning and join the thread."""
        self._stop.set()
        self._thread.join()
        self.executor.shutdown()

    def __enter__(self) -> Spinner:
        """Return self."""
        return self

    def __exit__(self, *exc: object) -> None:
        """Stop spinning."""
        self.close()


M = TypeVar('M')


class Recorder(Generic[M]):
    """Keep every message of a topic, with its DDS message info, in arrival order."""

    def __init__(self, node: Node, msg_type: type[M], topic: str,
                 qos: QoSProfile | None = None) -> None:
        """Subscribe ``node`` to ``topic`` (reliable, deep queue unless ``qos`` is given)."""
        self.messages: list[M] = []
        self.infos: list[dict[str, Any]] = []
        self._lock = threading.Lock()
        self.subscription = node.create_subscription(
            msg_type, topic, self._callback,  # type: ignore[arg-type]  # with message info
            qos or reliable_qos())

    def _callback(self, msg: M, info: Any) -> None:
        with self._lock:
            self.messages.append(msg)
            self.infos.append(dict(info) if isinstance(info, Mapping) else {'info': info})

    def __len__(self) -> int:
        """Return the number of messages received."""
        return len(self.messages)

    def snapshot(self) -> list[M]:
        """Return a copy of the messages received so far."""
        with self._lock:
            return list(self.messages)

    def clear(self) -> None:
        """Forget the messages received so far."""
        with self._lock:
            self.messages.clear()
            self.infos.clear()

    def wait_for(self, condition: Callable[[list[M]], bool], what: str, *,
                 timeout: float = DEFAULT_TIMEOUT,
                 process: NodeProcess | None = None) -> list[M]:
        """Wait until ``condition(messages)`` holds; return the messages then."""
        wait_until(lambda: condition(self.snapshot()), what, timeout=timeout, process=process)
        return self.snapshot()

    def wait_for_count(self, count: int, *, timeout: float = DEFAULT_TIMEOUT,
                       process: NodeProcess | None = None) -> list[M]:
        """Wait until at least ``count`` messages arrived; return them."""
        return self.wait_for(lambda msgs: len(msgs) >= count,
                             f'{count} message(s) on {self.subscription.topic_name}',
                             timeout=timeout, process=process)


@contextlib.contextmanager
def running_node(params_file: str | os.PathLike[str] | None = None,
                 **kwargs: Any) -> Iterator[NodeProcess]:
    """Start the node (see :func:`start_node`) and stop it by PID when the block ends."""
    proc = start_node(params_file, **kwargs)
    try:
        yield proc
    finally:
        proc.stop()
