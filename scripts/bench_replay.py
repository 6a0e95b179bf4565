#!/usr/bin/env python3
# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Time the offline replay of a one-hour, 100 Hz pose bag and show where the time goes.

Goal (issue 4): 360,000 poses scored in under 10 s on this machine (>= 36,000 poses/s),
bag on disk to metrics. The bag (a cart weaving about a corridor's centreline, invented
demo data) is written to a temporary folder first, untimed. The parts: read (rosbags reads
the raw messages), decode (the numpy CDR fast path), step (Controller.step on every pose and
watchdog tick), score (projection onto the course and the metrics), compare (recorded
commands; none in a pose-only bag). For reference, the time rosbags' own per-message
deserialiser takes for the same poses. ``--profile`` adds the top functions by own time.
"""

from __future__ import annotations

import argparse
import cProfile
import io
import json
import pstats
import sys

from corridor_pid.replay.bench import GOAL_POSES_PER_SECOND, replay_benchmark, ReplayBenchmark


def _table(result: ReplayBenchmark) -> str:
    lines = [
        f'storage {result.storage}: {result.poses} poses in {result.seconds:.2f} s = '
        f'{result.poses_per_second:,.0f} poses/s (goal >= {GOAL_POSES_PER_SECOND:,.0f}): '
        + ('OK' if result.ok else 'TOO SLOW'),
    ]
    for part, seconds in result.parts.items():
        share = 100.0 * seconds / result.seconds if result.seconds > 0 else 0.0
        lines.append(f'  {part:<8} {seconds:7.3f} s  {share:5.1f} %')
    if result.rosbags_decode_seconds is not None:
        lines.append(f'  (rosbags deserialising the same poses one by one: '
                     f'{result.rosbags_decode_seconds:.3f} s)')
    return '\n'.join(lines)


def main() -> int:
    """Run the benchmark; print a table or JSON; exit 1 when a run misses the goal."""
    parser = argparse.ArgumentParser(description=__doc__,
                                     formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument('--poses', type=int, default=360_000,
                        help='poses in the bag (default: one hour at 100 Hz)')
    parser.add_argument('--storage', choices=('sqlite3', 'mcap', 'both'), default='both',
                        help='bag storage format (default: both, one after the other)')
    parser.add_argument('--profile', action='store_true',
                        help='also print the 15 functions with the most own time')
    parser.add_argument('--json', action='store_true', help='print one JSON object')
    args = parser.parse_args()
    storages = ['sqlite3', 'mcap'] if args.storage == 'both' else [args.storage]
    results = []
    profiles = []
    for storage in storages:
        profiler = cProfile.Profile() if args.profile else None
        if profiler is not None:
            profiler.enable()
        results.append(replay_benchmark(args.poses, storage=storage))
        if profiler is not None:
            profiler.disable()
            text = io.StringIO()
            pstats.Stats(profiler, stream=text).sort_stats('tottime').print_stats(15)
            profiles.append(text.getvalue())
    if args.json:
        print(json.dumps({'runs': [r.as_dict() for r in results],
                          'ok': all(r.ok for r in results)}))
    else:
        for result, profile in zip(results, profiles or [''] * len(results)):
            print(_table(result))
            if profile:
                print(profile)
    return 0 if all(r.ok for r in results) else 1


if __name__ == '__main__':
    sys.exit(main())
