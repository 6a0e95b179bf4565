# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""The demo's report picture (matplotlib, Agg backend; PNG).

Top: the course from above, to scale, with the corridor walls and the driven path coloured
by the true lateral error, and the script's events marked where they happened. Below, on
one time axis: the lateral error (true, as the controller saw it, and the offline
simulation of the same run without the retune), the steering (command, wheel angle, the
limits), the speed (command, actual, cruise). Every time panel marks the events; the pose
outage is shaded, and so is the time the controller spent stopped.
"""

from __future__ import annotations

from collections.abc import Sequence
import math
from pathlib import Path
from typing import Any, NamedTuple

from corridor_pid.core.config import Config
from corridor_pid.core.course import Course
from corridor_pid.demo.events import Event
from corridor_pid.demo.script import DemoScript
from corridor_pid.demo.table import RunTable
from corridor_pid.sim.metrics import Metrics, settling_band
from corridor_pid.sim.plot import pyplot
from corridor_pid.sim.scenario import Scenario
import numpy as np

__all__ = ['EVENT_MARKS', 'Counterfactual', 'write_report_png']

EVENT_MARKS: dict[str, tuple[str, str]] = {
    'retune': ('R', 'tab:green'),
    'refused': ('U', 'tab:purple'),
    'blackout': ('B', 'tab:red'),
    'watchdog_stop': ('S', 'tab:red'),
    'recovered': ('T', 'tab:blue'),
}
"""Event kind -> (letter, colour) of its marker; other kinds are listed but not marked."""

DPI = 110

COURSE_BOX_RATIO = 3.5
"""Width over height of the course panel (inches); a longer course is stretched in y."""


class Counterfactual(NamedTuple):
    """The same run simulated offline without the retune: time [s], lateral offset [m]."""

    t: np.ndarray
    lateral: np.ndarray
    label: str


def _walls(course: Course, width: float | None, s_lo: float, s_hi: float
           ) -> tuple[np.ndarray, list[np.ndarray]]:
    """Return the centreline and the two walls (none without a width) over [s_lo, s_hi]."""
    s = np.linspace(s_lo, s_hi, max(2, math.ceil((s_hi - s_lo) / 0.05)))
    centre = np.array([course.point_at(float(v)) for v in s])
    if width is None:
        return centre, []
    walls = [np.array([course.global_pose(float(v), side * 0.5 * width, 0.0)[:2] for v in s])
             for side in (1.0, -1.0)]
    return centre, walls


def _course_panel(ax: Any, fig: Any, table: RunTable, scenario: Scenario,
                  marks: Sequence[tuple[float, str, str]]) -> None:
    from matplotlib.collections import LineCollection

    c = table.columns
    course = Course(scenario.course_points)
    # The stretch of corridor the vehicle drove, and a little more.
    s_lo = min(0.0, float(c['progress'].min())) - 1.0
    s_hi = float(c['progress'].max()) + 3.0
    if not course.straight:
        s_hi = min(s_hi, course.length + 1.0)
    centre, walls = _walls(course, scenario.corridor_width, s_lo, s_hi)
    ax.plot(centre[:, 0], centre[:, 1], color='0.55', linestyle=(0, (6, 4)), linewidth=0.9,
            label='centreline')
    for i, wall in enumerate(walls):
        ax.plot(wall[:, 0], wall[:, 1], color='0.15', linewidth=2.2,
                label='corridor walls' if i == 0 else None)
    if walls:
        ax.fill(np.concatenate([walls[0][:, 0], walls[1][::-1, 0]]),
                np.concatenate([walls[0][:, 1], walls[1][::-1, 1]]), color='0.94', zorder=0)
    points = np.column_stack([c['x'], c['y']])
    segments = np.stack([points[:-1], points[1:]], axis=1)
    error = np.abs(c['lateral'])
    top = max(0.05, float(np.percentile(error, 99)))
    lines = LineCollection(list(segments), cmap='plasma', linewidths=2.6,
                           norm=_norm(0.0, top))
    lines.set_array(0.5 * (error[:-1] + error[1:]))
    ax.add_collection(lines)
    bar = fig.colorbar(lines, ax=ax, pad=0.01, fraction=0.04, aspect=12)
    bar.set_label('|lateral error| [m]')
    ax.plot(c['x'][:1], c['y'][:1], marker='o', color='black', markersize=6, linestyle='',
            label='start')
    t = c['t']
    placed: list[tuple[float, float]] = []
    for when, letter, colour in marks:
        i = min(int(np.searchsorted(t, when)), len(t) - 1)
        x, y = float(c['x'][i]), float(c['y'][i])
        # Marks close together alternate above and below the path.
        crowded = sum(1 for px, py in placed if math.hypot(px - x, py - y) < 1.2)
        placed.append((x, y))
        ax.annotate(letter, (x, y), xytext=(0, 14 if crowded % 2 == 0 else -20),
                    textcoords='offset points', ha='center', fontsize=8, fontweight='bold',
                    color='white', bbox={'boxstyle': 'circle,pad=0.25', 'fc': colour,
                                         'ec': 'none'},
                    arrowprops={'arrowstyle': '-', 'color': colour, 'lw': 1.0})
    outline = np.vstack([centre, *walls, points])
    span_x, span_y = np.ptp(outline, axis=0) + 1.0
    # A long corridor is drawn with y stretched so the path stays readable (labelled).
    stretch = span_x / span_y / COURSE_BOX_RATIO
    stretch = round(stretch * 2.0) / 2.0 if stretch >= 1.5 else 1.0
    ax.set_aspect(stretch, adjustable='datalim')
    ax.set_xlabel('x [m]')
    ax.set_ylabel('y [m]' if stretch == 1.0 else f'y [m] (scale x{stretch:g})')
    ax.legend(loc='lower right', fontsize='small', framealpha=0.9)


def _norm(low: float, high: float) -> Any:
    from matplotlib.colors import Normalize

    return Normalize(vmin=low, vmax=high)


def _spans(t: np.ndarray, flags: np.ndarray) -> list[tuple[float, float]]:
    """Return the [start, end) times of each run of True in ``flags``."""
    spans: list[tuple[float, float]] = []
    start: float | None = None
    for ti, flag in zip(t, flags):
        if flag and start is None:
            start = float(ti)
        elif not flag and start is not None:
            spans.append((start, float(ti)))
            start = None
    if start is not None:
        spans.append((start, float(t[-1])))
    return spans


def write_report_png(path: str | Path, table: RunTable, scenario: Scenario, config: Config,
                     script: DemoScript, events: Sequence[Event], metrics: Metrics,
                     counterfactual: Counterfactual | None, title: str) -> None:
    """Draw the report of a demo run to the PNG file ``path``.

    Raises:
        MissingExtraError: matplotlib is not installed.
        OSError: the file cannot be written.

    """
    plt = pyplot()
    c = table.columns
    t = c['t']
    marks = [(e.time, *EVENT_MARKS[e.kind]) for e in events if e.kind in EVENT_MARKS]
    # One mark per kind and time (three refused changes at one moment show as one U).
    marks = sorted(set(marks))

    fig = plt.figure(figsize=(12.0, 11.0))
    grid = fig.add_gridspec(4, 1, height_ratios=[2.5, 2.0, 1.6, 1.4], hspace=0.32)
    course_ax = fig.add_subplot(grid[0])
    lat = fig.add_subplot(grid[1])
    steer = fig.add_subplot(grid[2], sharex=lat)
    speed = fig.add_subplot(grid[3], sharex=lat)
    fig.suptitle(title, fontsize=13, fontweight='bold', x=0.01, ha='left')
    _course_panel(course_ax, fig, table, scenario, marks)

    # Lateral error against time.
    band = settling_band(float(c['lateral'][0]))
    lat.axhspan(-band, band, color='tab:green', alpha=0.10, label=f'settling band ±{band:.2f} m')
    lat.axhline(0.0, color='0.6', linewidth=0.8)
    if counterfactual is not None:
        lat.plot(counterfactual.t, counterfactual.lateral, color='0.45', linestyle='--',
                 linewidth=1.2, label=counterfactual.label)
    seen = c['computed'] > 0
    lat.plot(t[seen], c['measured_lateral'][seen], color='tab:orange', linewidth=0.7,
             alpha=0.6, label='lateral offset seen by the controller')
    lat.plot(t, c['lateral'], color='tab:blue', linewidth=1.6, label='lateral offset (true)')
    lat.set_ylabel('lateral error y [m]')

    steer.plot(t, c['steer_command'], color='tab:orange', linewidth=0.8, label='command')
    steer.plot(t, c['steer'], color='tab:blue', linewidth=1.4, label='wheel angle')
    for limit, style, label in ((config.steering.max_angle, '--', 'controller limit'),
                                (scenario.steering.max_angle, '-', 'mechanical stop')):
        for sign in (1.0, -1.0):
            steer.axhline(sign * limit, color='tab:red', linestyle=style, linewidth=1.0,
                          label=label if sign > 0 else None)
    steer.set_ylabel('steering [rad]')
    steer.legend(loc='upper right', fontsize='small', ncol=4, framealpha=0.9)

    speed.plot(t, c['speed_command'], color='tab:orange', linewidth=0.8, label='command')
    speed.plot(t, c['speed'], color='tab:blue', linewidth=1.4, label='speed')
    speed.axhline(scenario.speed, color='0.45', linestyle='--', linewidth=1.0,
                  label='mission cruise')
    speed.set_ylabel('speed [m/s]')
    speed.set_xlabel('simulated time t [s]')
    speed.set_ylim(bottom=min(0.0, float(np.min(c['speed'])) - 0.05))
    speed.legend(loc='lower right', fontsize='small', ncol=3, framealpha=0.9)

    stopped = _spans(t, np.array([s in ('stopped', 'finished') for s in c['state']]))
    for ax in (lat, steer, speed):
        ax.axvspan(script.blackout_at, script.blackout_end, color='tab:red', alpha=0.08,
                   label='pose outage' if ax is lat else None)
        for k, (t0, t1) in enumerate(stopped):
            ax.axvspan(t0, t1, color='0.35', alpha=0.14, linewidth=0.0,
                       label='controller stopped' if ax is lat and k == 0 else None)
        for when, _, colour in marks:
            ax.axvline(when, color=colour, linewidth=1.0, alpha=0.8)
        ax.grid(True, alpha=0.3)
        ax.set_xlim(float(t[0]), float(t[-1]))
    near = 0.025 * (float(t[-1]) - float(t[0]))
    previous, lift = -math.inf, 0
    for when, letter, colour in marks:
        # Marks close in time step sideways so both letters stay readable.
        lift = (lift + 1) % 2 if when - previous < near else 0
        previous = when
        lat.annotate(letter, (when, 1.0), xycoords=('data', 'axes fraction'),
                     xytext=(9 * lift, 2), textcoords='offset points', ha='center',
                     va='bottom',
                     fontsize=8, fontweight='bold', color='white',
                     bbox={'boxstyle': 'circle,pad=0.25', 'fc': colour, 'ec': 'none'})
    lat.legend(loc='upper right', fontsize='small', ncol=2, framealpha=0.9)
    plt.setp(lat.get_xticklabels(), visible=False)
    plt.setp(steer.get_xticklabels(), visible=False)

    legend = '   '.join(f'{letter} {name}' for name, letter in (
        ('retune', 'R'), ('unsafe change refused', 'U'), ('outage', 'B'),
        ('watchdog stop', 'S'), ('tracking again', 'T')))
    scores = (f'RMS {metrics.rms_lateral_error:.3f} m   max {metrics.max_lateral_error:.3f} m   '
              f'overshoot {metrics.overshoot:.3f} m   settling {metrics.settling_time:.1f} s   '
              f'watchdog stops {metrics.watchdog_stops}   mean speed '
              f'{metrics.mean_speed:.2f} m/s')
    fig.text(0.01, 0.962, scores, fontsize=9.5, ha='left', va='top')
    fig.text(0.01, 0.942, f'marks: {legend}', fontsize=9, ha='left', va='top', color='0.3')
    fig.subplots_adjust(left=0.07, right=0.97, top=0.915, bottom=0.05)
    try:
        fig.savefig(str(path), dpi=DPI)
    finally:
        plt.close(fig)
