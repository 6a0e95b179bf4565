# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""``corridor-pid bench [--json] [--rate HZ] [--count N]``: can this computer keep up.

Four measurements, each against a bare reference run on the same computer in the same
invocation (the figures of a shared or busy computer move together, their ratios less):

1. **Step cost** — ``Controller.step`` against a bare three-term PID loop, in this process
   (:mod:`corridor_pid.benchmarks.step_cost`).
2. **Latency** — pose -> ``steering_angle`` of the controller node against a bare rclpy
   relay node, both processes of their own on a private local DDS domain with reliable QoS,
   ``--count`` poses each at ``--rate`` Hz: p50, p99, max and dropped poses
   (:mod:`corridor_pid.ros.latency`).
3. **Replay rate** — a bag of :data:`REPLAY_POSES` poses read, replayed through the core and
   scored offline (:mod:`corridor_pid.replay.bench`), in poses per second.
4. **CPU and memory** — of the node and of the relay fed poses at 100 Hz and at 1 kHz
   (``/proc/<pid>/stat`` and ``status``; :func:`corridor_pid.ros.loadgen.measure_resources`).

The verdict (:mod:`corridor_pid.benchmarks.verdict`) says whether the node keeps the
deadline of one period at ``--rate`` with margin at p99. Progress goes to stderr; the table
(or one JSON object with ``--json``) to stdout. Exit status 0 when the measurements ran,
whatever the verdict; 1 with one ``ERROR:`` line when a measured process could not run.
DDS stays on this machine (``ROS_AUTOMATIC_DISCOVERY_RANGE=LOCALHOST``, a domain id claimed
for this run).
"""

from __future__ import annotations

import argparse
from collections.abc import Callable
import json
import os
from pathlib import Path
import platform
import sys
import tempfile
import time
from typing import Any

from corridor_pid.benchmarks.procstat import MIB
from corridor_pid.benchmarks.step_cost import measure_step_cost, StepCost
from corridor_pid.benchmarks.verdict import deadline_verdict, Goal, Verdict
from corridor_pid.core.errors import MissingExtraError

__all__ = ['REPLAY_POSES', 'RESOURCE_RATES', 'bench_goals', 'bench_text', 'run']

REPLAY_POSES = 36_000
"""Poses in the replay benchmark's bag (six minutes at 100 Hz)."""

RESOURCE_RATES = (100.0, 1000.0)
"""Pose rates [Hz] at which CPU and memory are read."""

STEP_GOALS = (15.0, 25.0)
"""Step cost goals: straight course, 200-vertex polyline, as multiples of the bare loop."""

LATENCY_P99_AT_100HZ = 0.005
"""Goal: node p99 latency at 100 Hz [s]."""


def _progress(text: str) -> None:
    print(f'bench: {text}', file=sys.stderr, flush=True)


def _step_cost_dict(cost: StepCost) -> dict[str, float]:
    return {'bare_us': cost.bare * 1e6, 'straight_us': cost.straight * 1e6,
            'polyline_us': cost.polyline * 1e6, 'straight_ratio': cost.straight_ratio,
            'polyline_ratio': cost.polyline_ratio}


def _resources(rates: tuple[float, ...], env: dict[str, str], folder: Path,
               progress: Callable[[str], None]) -> list[dict[str, Any]]:
    """Return CPU and memory of the node and the relay at each rate."""
    from corridor_pid.core.paramsfile import write_params_file
    from corridor_pid.ros.loadgen import measure_resources

    ns = '/bench_cpu'
    params = folder / 'bench_cpu.yaml'
    write_params_file(params, {'start_enabled': True, 'pose_qos': 'reliable',
                               'pose_frame': 'map', 'watchdog.timeout': 10.0},
                      node_name=f'{ns}/corridor_pid')
    relay = [sys.executable, '-m', 'corridor_pid.ros.latency', 'relay']
    rows = []
    for rate in rates:
        progress(f'4/4 CPU and memory at {rate:g} Hz: the node')
        node = measure_resources('node', None, params, ns, rate, env=env, log_dir=folder)
        progress(f'4/4 CPU and memory at {rate:g} Hz: the bare relay')
        bare = measure_resources('relay', relay, None, '/bench_relay_cpu', rate, env=env,
                                 log_dir=folder)
        rows.append({
            'rate_hz': rate,
            'node_cpu': node.cpu, 'relay_cpu': bare.cpu,
            'cpu_ratio': node.cpu / bare.cpu if bare.cpu > 0 else None,
            'node_rss_mib': node.rss / MIB, 'relay_rss_mib': bare.rss / MIB,
            'node_rss_growth_mib': node.rss_growth / MIB, 'window_s': node.window,
        })
    return rows


