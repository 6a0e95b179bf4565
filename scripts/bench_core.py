#!/usr/bin/env python3
# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Print the full Controller.step cost beside a bare three-term PID loop.

Goals: <= 15x the bare loop on a straight course, <= 25x on a 200-vertex polyline.
"""

from __future__ import annotations

import argparse
import json

from corridor_pid.benchmarks.step_cost import measure_step_cost


def main() -> int:
    """Run the measurement and print a table or JSON."""
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument('--count', type=int, default=20000, help='steps per repeat')
    parser.add_argument('--json', action='store_true', help='print one JSON object')
    args = parser.parse_args()
    cost = measure_step_cost(args.count)
    if args.json:
        print(json.dumps({'bare_us': cost.bare * 1e6, 'straight_us': cost.straight * 1e6,
                          'polyline_us': cost.polyline * 1e6,
                          'straight_ratio': cost.straight_ratio,
                          'polyline_ratio': cost.polyline_ratio}))
        return 0
    print(f'bare three-term loop     {cost.bare * 1e6:8.3f} us/sample')
    print(f'step, straight course    {cost.straight * 1e6:8.3f} us  '
          f'({cost.straight_ratio:5.1f}x, goal <= 15x)')
    print(f'step, 200-vertex course  {cost.polyline * 1e6:8.3f} us  '
          f'({cost.polyline_ratio:5.1f}x, goal <= 25x)')
    return 0


if __name__ == '__main__':
    raise SystemExit(main())
