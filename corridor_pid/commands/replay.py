# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""``corridor-pid replay BAG``: score a recorded run through the controller core.

Usage: ``corridor-pid replay BAG [--params F] [--pose-topic T] [--pose-type K] [--stamps S]
[--corridor-width W] [--follow-recorded-sets [--controller-node NODE]] [--write OUT]
[--json] [--plot FILE.png]``.

Reads the pose topic of a rosbag2 bag (a directory; sqlite3 or MCAP storage), drives the
controller core with the params file's settings at the recorded times (enabled from the
first pose, watchdog ticks between poses as on the node: on the recorded ``/clock`` when
the bag holds one), and prints the metrics of the recorded path on the params file's
course. Where the bag holds the commands that were sent (``steering_angle``/
``target_speed``, ``cmd_vel``), it also prints how far the commands these params give
differ from them. By default the params file alone sets the controller (what THESE params
would have commanded); ``--follow-recorded-sets`` also applies the controller node's live
parameter changes recorded on ``/parameter_events``, at their times, through the node's
validation (:mod:`corridor_pid.replay.sets`). ``--write`` writes a new bag with every
original topic plus the replayed commands under ``/replay/``; ``--plot`` a PNG (needs
matplotlib).

Output: a readable summary, or one JSON object (``--json``) with every metric of DESIGN.md
section 5 plus ``bag``, ``pose_topic``, ``pose_type``, ``stamps``, ``poses``, ``duration``,
``rejected_poses``, ``comparison`` (per channel: ``topic``, ``count``, ``rms_difference``,
``max_difference``, ``first_divergence_time``, ``tolerance``), ``written``, ``ticks``
(``clock`` or ``period``) and ``recorded_sets`` (null unless following: ``node`` and
``applied``, each with ``time`` [s from the first pose] and ``values``).

