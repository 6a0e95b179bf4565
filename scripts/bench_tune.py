#!/usr/bin/env python3
# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Time `corridor-pid tune` on the shipped scenario set on this computer.

Goal (issue 5): the whole tune run (optimiser with its default budget, the relay rows
beside it, the before/after runs and the report) over every scenario in config/scenarios
finishes in under 60 s on the 2-core machine. The verb runs in this process through the
CLI entry point, as a user calls it; the figures are the wall time of each repeat, the
candidates and simulations counted by the optimiser, and the cost before and after.
"""

from __future__ import annotations

import argparse
import contextlib
import io
import json
from pathlib import Path
import statistics
import sys
import tempfile
import time

from corridor_pid.cli import main as cli_main
from corridor_pid.tuning.optimize import default_jobs

ROOT = Path(__file__).resolve().parents[1]
SCENARIOS = sorted(str(p) for p in (ROOT / 'config' / 'scenarios').glob('*.yaml'))
GOAL = 60.0


def _one_run(free: list[str], jobs: int) -> tuple[float, dict[str, object]]:
    """Return (wall seconds, JSON report) of one tune run into a temporary file."""
    with tempfile.TemporaryDirectory() as tmp:
        argv = ['tune', *SCENARIOS, '--out', str(Path(tmp) / 'tuned.yaml'), '--json',
                '--jobs', str(jobs), '--free', *free]
        out = io.StringIO()
        start = time.perf_counter()
        with contextlib.redirect_stdout(out):
            code = cli_main(argv)
        wall = time.perf_counter() - start
    if code != 0:
        raise SystemExit(f'tune failed with exit code {code}')
    report: dict[str, object] = json.loads(out.getvalue())
    return wall, report


def main() -> int:
    """Time the runs and print a table or one JSON object; exit 1 when over the goal."""
    parser = argparse.ArgumentParser(description=__doc__,
                                     formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument('--repeats', type=int, default=3, help='timed runs (default 3)')
    parser.add_argument('--free', nargs='+', default=['kp', 'kd'],
                        help='what tune varies (default: kp kd)')
    parser.add_argument('--jobs', type=int, default=default_jobs(),
                        help='worker processes (default: the usable cores)')
    parser.add_argument('--json', action='store_true', help='print one JSON object')
    args = parser.parse_args()
    runs = [_one_run(args.free, args.jobs) for _ in range(args.repeats)]
    walls = [w for w, _ in runs]
    report = runs[-1][1]
    cost = report['cost']
    assert isinstance(cost, dict)
    result = {
        'scenarios': len(SCENARIOS), 'free': args.free, 'jobs': args.jobs,
        'walls': walls, 'median_wall': statistics.median(walls), 'best_wall': min(walls),
        'evaluations': report['evaluations'], 'simulations': report['simulations'],
        'cost_start': cost['start'], 'cost_tuned': cost['tuned'], 'goal': GOAL,
        'meets_goal': statistics.median(walls) < GOAL,
    }
    if args.json:
        print(json.dumps(result))
    else:
        print(f"tune over {result['scenarios']} shipped scenarios, free {' '.join(args.free)}, "
              f"{args.jobs} workers")
        print(f"  wall time  median {result['median_wall']:.1f} s, best "
              f"{result['best_wall']:.1f} s over {args.repeats} runs (goal < {GOAL:.0f} s)")
        print(f"  candidates {result['evaluations']}, simulations {result['simulations']}")
        print(f"  cost       {result['cost_start']:.4g} -> {result['cost_tuned']:.4g} m^2")
        print('  verdict    ' + ('meets the goal' if result['meets_goal'] else 'TOO SLOW'))
    return 0 if result['meets_goal'] else 1


if __name__ == '__main__':
    sys.exit(main())
