# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""``corridor-pid demo [--scenario S] [--out DIR] [--duration S] [--realtime | --fast]``.

Starts the controller node and a simulated vehicle as separate processes on a private,
localhost-only DDS domain, plays the demo's script (enable, live retune, refused unsafe
changes, a pose outage past the watchdog timeout) and writes ``summary.json``, ``run.csv``,
``report.png`` and the rosbag2 recording ``run/`` (MCAP) to ``--out``
(:mod:`corridor_pid.demo.run`). Progress and the summary go to stderr.

Exit status: 0 when the run met its goals (no divergence, retune applied, unsafe changes
refused, watchdog stop seen, tracking recovered); 1 when it did not, or with one
``ERROR:`` line for bad input (scenario, duration, output folder), a missing extra or a
child process that failed; 130 on Ctrl-C (after every process was stopped).
"""

from __future__ import annotations

import argparse
import sys

__all__ = ['run']


def run(args: argparse.Namespace) -> int:
    """Run the demo with the parsed arguments; return the exit status."""
    from corridor_pid.demo.run import DemoOptions, run_demo

    outcome = run_demo(DemoOptions(scenario=args.scenario, out=args.out,
                                   duration=args.duration, pace=args.pace))
    if outcome.ok:
        return 0
    failed = [name for name, goal in outcome.summary['verdict']['goals'].items()
              if not goal['ok']]
    print(f"ERROR: the demo did not meet its goals: {', '.join(failed)} "
          f"(see {outcome.out / 'summary.json'})", file=sys.stderr)
    return 1
