# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Domain-id claiming and the local-DDS environment (corridor_pid.ros.isolation)."""

from __future__ import annotations

import os
import select
import signal
import subprocess
import sys
import textwrap

from corridor_pid.ros import isolation
import pytest

# A child that claims an id, prints it, and holds it until its stdin closes.
CLAIMER = textwrap.dedent("""
    import sys
    from corridor_pid.ros import isolation
    print(isolation.claim_domain_id(), flush=True)
    sys.stdin.read()
""")

# A child that reports whether the lock of the id in argv[1] is free (exit 0) or held (3).
PROBE = textwrap.dedent("""
    import fcntl, os, sys
    from corridor_pid.ros import isolation
    fd = os.open(isolation.lock_path(int(sys.argv[1])), os.O_RDWR | os.O_CREAT)
    try:
        fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
    except OSError:
        sys.exit(3)
    sys.exit(0)
""")


def start_claimer() -> tuple[subprocess.Popen[str], int]:
    """Start a claiming child process; return it and the id it claimed."""
    child = subprocess.Popen(
        [sys.executable, '-c', CLAIMER], stdin=subprocess.PIPE, stdout=subprocess.PIPE,
        text=True, start_new_session=True)
    assert child.stdout is not None
    line = child.stdout.readline()
    assert line.strip().isdigit(), f'claimer printed {line!r}'
    return child, int(line)


def stop_claimer(child: subprocess.Popen[str]) -> None:
    """Let a claiming child exit (closing its stdin) and wait for it."""
    assert child.stdin is not None
    child.stdin.close()
    assert child.wait(timeout=30) == 0


def lock_is_held(domain_id: int) -> bool:
    """Return True if some process holds the lock of ``domain_id`` (asked from a child)."""
    probe = subprocess.run([sys.executable, '-c', PROBE, str(domain_id)], timeout=30)
    assert probe.returncode in (0, 3)
    return probe.returncode == 3


def test_run_environment_is_local_and_claimed(ros_domain_id: int) -> None:
    """The test run itself talks DDS on loopback only, in a domain this run holds."""
    assert os.environ['ROS_AUTOMATIC_DISCOVERY_RANGE'] == 'LOCALHOST'
    assert os.environ['ROS_DOMAIN_ID'] == str(ros_domain_id)
    assert isolation.LOWEST_DOMAIN_ID <= ros_domain_id <= isolation.HIGHEST_DOMAIN_ID
    assert 'ROS_LOCALHOST_ONLY' not in os.environ
    assert isolation.claim_domain_id() == ros_domain_id
    assert lock_is_held(ros_domain_id)


def test_concurrent_processes_get_distinct_ids(ros_domain_id: int) -> None:
    """Processes that claim at the same time never share a domain id."""
    children = [start_claimer() for _ in range(3)]
    try:
        ids = [domain_id for _, domain_id in children]
        assert len(set(ids + [ros_domain_id])) == 4
        assert all(lock_is_held(domain_id) for domain_id in ids)
    finally:
        for child, _ in children:
            stop_claimer(child)


def test_lock_is_released_when_the_process_exits() -> None:
    """The kernel drops the lock with its process, so the id is free again afterwards."""
    child, domain_id = start_claimer()
    assert lock_is_held(domain_id)
    stop_claimer(child)
    assert not lock_is_held(domain_id)


def test_fresh_claim_is_another_id_and_release_frees_it(ros_domain_id: int) -> None:
    """``fresh=True`` claims a second id; releasing it lets others take it."""
    second = isolation.claim_domain_id(fresh=True)
    try:
        assert second != ros_domain_id
        assert lock_is_held(second)
    finally:
        isolation.release_domain_id(second)
    assert not lock_is_held(second)
    assert isolation.claim_domain_id() == ros_domain_id


def test_all_ids_taken_raises(monkeypatch: pytest.MonkeyPatch, ros_domain_id: int) -> None:
    """With every id of the range held, claiming fails with a clear error."""
    monkeypatch.setattr(isolation, 'LOWEST_DOMAIN_ID', ros_domain_id)
    monkeypatch.setattr(isolation, 'HIGHEST_DOMAIN_ID', ros_domain_id)
    with pytest.raises(isolation.DomainIdUnavailableError, match=f'from {ros_domain_id} to'):
        isolation.claim_domain_id(fresh=True)