Exit status 0; 1 with one ``ERROR:`` line for a missing, truncated or corrupt bag, a missing
or empty pose topic, a type that is not a pose, out-of-order stamps, a bad params file, an
output that exists, no parameter events to follow, a recorded set these params refuse, or a
missing optional library (rosbags, matplotlib). Nothing is written unless the replay
succeeded.
"""

from __future__ import annotations

import argparse
import json
import math
from pathlib import Path
import sys
from typing import Any, TYPE_CHECKING

from corridor_pid.core.config import Config, default_config
from corridor_pid.core.errors import CorridorPidError, MissingExtraError
from corridor_pid.core.paramsfile import load_params_file
from corridor_pid.sim.metrics import metric_text, METRIC_UNITS

if TYPE_CHECKING:
    from corridor_pid.replay.report import ReplayReport

__all__ = ['run', 'summary_text']

_UNITS = {'steering': 'rad', 'speed': 'm/s', 'yaw_rate': 'rad/s'}


def _number(value: float | None, unit: str) -> str:
    return '-' if value is None or not math.isfinite(value) else f'{value:.3g} {unit}'


def _sets_lines(report: ReplayReport) -> list[str]:
    """Return the lines on the recorded parameter sets followed (none when not following)."""
    followed = report.recorded_sets()
    if followed is None:
        return []
    applied: list[dict[str, Any]] = followed['applied']  # type: ignore[assignment]
    if not applied:
        return ['sets        following recorded parameter sets: none of a controller node '
                'in the bag']
    lines = [f'sets        followed {len(applied)} recorded parameter set(s) of '
             f"{followed['node']}:"]
    for change in applied:
        values = ', '.join(f'{name}={value!r}' for name, value in change['values'].items())
        lines.append(f"              {change['time']:8.3f} s  {values}")
    return lines


def summary_text(report: ReplayReport, params_file: str | None, config: Config) -> str:
    """Return the readable summary of a replay."""
    track, run = report.track, report.run
    g = config.gains
    computed = int(run.computed.sum())
    lines = [
        f'bag         {report.bag}: {track.topic} ({track.kind}), {len(track)} poses over '
        f'{report.duration:.2f} s, '
        + ('header stamps' if track.stamps == 'header' else 'receive times as stamps'),
        f"controller  {params_file or 'built-in defaults'}: kp {g.kp:g}, ki {g.ki:g}, "
        f'kd {g.kd:g}, lookahead {config.lookahead:g} m, cruise {config.speed.cruise:g} m/s, '
        f'watchdog {config.watchdog.timeout:g} s',
        f'replay      {computed} commands computed, {run.rejected} poses rejected, '
        f'{run.watchdog_stops} watchdog stop(s); timer ticks '
        + ('on the recorded /clock' if run.ticks == 'clock'
           else f'every {run.tick_period:g} s'),
        *_sets_lines(report),
        '',
        f"{'metric':<34} value",
    ]
    for name, value in report.metrics.as_dict().items():
        text = metric_text(value, METRIC_UNITS[name], 'n/a (no --corridor-width)')
        lines.append(f'{name:<34} {text}')
    lines.append('')
    if not report.comparison:
        lines.append('the bag holds no recorded commands (steering_angle, target_speed, '
                     'cmd_vel) to compare with')
    else:
        lines.append('recorded minus replayed commands')
        for diff in report.comparison:
            unit = _UNITS[diff.channel]
            first = diff.first_divergence_time
            since = ('never' if first is None else f'from {first:.3f} s')
            lines.append(
                f'  {diff.channel:<9} {diff.topic:<20} {diff.compared:>7} compared, rms '
                f'{_number(diff.rms_difference, unit)}, max {_number(diff.max_difference, unit)}'
                f'; above {diff.tolerance:g} {unit}: {since}')
    if report.written is not None:
        lines.append('')
        topics = ', '.join(t for t in report.written_counts if t.startswith('/replay/'))
        lines.append(f'wrote {report.written} (original topics plus {topics})')
    return '\n'.join(lines)


def _config(params_file: str | None) -> Config:
    return default_config() if params_file is None else load_params_file(params_file)


def _require_rosbags() -> None:
    try:
        import rosbags  # noqa: F401
    except ImportError as err:
        raise MissingExtraError('rosbags', 'offline') from err


def _checked_output(path: str | None, what: str) -> None:
    """Refuse an output whose folder is missing (before reading anything)."""
    if path is None:
        return
    folder = Path(path).resolve().parent
    if not folder.is_dir():
        raise CorridorPidError(f'{what} {path!r}: folder {str(folder)!r} does not exist')


def run(args: argparse.Namespace) -> int:
    """Replay ``args.bag`` under ``args.params``; print (and write); return the status."""
    params_file: str | None = getattr(args, 'params', None)
    plot_file: str | None = getattr(args, 'plot', None)
    write: str | None = getattr(args, 'write', None)
    stamps: str = getattr(args, 'stamps', None) or getattr(args, 'time_source', None) or 'header'
    follow = bool(getattr(args, 'follow_recorded_sets', False))
    node: str | None = getattr(args, 'controller_node', None)
    if node is not None and not follow:
        print('ERROR: --controller-node: only with --follow-recorded-sets', file=sys.stderr)
        return 2
    try:
        _require_rosbags()
        if plot_file is not None:
            from corridor_pid.sim.plot import pyplot
            pyplot()  # fail on a missing matplotlib before anything runs
        _checked_output(plot_file, '--plot')
        _checked_output(write, '--write')
        if write is not None and Path(write).exists():
            raise CorridorPidError(f'--write {write!r} exists already; choose a new name')
        config = _config(params_file)
        from corridor_pid.replay.report import replay_bag
        report = replay_bag(
            args.bag, config, pose_topic=getattr(args, 'pose_topic', None),
            pose_kind=getattr(args, 'pose_type', None), stamps=stamps,
            corridor_width=getattr(args, 'corridor_width', None), write=write,
            follow_sets=follow, sets_node=node)
        if plot_file is not None:
            from corridor_pid.replay.plot import write_replay_plot
            try:
                write_replay_plot(report, config, plot_file)
            except OSError as err:
                raise CorridorPidError(
                    f'cannot write {plot_file!r}: {err.strerror or err}') from err
    except CorridorPidError as err:
        print(f'ERROR: {err}', file=sys.stderr)
        return 1
    if getattr(args, 'json', False):
        print(json.dumps(report.as_dict(), allow_nan=False))
    else:
        print(summary_text(report, params_file, config))
        if plot_file is not None:
            print(f'wrote plot to {plot_file}')
    return 0
