# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""``corridor-pid bench``: a real run (JSON and table), the verdict rule, usage errors.

Speed goals are not asserted here (they live in the bench's own output); the tests check
that every part ran for real, that the figures hang together, and that the verdict follows
its rule.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
from typing import Any

from corridor_pid.benchmarks.verdict import deadline_verdict, Goal, MARGIN
from corridor_pid.cli import main
from corridor_pid.commands.bench import bench_text, RESOURCE_RATES
import pytest

RATE = 200.0
COUNT = 300


@pytest.fixture(scope='module')
def bench_json(ros_domain_id: int) -> tuple[dict[str, Any], str]:
    """Run ``corridor-pid bench --json`` once (a process of its own); return JSON, stderr."""
    done = subprocess.run(
        [sys.executable, '-m', 'corridor_pid', 'bench', '--json', '--rate', repr(RATE),
         '--count', str(COUNT)],
        env=dict(os.environ), capture_output=True, text=True, timeout=900, check=False)
    assert done.returncode == 0, done.stderr
    return json.loads(done.stdout), done.stderr


@pytest.mark.dds
@pytest.mark.slow
def test_every_part_ran_and_the_figures_hang_together(
        bench_json: tuple[dict[str, Any], str]) -> None:
    """Step cost, latency (both targets, same count), replay, CPU/RSS at 100 Hz and 1 kHz."""
    result, stderr = bench_json
    for part in ('1/4', '2/4', '3/4', '4/4'):
        assert f'bench: {part}' in stderr          # progress on stderr
    cost = result['step_cost']
    assert isinstance(cost, dict)
    assert 0.0 < cost['bare_us'] < cost['straight_us'] < cost['polyline_us']
    assert cost['straight_ratio'] == pytest.approx(cost['straight_us'] / cost['bare_us'])
    lat = result['latency']
    assert isinstance(lat, dict) and lat['rate_hz'] == RATE
    for target in ('relay', 'node'):
        s = lat[target]
        assert s['sent'] == COUNT and 0 < s['received'] <= COUNT
        assert s['drops'] == COUNT - s['received']
        assert 0.0 < s['p50_us'] <= s['p99_us'] <= s['max_us']
    assert lat['p99_ratio'] == pytest.approx(lat['node']['p99_us'] / lat['relay']['p99_us'])
    replay = result['replay']
    assert isinstance(replay, dict)
    assert replay['poses'] == 36_000
    assert replay['poses_per_second'] == pytest.approx(replay['poses'] / replay['seconds'])
    rows = result['resources']
    assert isinstance(rows, list) and [r['rate_hz'] for r in rows] == list(RESOURCE_RATES)
    for row in rows:
        assert 0.0 < row['node_cpu'] and 0.0 < row['relay_cpu']
        assert 20.0 < row['node_rss_mib'] < 2048.0
    # Feeding poses ten times faster costs the node more CPU.
    assert rows[1]['node_cpu'] > rows[0]['node_cpu']
    machine = result['machine']
    assert isinstance(machine, dict) and 1 <= machine['ros_domain_id'] <= 101


@pytest.mark.dds
@pytest.mark.slow
def test_verdict_follows_the_measured_latency(bench_json: tuple[dict[str, Any], str]
                                              ) -> None:
    """The reported verdict is the rule applied to the reported p99 and drops."""
    result, _ = bench_json
    lat = result['latency']
    assert isinstance(lat, dict)
    node = lat['node']
    expected = deadline_verdict(RATE, node['p99_us'] * 1e-6, node['drops'], node['sent'])
    verdict = result['verdict']
    assert isinstance(verdict, dict)
    if expected.level == 'pass':
        # The CPU share can only lower a pass to marginal.
        assert verdict['level'] in ('pass', 'marginal')
    else:
        assert verdict['level'] == expected.level
    assert verdict['ok'] == (verdict['level'] == 'pass')
    goals = result['goals']
    assert isinstance(goals, list)
    names = [g['name'] for g in goals]
    assert 'offline replay rate' in names and 'step cost, straight course / bare PID' in names


@pytest.mark.dds
@pytest.mark.slow
def test_table_names_each_part_and_the_verdict(bench_json: tuple[dict[str, Any], str]
                                               ) -> None:
    """The readable report: four numbered parts, node/relay ratios, the verdict line last."""
    result, _ = bench_json
    text = bench_text({**result, 'skipped': {}})
    for heading in ('1. Controller step', '2. Pose -> steering_angle latency at 200 Hz',
                    '3. Offline replay', '4. CPU'):
        assert heading in text
    assert 'node / relay' in text and 'bare rclpy relay' in text and 'Goals' in text
    assert text.splitlines()[-1].startswith('Verdict at 200 Hz (deadline 5 ms): ')


@pytest.mark.parametrize(('p99', 'drops', 'cpu', 'level'), [
    (0.001, 0, None, 'pass'),             # 10 % of a 10 ms period
    (0.001, 0, 0.9, 'marginal'),          # fast, but the node needs 90 % of a core
    (0.007, 0, None, 'marginal'),         # within the period, beyond half of it
    (0.012, 0, None, 'fail'),             # beyond the period
    (0.001, 3, None, 'fail'),             # a pose lost
])
def test_deadline_rule(p99: float, drops: int, cpu: float | None, level: str) -> None:
    """Half a period of margin at p99, no pose lost, at most half a core (rule, 100 Hz)."""
    verdict = deadline_verdict(100.0, p99, drops, 1000, cpu)
    assert verdict.level == level
    assert verdict.ok == (level == 'pass')
    assert f'{p99 * 1e3:.2f} ms' in verdict.text


def test_margin_edge_is_a_pass() -> None:
    """p99 exactly half the period still passes (the rule says 'within')."""
    assert deadline_verdict(100.0, MARGIN * 0.01, 0, 10).level == 'pass'


def test_goal_direction() -> None:
    """A goal is 'at most' unless said otherwise (replay rate is 'at least')."""
    assert Goal('x', 1.0, 2.0, 'ms').ok and not Goal('x', 3.0, 2.0, 'ms').ok
    assert Goal('rate', 5.0, 2.0, '/s', at_most=False).ok


@pytest.mark.parametrize('argv', [
    ['bench', '--rate', '0'], ['bench', '--rate', 'fast'], ['bench', '--count', '-5'],
    ['bench', '--rate', 'inf'],
])
def test_bad_options_give_a_usage_error(argv: list[str], capsys: pytest.CaptureFixture[str]
                                        ) -> None:
    """A bad --rate or --count: exit 2, the option named on stderr, no traceback."""
    assert main(argv) == 2
    err = capsys.readouterr().err
    assert ('--rate' in err or '--count' in err) and 'Traceback' not in err
