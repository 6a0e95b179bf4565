# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""The controller node killed (SIGKILL, no chance to clean up) and started again.

Rule (DESIGN §4): the node starts ``disabled`` unless ``start_enabled: true``, whatever it
was doing before; nothing of the old run (state, integrator, counters) survives a restart.
A SIGKILLed node cannot send its final stop command: that is what the watchdog on the
vehicle side and the hardware emergency stop are for.
"""

from __future__ import annotations

from pathlib import Path
import signal

from corridor_pid.ros.testing import Recorder, Spinner, start_node, wait_for_publishers
from diagnostic_msgs.msg import DiagnosticArray
import pytest
import rclpy
from rclpy.context import Context
from rclpy.node import Node
from ros_helpers import node_env, Peer, PRIME_STAMP, terms_dict, write_params

pytestmark = pytest.mark.dds

NS = '/killed'
DT = 0.01


def run_and_kill(tmp_path: Path, params: Path, enable: bool) -> float:
    """Start the node, get it tracking, SIGKILL it; return the last pose stamp sent [s]."""
    proc = start_node(params, namespace=NS, env=node_env(), log_dir=tmp_path)
    peer = Peer(proc, NS)
    try:
        if enable:
            peer.enable(True)
        base = 1000.0
        for k in range(20):
            terms = peer.step(base + k * DT, k * DT, 0.3)
        assert terms['i'] != 0.0 or terms['p'] != 0.0
        assert peer.wait_state('tracking')['state'] == 'tracking'
        proc.signal(signal.SIGKILL)
        assert proc.wait() == -signal.SIGKILL
        return base + 19 * DT
    finally:
        peer.close()
        proc.stop()


def status_after_restart(tmp_path: Path, params: Path) -> tuple[Peer, dict[str, str]]:
    """Start the node again; return a peer and its first status after the priming pose."""
    proc = start_node(params, namespace=NS, env=node_env(), log_dir=tmp_path)
    try:
        # Peer() primes the pose subscription with one pose stamped 1 s; a disabled node
        # takes it without computing anything, an enabled one starts tracking on it.
        peer = Peer(proc, NS)
    except BaseException:
        proc.stop()
        raise
    return peer, peer.wait_status(lambda v: True, 'a status after the restart')


def test_killed_node_comes_back_disabled(tmp_path: Path, ros_domain_id: int) -> None:
    """Enabled and tracking, SIGKILL, restart: disabled, fresh counters, poses give nothing."""
    params = write_params(tmp_path / 'p.yaml', {
        'pose_qos': 'reliable', 'diagnostics.rate': 10.0, 'watchdog.timeout': 5.0,
        'gains.ki': 0.1})
    last = run_and_kill(tmp_path, params, enable=True)
    peer, status = status_after_restart(tmp_path, params)
    try:
        assert status['state'] == 'disabled'
        assert (status['rejected_poses'], status['watchdog_stops']) == ('0', '0')
        peer.terms.clear()
        peer.steering.clear()
        stamp = last + DT
        peer.publish_pose(stamp, 0.2, 0.3)
        seen = peer.wait_status(lambda v: v['last_pose_stamp'] == repr(stamp),
                                'the pose taken while disabled')
        assert seen['state'] == 'disabled'
        assert peer.terms.snapshot() == [] and peer.steering.snapshot() == []
        # It still works once enabled again.
        assert peer.enable(True).message == 'disabled -> waiting'
        terms = peer.step(stamp + DT, 0.21, 0.3)
        assert terms['i'] == 0.0
        assert peer.wait_state('tracking')['state'] == 'tracking'
    finally:
        peer.close()
        peer.proc.stop()


def test_killed_node_with_start_enabled_comes_back_waiting(
        tmp_path: Path, ros_domain_id: int) -> None:
    """start_enabled: after SIGKILL and restart the node waits for a pose, then tracks afresh."""
    params = write_params(tmp_path / 'p.yaml', {
        'start_enabled': True, 'pose_qos': 'reliable', 'diagnostics.rate': 10.0,
        'watchdog.timeout': 5.0, 'gains.ki': 0.1})
    last = run_and_kill(tmp_path, params, enable=False)
    proc = start_node(params, namespace=NS, env=node_env(), log_dir=tmp_path)
    try:
        # The first status, before any pose reaches the new process, reports 'waiting'.
        context = Context()
        rclpy.init(context=context)
        node = Node('restart_watcher', context=context)
        diag = Recorder(node, DiagnosticArray, '/diagnostics')
        with Spinner(node):
            wait_for_publishers(diag.subscription, process=proc)
            msgs = diag.wait_for_count(1, process=proc)
        status = msgs[0].status[0]
        assert status.name == f'{NS}/corridor_pid: corridor controller'
        values = {kv.key: kv.value for kv in status.values}
        node.destroy_node()
        rclpy.try_shutdown(context=context)
        assert values['state'] == 'waiting', values
        assert (values['rejected_poses'], values['watchdog_stops']) == ('0', '0')
        peer = Peer(proc, NS)   # its priming pose (stamped 1 s) starts the tracking
        try:
            # The node sends ~/terms only to a matched subscriber, and it may take that
            # priming pose before it has matched this peer's: the checks use a pose sent
            # once a status came.
            assert peer.wait_state('tracking')['state'] == 'tracking'
            # On the centreline the integral term holds only what came before it: nothing
            # carried over from the killed run (which left it non-zero).
            terms = peer.step(last + DT, 0.2, 0.0)
            assert terms['i'] == 0.0
            assert [terms_dict(m)['i'] for m in peer.terms.snapshot()
                    if terms_dict(m)['stamp'] == PRIME_STAMP] in ([], [0.0])
        finally:
            peer.close()
    finally:
        proc.stop()
