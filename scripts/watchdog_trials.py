#!/usr/bin/env python3
# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Watchdog stop trials: the node must stop within timeout + one watchdog period, every time.

Goal (issue 8): in 100 of 100 trials, with the other core(s) kept busy, the node enters
``stopped`` no later than ``watchdog.timeout`` + one watchdog period after its last
accepted pose.

Each trial feeds the running node poses at 100 Hz until it tracks, waits a random part of
one watchdog period (so the last pose meets the node's timer at a random phase), sends one
last pose, then goes silent. Two delays are measured on the node's clock (= this computer's clock):

* from the node taking the last pose (its ``~/terms`` time) to the ``stopped`` status the
  node publishes at the moment of the state change (its header stamp) — the goal's figure;
* from the last pose's stamp (taken here just before it was sent) to that status — what a
  vehicle sees, DDS delivery included.

Busy cores: one pure-Python busy loop per core but one, each a process of its own, stopped
by PID at the end. DDS stays on this machine, in a domain claimed for this run.

    python scripts/watchdog_trials.py [--trials 100] [--timeout 0.3] [--json]
"""

from __future__ import annotations

import argparse
import json
import os
from pathlib import Path
import random
import signal
import statistics
import subprocess
import sys
import tempfile
import time

from corridor_pid.core.config import config_from_params
from corridor_pid.core.paramsfile import write_params_file
from corridor_pid.core.timing import watchdog_period
from corridor_pid.ros import isolation

NS = '/watchdog_trials'
RATE = 100.0
"""Pose rate while tracking [Hz]."""


def _burners(count: int) -> list[subprocess.Popen[bytes]]:
    return [subprocess.Popen([sys.executable, '-c', 'while True: pass'],
                             start_new_session=True) for _ in range(count)]


def main() -> int:
    """Run the trials; print a summary (or JSON); return 0 when every trial met the goal."""
    parser = argparse.ArgumentParser(description=__doc__.split('\n\n')[0])
    parser.add_argument('--trials', type=int, default=100)
    parser.add_argument('--timeout', type=float, default=0.3, help='watchdog.timeout [s]')
    parser.add_argument('--busy', type=int, default=max(1, (os.cpu_count() or 2) - 1),
                        help='busy-loop processes (default: one per core but one)')
    parser.add_argument('--seed', type=int, default=8, help='seed of the random phases')
    parser.add_argument('--json', action='store_true')
    args = parser.parse_args()

    domain = isolation.isolate_this_process()
    from corridor_pid.ros.loadgen import pose_stamped, probe_node, qos_named, status_values
    from corridor_pid.ros.node import NODE_NAME
    from corridor_pid.ros.testing import (
        Recorder,
        start_node,
        wait_for_node,
        wait_for_publishers,
        wait_for_subscribers,
        wait_until,
    )
    from diagnostic_msgs.msg import DiagnosticArray
    from geometry_msgs.msg import PoseStamped
    from std_msgs.msg import Float64MultiArray

    values = {'start_enabled': True, 'pose_qos': 'reliable', 'diagnostics.rate': 10.0,
              'watchdog.timeout': args.timeout}
    period = watchdog_period(config_from_params(values))
    limit = args.timeout + period
    folder = Path(tempfile.mkdtemp(prefix='corridor_pid-watchdog-'))
    params = folder / 'params.yaml'
    write_params_file(params, values, node_name=f'{NS}/{NODE_NAME}')
    status_name = f'{NS}/{NODE_NAME}: corridor controller'
    proc = start_node(params, namespace=NS, log_dir=folder)
    burners = _burners(args.busy)
    node_delays: list[float] = []
    rng = random.Random(args.seed)
    stamp_delays: list[float] = []
    try:
        with probe_node('watchdog_trials') as node:
            pub = node.create_publisher(PoseStamped, f'{NS}/pose', qos_named('reliable', 100))
            terms = Recorder(node, Float64MultiArray, f'{NS}/corridor_pid/terms')
            diag = Recorder(node, DiagnosticArray, '/diagnostics')
            wait_for_node(node, proc, NS)
            wait_for_subscribers(pub, process=proc)
            wait_for_publishers(terms.subscription, process=proc)
            wait_for_publishers(diag.subscription, process=proc)

            def send() -> float:
                stamp = time.time()
                pub.publish(pose_stamped(int(stamp * 1e9), 0.0, 0.05, 0.0))
                return stamp

            def took(stamp: float) -> float | None:
                for msg in reversed(terms.snapshot()):
                    if abs(msg.data[0] - stamp) < 2e-6:
                        return float(msg.data[1])
                return None

            for trial in range(args.trials):
                terms.clear()
                # Track: poses at 100 Hz until one of them produced a command, then ten more.
                tracked = 0
                deadline = time.monotonic() + 60.0
                while tracked < 10:
                    send()
                    time.sleep(1.0 / RATE)
                    if terms.snapshot():
                        tracked += 1
                    proc.check_running()
                    if time.monotonic() > deadline:
                        raise TimeoutError('the node never tracked')
                diag.clear()
                # A random phase against the node's watchdog ticks: without it the trials
                # (each one as long as the last) would all meet the ticks alike.
                time.sleep(rng.uniform(0.0, period))
                last = send()
                wait_until(lambda: took(last) is not None,  # noqa: B023 - used at once
                           'the last pose taken', process=proc)
                accepted = took(last)
                assert accepted is not None

                def stopped_at(after: float = accepted) -> float | None:
                    for array in diag.snapshot():
                        values_ = status_values(array, status_name)
                        stamp_ = float(array.header.stamp.sec + array.header.stamp.nanosec * 1e-9)
                        if values_ and values_['state'] == 'stopped' and stamp_ > after:
                            return stamp_
                    return None

                wait_until(lambda: stopped_at() is not None, 'the stop', process=proc)
                t_stop = stopped_at()
                assert t_stop is not None
                node_delays.append(t_stop - accepted)
                stamp_delays.append(t_stop - last)
                print(f'trial {trial + 1}/{args.trials}: stopped {node_delays[-1] * 1e3:.1f} ms '
                      f'after the last accepted pose', file=sys.stderr, flush=True)
    finally:
        for burner in burners:
            burner.send_signal(signal.SIGTERM)
            burner.wait()
        proc.stop()

    within = sum(d <= limit for d in node_delays)
    result = {
        'trials': len(node_delays), 'within_limit': within, 'limit_s': limit,
        'timeout_s': args.timeout, 'watchdog_period_s': period, 'busy_processes': args.busy,
        'ros_domain_id': domain,
        'after_last_accepted_s': {'min': min(node_delays), 'median': statistics.median(
            node_delays), 'max': max(node_delays)},
        'after_last_stamp_s': {'min': min(stamp_delays), 'median': statistics.median(
            stamp_delays), 'max': max(stamp_delays)},
    }
    if args.json:
        print(json.dumps(result))
    else:
        a, b = result['after_last_accepted_s'], result['after_last_stamp_s']
        print(f'watchdog trials: {within} of {len(node_delays)} stopped within timeout '
              f'{args.timeout:g} s + period {period:g} s = {limit:g} s '
              f'({args.busy} busy-loop process(es) beside)')
        print(f'  after the last accepted pose: min {a["min"] * 1e3:.1f} ms, median '
              f'{a["median"] * 1e3:.1f} ms, max {a["max"] * 1e3:.1f} ms')
        print(f'  after the last pose stamp:    min {b["min"] * 1e3:.1f} ms, median '
              f'{b["median"] * 1e3:.1f} ms, max {b["max"] * 1e3:.1f} ms')
    return 0 if within == len(node_delays) else 1


if __name__ == '__main__':
    raise SystemExit(main())
