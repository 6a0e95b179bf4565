# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""The demo's ``summary.json`` and the summary printed at the end of a run.

``summary.json`` holds one object:

- ``verdict``: ``ok`` (every goal met) and ``goals``: name -> {``ok``, ``detail``}; the goals
  are ``no_divergence``, ``retune_applied``, ``unsafe_refused``, ``watchdog_stop``,
  ``recovered`` (:func:`corridor_pid.demo.events.goals_of`);
- ``metrics``: every metric of DESIGN.md section 5 (m, s, fractions 0-1, booleans), with
  ``metric_units``;
- ``events``: in time order, each {``t`` [s of simulated time], ``kind``, ``text``, ...}
  (kinds: :data:`corridor_pid.demo.events.EVENT_KINDS`); a refused change carries ``name``,
  ``value``, ``reason`` and ``unchanged``;
- ``retune_effect``: from the retune to the end, the RMS lateral error and the overshoot,
  live and in the offline simulation of the same run without the retune;
- ``run``: scenario, pace, duration, wall-clock seconds, ROS domain id, controller settings;
- ``messages``: recorded message count per topic; ``lockstep``: poses answered in step;
- ``recording``: how the bag's log times were set (``timed_by_send_time``: messages at
  the time they were sent on the run's clock; ``timed_by_receive_clock``: the rest, at the
  recorder's receive time; see :mod:`corridor_pid.demo.logtimes`);
- ``files``: the output files, relative to the output folder.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
import json
import math
from pathlib import Path
from typing import Any

from corridor_pid.demo.events import Event, EVENT_KINDS, Goal
from corridor_pid.sim.metrics import metric_text, METRIC_UNITS, Metrics

__all__ = ['summary_object', 'summary_text', 'write_summary']


def _finite(value: Any) -> Any:
    """Return ``value`` with non-finite floats as None (JSON has no NaN)."""
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if isinstance(value, dict):
        return {k: _finite(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_finite(v) for v in value]
    return value


def summary_object(*, goals: Mapping[str, Goal], metrics: Metrics, events: Sequence[Event],
                   retune_effect: Mapping[str, Any], run: Mapping[str, Any],
                   messages: Mapping[str, int], lockstep: Mapping[str, Any],
                   files: Mapping[str, Any], recording: Mapping[str, Any] | None = None
                   ) -> dict[str, Any]:
    """Return the ``summary.json`` object (see the module docstring)."""
    summary: dict[str, Any] = _finite({
        'verdict': {
            'ok': all(goal.ok for goal in goals.values()),
            'goals': {name: {'ok': goal.ok, 'detail': goal.detail}
                      for name, goal in goals.items()},
        },
        'metrics': metrics.as_dict(),
        'metric_units': dict(METRIC_UNITS),
        'events': [e.as_dict() for e in events],
        'event_kinds': dict(EVENT_KINDS),
        'retune_effect': dict(retune_effect),
        'run': dict(run),
        'messages': dict(messages),
        'lockstep': dict(lockstep),
        'recording': dict(recording or {}),
        'files': dict(files),
    })
    return summary


def write_summary(path: str | Path, summary: Mapping[str, Any]) -> None:
    """Write ``summary.json`` (indented, keys in the order given)."""
    Path(path).write_text(json.dumps(summary, indent=2) + '\n', encoding='utf-8')


def summary_text(summary: Mapping[str, Any], out: Path) -> str:
    """Return the summary printed at the end: metrics, events, goals, files."""
    lines = ['', 'metrics (true path of the simulated vehicle)']
    units = summary['metric_units']
    for name, value in summary['metrics'].items():
        lines.append(f'  {name:<34} {metric_text(value, units.get(name, ""))}')
    effect = summary['retune_effect']
    if effect.get('live_rms') is not None and effect.get('without_retune_rms') is not None:
        lines += [
            '',
            f"retune {effect['gain']} {effect['from']:g} -> {effect['to']:g}, from "
            f"{effect['window'][0]:g} s to the end: live / without it (offline simulation)",
            f"  RMS lateral error   {metric_text(effect['live_rms'], 'm')} / "
            f"{metric_text(effect['without_retune_rms'], 'm')}",
            f"  overshoot           {metric_text(effect.get('live_overshoot'), 'm')} / "
            f"{metric_text(effect.get('without_retune_overshoot'), 'm')}"]
    lines += ['', 'events (simulated time)']
    for event in summary['events']:
        lines.append(f"  {event['t']:7.2f} s  {event['text']}")
    lines += ['', 'goals']
    for name, goal in summary['verdict']['goals'].items():
        lines.append(f"  {'met' if goal['ok'] else 'NOT MET':<8} {name:<16} {goal['detail']}")
    files = summary['files']
    lines += ['', f'files in {out}']
    for key, what in (('summary', 'metrics, events, verdict'),
                      ('csv', 'per pose slot: time, pose, errors, terms, commands, state'),
                      ('report', 'course, lateral error, steering, speed, events'),
                      ('bag', 'rosbag2 (MCAP) recording, each message at its send time'),
                      ('params', "the controller's params file as run"),
                      ('logs', 'output of the controller and the simulated vehicle')):
        if key in files:
            value = files[key]
            shown = ', '.join(value) if isinstance(value, list) else value
            lines.append(f'  {shown:<28} {what}')
    run = summary['run']
    verdict = 'met its goals' if summary['verdict']['ok'] else 'did NOT meet its goals'
    if 'bag' in files and 'params' in files:
        lines += ['', 'replay the recording (add --follow-recorded-sets to include the live '
                      'retune):',
                  f"  corridor-pid replay {out / files['bag']} --params {out / files['params']}"]
    lines += ['', f"demo {verdict} ({run['pace']} pace, {run['duration']:g} s simulated in "
                  f"{run['wall_seconds']:.1f} s)"]
    return '\n'.join(lines)
