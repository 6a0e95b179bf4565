# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""The latency measurement runs end to end (figures are the benchmark's, not asserted here)."""

from __future__ import annotations

import math
import os
from pathlib import Path

from corridor_pid.ros.latency import LatencyStats, measure_latency
import pytest
from ros_helpers import node_env

pytestmark = pytest.mark.dds


def _sane(stats: LatencyStats, sent: int) -> None:
    assert stats.sent == sent and 0 < stats.received <= sent
    assert stats.drops == sent - stats.received
    assert 0.0 < stats.p50 <= stats.p99 <= stats.worst
    assert math.isfinite(stats.mean)


def test_relay_and_node_are_measured_in_one_run(tmp_path: Path) -> None:
    """Both targets answer, every output is matched to its pose, the report is complete."""
    env = node_env()
    report = measure_latency(count=300, rate=300.0, env=env, log_dir=tmp_path,
                             events_relay=False)
    _sane(report.relay, 300)
    _sane(report.node, 300)
    assert report.relay_events is None
    data = report.as_dict()
    assert set(data) >= {'relay', 'node', 'p50_ratio', 'p99_ratio', 'meets_goals'}
    assert data['p50_ratio'] == report.node.p50 / report.relay.p50
    assert os.environ['ROS_DOMAIN_ID'] == env['ROS_DOMAIN_ID']