def test_local_dds_env_sets_and_drops_variables(ros_domain_id: int) -> None:
    """The isolated environment is loopback-only, in our domain, without remote peers."""
    base = {
        'PATH': '/usr/bin', 'ROS_LOCALHOST_ONLY': '1', 'ROS_DOMAIN_ID': '0',
        'ROS_STATIC_PEERS': '192.0.2.7', 'ROS_AUTOMATIC_DISCOVERY_RANGE': 'SUBNET',
    }
    env = isolation.local_dds_env(base)
    assert env == {
        'PATH': '/usr/bin', 'ROS_DOMAIN_ID': str(ros_domain_id),
        'ROS_AUTOMATIC_DISCOVERY_RANGE': 'LOCALHOST',
    }
    assert base['ROS_DOMAIN_ID'] == '0'  # the caller's mapping is left alone
    assert isolation.local_dds_env(base, 42)['ROS_DOMAIN_ID'] == '42'


def test_isolation_module_does_not_import_rclpy() -> None:
    """The isolation helper stays free of rclpy (the demo calls it before rclpy.init)."""
    code = ('import sys; import corridor_pid.ros.isolation; '
            'sys.exit(3 if "rclpy" in sys.modules else 0)')
    assert subprocess.run([sys.executable, '-c', code], timeout=60).returncode == 0


# A talker for the DDS check: publishes its domain id on /isolation_check every 20 ms, and
# prints 'ready' once its own reader on that topic has matched (its DDS is up).
TALKER = textwrap.dedent("""
    import os
    import rclpy
    from rclpy.qos import QoSProfile, ReliabilityPolicy
    from std_msgs.msg import String
    rclpy.init()
    node = rclpy.create_node('isolation_talker')
    qos = QoSProfile(depth=10, reliability=ReliabilityPolicy.RELIABLE)
    pub = node.create_publisher(String, 'isolation_check', qos)
    node.create_subscription(String, 'isolation_check', lambda msg: None, qos)
    said_ready = False

    def tick():
        global said_ready
        pub.publish(String(data=os.environ['ROS_DOMAIN_ID']))
        if not said_ready and pub.get_subscription_count() >= 1:
            print('ready', flush=True)
            said_ready = True

    node.create_timer(0.02, tick)
    try:
        rclpy.spin(node)
    except KeyboardInterrupt:
        pass
""")


HANG_GUARD = 120.0
"""Seconds after which a DDS wait gives up (only against hangs; no test measures time)."""


def stop_by_pid(child: subprocess.Popen[str]) -> None:
    """Stop a node subprocess: SIGINT, then SIGTERM if it lingers."""
    if child.poll() is None:
        child.send_signal(signal.SIGINT)
        try:
            child.wait(timeout=10)
        except subprocess.TimeoutExpired:
            child.terminate()
            child.wait(timeout=10)


@pytest.mark.dds
def test_claimed_domain_carries_dds_and_keeps_other_domains_out(
        dds_env: dict[str, str], other_domain_env: dict[str, str], ros_domain_id: int) -> None:
    """A talker in our domain reaches us over DDS; one in another domain never shows up."""
    import rclpy
    from rclpy.qos import QoSProfile, ReliabilityPolicy
    from std_msgs.msg import String

    talkers = [subprocess.Popen([sys.executable, '-c', TALKER], env=env, text=True,
                                stdout=subprocess.PIPE, start_new_session=True)
               for env in (dds_env, other_domain_env)]
    context = rclpy.Context()
    rclpy.init(context=context)
    try:
        for talker in talkers:  # both have their DDS up before we judge
            assert talker.stdout is not None
            readable, _, _ = select.select([talker.stdout], [], [], HANG_GUARD)
            assert readable, 'a talker never reported its DDS up'
            assert talker.stdout.readline().strip() == 'ready'
        node = rclpy.create_node('isolation_listener', context=context)
        heard: list[str] = []
        node.create_subscription(
            String, 'isolation_check', lambda msg: heard.append(msg.data),
            QoSProfile(depth=100, reliability=ReliabilityPolicy.RELIABLE))
        executor = rclpy.executors.SingleThreadedExecutor(context=context)
        executor.add_node(node)
        for _ in range(int(HANG_GUARD)):  # a guard against a hang, not a time assertion
            if len(heard) >= 20:
                break
            executor.spin_once(timeout_sec=1.0)
        assert set(heard) == {str(ros_domain_id)}
        assert node.count_publishers('/isolation_check') == 1
        executor.shutdown()
        node.destroy_node()
    finally:
        rclpy.shutdown(context=context)
        for talker in talkers:
            stop_by_pid(talker)