def bench_goals(result: dict[str, Any]) -> list[Goal]:
    """Return the project's speed goals that the measured figures speak to."""
    goals = []
    cost = result.get('step_cost')
    if cost:
        goals += [Goal('step cost, straight course / bare PID', cost['straight_ratio'],
                       STEP_GOALS[0], 'x'),
                  Goal('step cost, 200-vertex course / bare PID', cost['polyline_ratio'],
                       STEP_GOALS[1], 'x')]
    lat = result.get('latency')
    if lat and lat['rate_hz'] == 1000.0:
        goals += [Goal('latency p50, node / relay at 1 kHz', lat['p50_ratio'],
                       lat['goal_p50_ratio'], 'x'),
                  Goal('latency p99, node / relay at 1 kHz', lat['p99_ratio'],
                       lat['goal_p99_ratio'], 'x'),
                  Goal('dropped poses at 1 kHz', lat['node']['drops'], 0, '')]
    if lat and lat['rate_hz'] == 100.0:
        goals.append(Goal('latency p99 of the node at 100 Hz', lat['node']['p99_us'] / 1e3,
                          LATENCY_P99_AT_100HZ * 1e3, 'ms'))
    replay = result.get('replay')
    if replay:
        goals.append(Goal('offline replay rate', replay['poses_per_second'],
                          replay['goal_poses_per_second'], 'poses/s', at_most=False))
    return goals


def _figure(value: float) -> str:
    return f'{value:,.0f}' if abs(value) >= 1000 else f'{value:.3g}'


def _ms(us: float) -> str:
    return f'{us / 1e3:8.3f} ms'


def bench_text(result: dict[str, Any]) -> str:
    """Return the readable report of a bench run."""
    m = result['machine']
    lines = [f"corridor-pid bench on {m['cpus']} CPU(s), load {m['load']}, "
             f"Python {m['python']}, ROS domain {m['ros_domain_id']} (local only)", '']
    cost = result['step_cost']
    lines += ['1. Controller step, in this process          per call    / bare PID',
              f"   bare three-term PID loop               {cost['bare_us']:9.3f} us      1.0x",
              f"   step, straight course                  {cost['straight_us']:9.3f} us "
              f"{cost['straight_ratio']:8.1f}x",
              f"   step, 200-vertex course                {cost['polyline_us']:9.3f} us "
              f"{cost['polyline_ratio']:8.1f}x", '']
    lat = result.get('latency')
    if lat is None:
        lines += [f"2. Latency: skipped ({result['skipped']['latency']})", '']
    else:
        lines += [f"2. Pose -> steering_angle latency at {lat['rate_hz']:g} Hz "
                  f"({lat['node']['sent']} poses each; reliable QoS, local DDS)",
                  f"   {'':22}{'p50':>11}  {'p99':>11}  {'max':>11}  {'drops':>6}"]
        targets = [('bare rclpy relay', 'relay'), ('relay, events executor', 'relay_events'),
                   ('corridor_pid node', 'node')]
        for label, key in targets:
            s = lat.get(key)
            if not s:
                continue
            lines.append(f"   {label:<22}{_ms(s['p50_us'])}  {_ms(s['p99_us'])}  "
                         f"{_ms(s['max_us'])}  {s['drops']:6d}")
        lines.append(f"   {'node / relay':<22}{lat['p50_ratio']:10.2f}x  "
                     f"{lat['p99_ratio']:10.2f}x")
        events = lat.get('relay_events')
        if events:
            lines.append(f"   {'node / events relay':<22}"
                         f"{lat['node']['p50_us'] / events['p50_us']:10.2f}x  "
                         f"{lat['node']['p99_us'] / events['p99_us']:10.2f}x")
        lines.append('')
    replay = result.get('replay')
    if replay is None:
        lines += [f"3. Replay rate: skipped ({result['skipped']['replay']})", '']
    else:
        lines += [f"3. Offline replay: {replay['poses_per_second']:,.0f} poses/s "
                  f"({replay['poses']:,} poses from a {replay['storage']} bag in "
                  f"{replay['seconds']:.2f} s)", '']
    rows = result.get('resources')
    if rows is None:
        lines += [f"4. CPU and memory: skipped ({result['skipped']['resources']})", '']
    else:
        lines.append('4. CPU (share of one core) and resident memory, poses fed at')
        lines.append(' ' * 22 + ''.join(
            f"{str(int(row['rate_hz'])) + ' Hz':>19}    " for row in rows).rstrip())
        for label, cpu, rss in (('bare rclpy relay ', 'relay_cpu', 'relay_rss_mib'),
                                ('corridor_pid node', 'node_cpu', 'node_rss_mib')):
            lines.append(f'   {label}  ' + ''.join(
                f'{row[cpu]:7.1%} {row[rss]:7.1f} MiB    ' for row in rows).rstrip())
        lines.append('   node / relay CPU   ' + ''.join(
            (f"{row['cpu_ratio']:6.2f}x" if row['cpu_ratio'] else '    n/a') + ' ' * 16
            for row in rows).rstrip())
        lines.append('')
    goals = result['goals']
    if goals:
        lines.append('Goals')
        for g in goals:
            sign = '<=' if g['at_most'] else '>='
            mark = 'ok  ' if g['ok'] else 'MISS'
            unit = f" {g['unit']}" if g['unit'] else ''
            lines.append(f"   {mark} {g['name']}: {_figure(g['value'])}{unit} "
                         f"(goal {sign} {_figure(g['limit'])}{unit})")
        lines.append('')
    v = result['verdict']
    lines.append(f"Verdict at {result['rate_hz']:g} Hz (deadline {1e3 / result['rate_hz']:g} ms):"
                 f" {v['level'].upper()}: {v['text']}.")
    return '\n'.join(lines)


