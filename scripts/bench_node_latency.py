#!/usr/bin/env python3
# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Print the node's pose -> steering_angle latency beside a bare rclpy relay.

Poses at 1 kHz (3,000 by default) over local DDS in a domain of its own, reliable QoS,
relay and node measured in the same run (corridor_pid.ros.latency). Goals (issue 7): node
p50 <= 1.2x and p99 <= 1.5x the relay's, no dropped commands. Exit code 0 when met.
"""

from __future__ import annotations

import argparse
import json

from corridor_pid.ros import isolation


def main() -> int:
    """Run the measurement and print a table or JSON."""
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument('--count', type=int, default=3000, help='poses per target')
    parser.add_argument('--rate', type=float, default=1000.0, help='pose rate [Hz]')
    parser.add_argument('--json', action='store_true', help='print one JSON object')
    args = parser.parse_args()
    isolation.isolate_this_process()
    from corridor_pid.ros.latency import GOAL_P50_RATIO, GOAL_P99_RATIO, measure_latency

    report = measure_latency(args.count, args.rate)
    if args.json:
        print(json.dumps(report.as_dict()))
        return 0 if report.meets_goals else 1
    print(f'pose -> steering_angle latency, {args.count} poses at {args.rate:g} Hz, '
          'reliable QoS, local DDS')
    print(f"{'':28}{'p50 us':>10}{'p99 us':>10}{'max us':>10}{'drops':>8}")
    rows = [('bare relay (rclpy.spin)', report.relay), ('corridor_pid node', report.node)]
    if report.relay_events is not None:
        rows.append(('relay, events executor', report.relay_events))
    for name, s in rows:
        print(f'{name:28}{s.p50 * 1e6:10.0f}{s.p99 * 1e6:10.0f}{s.worst * 1e6:10.0f}'
              f'{s.drops:8d}')
    print(f'node / relay: p50 {report.p50_ratio:.2f}x (goal <= {GOAL_P50_RATIO}x), '
          f'p99 {report.p99_ratio:.2f}x (goal <= {GOAL_P99_RATIO}x); '
          f"{'goals met' if report.meets_goals else 'GOALS MISSED'}")
    print(f'worst lateness of a pose against the 1/rate schedule here: '
          f'{report.worst_late * 1e6:.0f} us')
    return 0 if report.meets_goals else 1


if __name__ == '__main__':
    raise SystemExit(main())
