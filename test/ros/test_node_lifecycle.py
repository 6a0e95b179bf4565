# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Start with the default params file, and stop on SIGINT/SIGTERM with a zero-speed command.

DESIGN §4: rclpy without its own signal handlers; on SIGINT or SIGTERM the node publishes
the zero-speed command (speed 0, steering at trim) and exits 0. The signal is sent to the
node's PID; the test then checks the last message of every command topic.
"""

from __future__ import annotations

from pathlib import Path
import signal

from corridor_pid.core.params import PARAMS
from corridor_pid.core.paramsfile import load_params_file
from corridor_pid.ros.testing import start_node
import pytest
from ros_helpers import node_and_peer, node_env, Peer, REPO

pytestmark = pytest.mark.dds

DEFAULT_FILE = REPO / 'config' / 'corridor_pid.yaml'


def drive_then_signal(peer: Peer, signum: int, base: float) -> int:
    """Drive until the speed is above 0.1 m/s, send ``signum``; return the exit code."""
    k = 0
    terms = peer.step(base, 0.0, 0.2)
    while terms['speed'] < 0.1:
        k += 1
        terms = peer.step(base + k * 0.02, k * 0.02, 0.2)
    assert terms['steering'] != 0.0
    counts = (len(peer.steering), len(peer.speed), len(peer.cmd))
    peer.proc.signal(signum)
    code = peer.proc.wait()
    peer.steering.wait_for_count(counts[0] + 1, process=None)
    peer.speed.wait_for_count(counts[1] + 1, process=None)
    peer.cmd.wait_for_count(counts[2] + 1, process=None)
    return code


def assert_last_command_is_zero_speed(peer: Peer, trim: float) -> None:
    """The last command on every topic: speed 0, steering at trim, no turn."""
    assert peer.speed.snapshot()[-1].data == 0.0
    assert peer.steering.snapshot()[-1].data == trim
    last = peer.cmd.snapshot()[-1]
    assert (last.twist.linear.x, last.twist.angular.z) == (0.0, 0.0)


def test_default_params_file_loads_then_sigint_stops_at_zero_speed(tmp_path: Path) -> None:
    """The node takes every value of config/corridor_pid.yaml; SIGINT -> zero speed, exit 0."""
    expected = load_params_file(DEFAULT_FILE).as_params()
    proc = start_node(DEFAULT_FILE, env=node_env(), log_dir=tmp_path)
    peer = None
    try:
        peer = Peer(proc, '', frame='')
        names = [spec.name for spec in PARAMS if spec.name != 'course.points']
        got = peer.get_params(names)
        assert got == {name: expected[name] for name in names}
        assert peer.wait_status(lambda v: True, 'a status')['state'] == 'disabled'
        assert peer.enable(True).message == 'disabled -> waiting'
        code = drive_then_signal(peer, signal.SIGINT, 1000.0)
        assert code == 0
        assert_last_command_is_zero_speed(peer, expected['steering.trim'])
        assert 'SIGINT' in proc.output() and 'Traceback' not in proc.output()
    finally:
        if peer is not None:
            peer.close()
        proc.stop()


def test_sigterm_stops_at_zero_speed(tmp_path: Path) -> None:
    """SIGTERM while driving -> a last zero-speed command on every output, exit 0."""
    values = {'start_enabled': True, 'pose_qos': 'reliable', 'steering.trim': 0.02,
              'watchdog.timeout': 5.0}
    with node_and_peer(tmp_path, '/sigterm', values) as peer:
        code = drive_then_signal(peer, signal.SIGTERM, 1000.0)
        assert code == 0
        assert_last_command_is_zero_speed(peer, 0.02)
        assert 'SIGTERM' in peer.proc.output()