def _verdict(result: dict[str, Any]) -> Verdict:
    lat = result.get('latency')
    if lat is None:
        return Verdict('unknown', 'the node latency could not be measured')
    rate = result['rate_hz']
    cpu = next((row['node_cpu'] for row in result.get('resources') or []
                if row['rate_hz'] == rate), None)
    node = lat['node']
    return deadline_verdict(rate, node['p99_us'] * 1e-6, node['drops'], node['sent'], cpu)


def run(args: argparse.Namespace) -> int:
    """Run the bench; print the table or JSON; return 0 (1 when a process cannot run)."""
    rate, count = float(args.rate), int(args.count)
    result: dict[str, Any] = {'rate_hz': rate, 'count': count, 'skipped': {}}
    started = time.monotonic()

    _progress('1/4 controller step against a bare three-term PID loop')
    result['step_cost'] = _step_cost_dict(measure_step_cost())

    env: dict[str, str] = {}
    with tempfile.TemporaryDirectory(prefix='corridor_pid-bench-') as tmp:
        folder = Path(tmp)
        try:
            import rclpy  # noqa: F401 - only to know whether the DDS parts can run
        except ImportError as err:
            why = f'rclpy is not importable ({err}); source ROS 2 Jazzy or run `make venv`'
            result['skipped'].update(latency=why, resources=why)
            domain: int | None = None
        else:
            from corridor_pid.ros import isolation

            domain = isolation.isolate_this_process()
            env = isolation.local_dds_env()
            try:
                from corridor_pid.ros.latency import measure_latency

                _progress(f'2/4 node and bare relay latency at {rate:g} Hz, {count} poses '
                          f'each (about {2 * (count + 200) / rate:.0f} s)')
                latency = measure_latency(count=count, rate=rate, env=env, log_dir=folder)
                result['latency'] = latency.as_dict()
            except (RuntimeError, TimeoutError, OSError) as err:
                print(f'ERROR: node latency: {_first_line(err)}', file=sys.stderr)
                return 1

        _progress(f'3/4 offline replay of {REPLAY_POSES:,} poses')
        try:
            from corridor_pid.replay.bench import replay_benchmark

            replay = replay_benchmark(REPLAY_POSES, workdir=folder, reference=False)
            result['replay'] = replay.as_dict()
        except MissingExtraError as err:
            result['skipped']['replay'] = str(err)
        except ImportError as err:
            result['skipped']['replay'] = str(MissingExtraError(err.name or 'rosbags',
                                                                'offline'))

        if domain is not None:
            try:
                result['resources'] = _resources(RESOURCE_RATES, env, folder, _progress)
            except (RuntimeError, TimeoutError, OSError) as err:
                print(f'ERROR: CPU and memory: {_first_line(err)}', file=sys.stderr)
                return 1

    result['goals'] = [dict(g._asdict(), ok=g.ok) for g in bench_goals(result)]
    verdict = _verdict(result)
    result['verdict'] = dict(verdict._asdict(), ok=verdict.ok)
    load = os.getloadavg()
    result['machine'] = {'cpus': os.cpu_count(), 'load': ' '.join(f'{x:.2f}' for x in load),
                         'python': platform.python_version(), 'ros_domain_id': domain}
    result['seconds'] = time.monotonic() - started
    if not result['skipped']:
        del result['skipped']
    if args.json:
        print(json.dumps(result))
    else:
        result.setdefault('skipped', {})
        print(bench_text(result))
    return 0


def _first_line(err: BaseException) -> str:
    text = str(err).strip()
    return text.splitlines()[0] if text else type(err).__name__
