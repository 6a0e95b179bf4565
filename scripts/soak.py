#!/usr/bin/env python3
# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Soak the controller node: poses at 1 kHz for 10 minutes, latency and memory over time.

Not part of CI (it takes the minutes it says). Goal (issue 8): resident memory flat within
+/-5 MiB over the soak, taken after the first minute (DDS and Python settle in it).

The node runs tracking (``start_enabled``, reliable QoS) in a process of its own; this
process publishes the benchmark cart's poses on an absolute 1 kHz schedule and times each
pose -> ``steering_angle`` (:class:`corridor_pid.ros.loadgen.OutputTimer`). Every minute
it prints p50 / p99 / max latency, poses lost, and the node's CPU share and resident memory
(``/proc``); at the end, the memory spread after the first minute against the goal.

    python scripts/soak.py [--minutes 10] [--rate 1000] [--json]

DDS stays on this machine, in a domain claimed for this run.
"""

from __future__ import annotations

import argparse
import json
from pathlib import Path
import sys
import tempfile
import threading
import time
from typing import Any

from corridor_pid.benchmarks.procstat import cpu_share, MIB, process_sample
from corridor_pid.core.paramsfile import write_params_file
from corridor_pid.ros import isolation
import numpy as np

NS = '/soak'
MEMORY_GOAL = 5 * MIB
"""Resident memory must stay within +/- this of its value after the first minute [bytes]."""


def _window(latencies: list[float], lost: int, before: Any, after: Any,
            minute: int) -> dict[str, Any]:
    arr = np.asarray(latencies) if latencies else np.asarray([np.nan])
    return {'minute': minute, 'outputs': len(latencies), 'lost': lost,
            'p50_ms': float(np.percentile(arr, 50) * 1e3),
            'p99_ms': float(np.percentile(arr, 99) * 1e3),
            'max_ms': float(np.max(arr) * 1e3),
            'cpu': cpu_share(before, after), 'rss_mib': after.rss / MIB}


def main() -> int:
    """Run the soak; print per-minute lines (or JSON); return 0 when memory stayed flat."""
    parser = argparse.ArgumentParser(description=__doc__.split('\n\n')[0])
    parser.add_argument('--minutes', type=float, default=10.0)
    parser.add_argument('--rate', type=float, default=1000.0, help='pose rate [Hz]')
    parser.add_argument('--json', action='store_true')
    args = parser.parse_args()

    domain = isolation.isolate_this_process()
    from corridor_pid.ros.loadgen import cart_pose, OutputTimer, probe_node, publish_paced
    from corridor_pid.ros.node import NODE_NAME
    from corridor_pid.ros.testing import (
        start_node,
        wait_for_node,
        wait_for_publishers,
        wait_for_subscribers,
        wait_until,
    )

    folder = Path(tempfile.mkdtemp(prefix='corridor_pid-soak-'))
    params = folder / 'params.yaml'
    write_params_file(params, {'start_enabled': True, 'pose_qos': 'reliable',
                               'pose_frame': 'map', 'watchdog.timeout': 10.0},
                      node_name=f'{NS}/{NODE_NAME}')
    proc = start_node(params, namespace=NS, log_dir=folder)
    windows: list[dict[str, Any]] = []
    rss_trace: list[tuple[float, float]] = []
    stop = threading.Event()
    try:
        with probe_node('soak_probe') as node:
            timer = OutputTimer(node, NS)
            wait_for_node(node, proc, NS)
            wait_for_subscribers(timer.publisher, process=proc)
            wait_for_publishers(timer.steering, process=proc)
            wait_for_publishers(timer.terms, process=proc)
            start_ns = time.time_ns() // 1_000_000 * 1_000_000
            step_ns = int(round(1e9 / args.rate))
            # Prime: single poses until one comes back (both directions matched).
            k = 0
            while True:
                timer.publish(start_ns + k * step_ns, *cart_pose(k * step_ns * 1e-9))
                k += 1
                try:
                    wait_until(lambda: bool(timer.harvest()[0]), 'a primed output',
                               timeout=0.2, process=proc)
                    break
                except TimeoutError:
                    continue
            timer.clear()
            first = k + 10
            count = int(args.minutes * 60.0 * args.rate)

            def publish(i: int) -> None:
                n = first + i
                timer.publish(start_ns + n * step_ns, *cart_pose(n * step_ns * 1e-9))

            feeder = threading.Thread(
                target=publish_paced, args=(publish, count, args.rate),
                kwargs={'stop': stop}, name='soak-feeder', daemon=True)
            began = time.monotonic()
            feeder.start()
            before = process_sample(proc.pid)
            minute = 0
            while feeder.is_alive():
                feeder.join(10.0)
                proc.check_running()
                sample = process_sample(proc.pid)
                rss_trace.append((sample.wall - began, sample.rss / MIB))
                if sample.wall - began >= 60.0 * (minute + 1) or not feeder.is_alive():
                    minute += 1
                    latencies, lost = timer.harvest()
                    windows.append(_window(latencies, lost, before, sample, minute))
                    before = sample
                    w = windows[-1]
                    print(f"minute {minute}: {w['outputs']} outputs, {w['lost']} lost, "
                          f"p50 {w['p50_ms']:.3f} ms, p99 {w['p99_ms']:.3f} ms, max "
                          f"{w['max_ms']:.2f} ms; node CPU {w['cpu']:.0%}, RSS "
                          f"{w['rss_mib']:.1f} MiB", file=sys.stderr, flush=True)
    finally:
        stop.set()
        proc.stop()

    settled = [rss for t, rss in rss_trace if t >= 60.0] or [rss for _, rss in rss_trace]
    spread = (max(settled) - settled[0], min(settled) - settled[0])
    flat = max(abs(spread[0]), abs(spread[1])) <= MEMORY_GOAL / MIB
    result = {'minutes': args.minutes, 'rate_hz': args.rate, 'ros_domain_id': domain,
              'windows': windows, 'rss_trace_mib': rss_trace,
              'rss_after_first_minute_mib': settled[0],
              'rss_spread_mib': {'up': spread[0], 'down': spread[1]},
              'memory_goal_mib': MEMORY_GOAL / MIB, 'memory_flat': flat,
              'lost': sum(w['lost'] for w in windows)}
    if args.json:
        print(json.dumps(result))
    else:
        print(f'soak: {args.minutes:g} min at {args.rate:g} Hz, {result["lost"]} poses lost; '
              f'RSS {settled[0]:.1f} MiB after the first minute, then '
              f'{spread[1]:+.1f} / {spread[0]:+.1f} MiB (goal +/-{MEMORY_GOAL / MIB:g} MiB): '
              f'{"flat" if flat else "NOT flat"}')
    return 0 if flat else 1


if __name__ == '__main__':
    raise SystemExit(main())
