#!/usr/bin/env python3
# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Print how much faster than real time the closed-loop simulator runs on this computer.

Goal (issue 6): at least 500x real time for a 60 s scenario at a 100 Hz pose rate. The
benchmark scenario is the demo's (config/scenarios/hospital_corridor_bay_exit.yaml: S-bend,
pose noise, pose delay, steering dead time) stretched to 60 s at 100 Hz; every shipped
scenario is also timed at its own rate. The figure is the median of the repeats; the best
repeat is shown beside it (the machine is shared).
"""

from __future__ import annotations

import argparse
import dataclasses
import json
from pathlib import Path
import statistics
import time

from corridor_pid.core.config import default_config
from corridor_pid.sim.loop import simulate
from corridor_pid.sim.scenario import load_scenario, Scenario

ROOT = Path(__file__).resolve().parents[1]
SCENARIOS = ROOT / 'config' / 'scenarios'
GOAL = 500.0


def _times(scenario: Scenario, repeats: int) -> list[float]:
    """Return the wall-clock seconds of ``repeats`` runs of ``scenario``."""
    config = default_config()
    simulate(scenario, config)  # warm-up: imports, caches
    walls = []
    for _ in range(repeats):
        start = time.perf_counter()
        simulate(scenario, config)
        walls.append(time.perf_counter() - start)
    return walls


def main() -> int:
    """Time the runs and print a table or one JSON object."""
    parser = argparse.ArgumentParser(description=__doc__,
                                     formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument('--repeats', type=int, default=7, help='timed runs per scenario')
    parser.add_argument('--json', action='store_true', help='print one JSON object')
    args = parser.parse_args()
    demo = load_scenario(SCENARIOS / 'hospital_corridor_bay_exit.yaml')
    bench = dataclasses.replace(demo, duration=60.0, pose_rate=100.0, name='bench_60s_100Hz')
    rows = []
    for scenario in [bench] + [load_scenario(p) for p in sorted(SCENARIOS.glob('*.yaml'))]:
        walls = _times(scenario, args.repeats)
        median, best = statistics.median(walls), min(walls)
        rows.append({'scenario': scenario.name, 'duration': scenario.duration,
                     'pose_rate': scenario.pose_rate, 'median_wall': median,
                     'best_wall': best, 'realtime_factor': scenario.duration / median,
                     'best_realtime_factor': scenario.duration / best})
    headline = rows[0]['realtime_factor']
    if args.json:
        print(json.dumps({'goal': GOAL, 'realtime_factor': headline,
                          'meets_goal': headline >= GOAL, 'runs': rows}))
        return 0
    print(f"{'scenario':<28} {'sim [s]':>7} {'rate':>6} {'wall [ms]':>10} {'x real time':>12}"
          f" {'best':>7}")
    for row in rows:
        print(f"{row['scenario']:<28} {row['duration']:>7.0f} {row['pose_rate']:>5.0f}Hz "
              f"{1e3 * row['median_wall']:>10.1f} {row['realtime_factor']:>11.0f}x "
              f"{row['best_realtime_factor']:>6.0f}x")
    verdict = 'meets' if headline >= GOAL else 'MISSES'
    print(f'\n60 s at 100 Hz: {headline:.0f}x real time (median); {verdict} the goal of '
          f'{GOAL:.0f}x')
    return 0


if __name__ == '__main__':
    raise SystemExit(main())
