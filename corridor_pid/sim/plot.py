# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""A four-panel picture of a simulated run (matplotlib, Agg backend; PNG).

Panels: the course from above with the corridor walls and the driven path; the true
lateral offset against time with the settling band; the wheel angle and the command with
the steering limits (the plant's and the controller's); the speed and its command.
matplotlib is an optional extra: it is imported here only when a plot is asked for.
"""

from __future__ import annotations

import math
from pathlib import Path
from typing import Any

from corridor_pid.core.course import Course
from corridor_pid.core.errors import MissingExtraError
from corridor_pid.sim.loop import SimResult
from corridor_pid.sim.metrics import settling_band
import numpy as np

__all__ = ['pyplot', 'write_plot']


def pyplot() -> Any:
    """Return matplotlib.pyplot on the Agg backend.

    Raises:
        MissingExtraError: matplotlib is not installed.

    """
    try:
        import matplotlib
    except ImportError as err:
        raise MissingExtraError('matplotlib', 'offline') from err
    matplotlib.use('Agg')
    import matplotlib.pyplot as plt
    return plt


_Lines = tuple[np.ndarray, np.ndarray | None, np.ndarray | None]


def _course_lines(result: SimResult) -> _Lines:
    """Return the centreline and the left and right walls (None without a width), (n, 2) m."""
    course = Course(result.scenario.course_points)
    trace = result.trace
    if course.straight:
        s = np.linspace(min(0.0, float(trace['x'].min())), float(trace['x'].max()) + 1.0, 2)
    else:
        end = max(course.length, float(trace['progress'].max()))
        start = min(0.0, float(trace['progress'].min()))
        s = np.linspace(start, end, max(2, math.ceil((end - start) / 0.05)))
    centre = np.array([course.point_at(float(v)) for v in s])
    width = result.scenario.corridor_width
    if width is None:
        return centre, None, None
    heading = np.array([course.heading_at(float(v)) for v in s])
    normal = np.column_stack([-np.sin(heading), np.cos(heading)])
    return centre, centre + 0.5 * width * normal, centre - 0.5 * width * normal


def write_plot(result: SimResult, path: str | Path) -> None:
    """Draw the run to the PNG file ``path``.

    Raises:
        MissingExtraError: matplotlib is not installed.
        OSError: the file cannot be written.

    """
    plt = pyplot()
    trace, scenario, config = result.trace, result.scenario, result.config
    t = trace['t']
    centre, left, right = _course_lines(result)
    # Height of the to-scale course panel from the drawing's proportions (inches).
    outline = np.vstack([line for line in (centre, left, right) if line is not None]
                        + [np.column_stack([trace['x'], trace['y']])])
    spans = np.maximum(np.ptp(outline, axis=0), 1e-6)
    top_height = float(np.clip(7.5 * spans[1] / spans[0] + 0.9, 1.6, 6.0))
    fig, axes = plt.subplots(4, 1, figsize=(9.0, top_height + 7.8),
                             gridspec_kw={'height_ratios': [top_height, 2.6, 2.6, 2.6]})
    top, lat, steer, speed = axes
    title = scenario.name or 'scenario'
    fig.suptitle(f'{title}: simulated run ({scenario.duration:g} s)')

    top.plot(centre[:, 0], centre[:, 1], color='0.6', linestyle='--', linewidth=1.0,
             label='centreline')
    if left is not None and right is not None:
        top.plot(left[:, 0], left[:, 1], color='0.2', linewidth=1.5, label='walls')
        top.plot(right[:, 0], right[:, 1], color='0.2', linewidth=1.5)
    top.plot(trace['x'], trace['y'], color='tab:blue', linewidth=1.5, label='rear axle path')
    top.plot(trace['x'][:1], trace['y'][:1], 'o', color='tab:blue')
    top.set_xlabel('x [m]')
    top.set_ylabel('y [m]')
    top.set_aspect('equal', adjustable='box')   # to scale; the next panel magnifies y
    top.legend(loc='best', fontsize='small')

    band = settling_band(float(trace['lateral'][0]))
    lat.plot(t, trace['lateral'], color='tab:blue', label='lateral offset (true)')
    seen = trace['computed'] > 0.0
    lat.plot(t[seen], trace['measured_lateral'][seen], color='tab:orange', linewidth=0.8,
             alpha=0.7, label='lateral offset (controller)')
    lat.axhspan(-band, band, color='tab:green', alpha=0.12, label='settling band')
    if scenario.corridor_width is not None:
        for sign in (1.0, -1.0):
            lat.axhline(sign * 0.5 * scenario.corridor_width, color='0.2', linewidth=1.0)
    for t0, t1 in scenario.dropouts:
        for ax in (lat, steer, speed):
            ax.axvspan(t0, min(t1, scenario.duration), color='tab:red', alpha=0.1)
    lat.set_ylabel('y [m]')
    lat.legend(loc='best', fontsize='small')

    steer.plot(t, trace['steer'], color='tab:blue', label='wheel angle')
    steer.plot(t, trace['steer_command'], color='tab:orange', linewidth=0.8,
               label='command')
    for limit, style, label in ((scenario.steering.max_angle, '-', 'mechanical limit'),
                                (config.steering.max_angle, ':', 'controller limit')):
        steer.axhline(limit, color='tab:red', linestyle=style, linewidth=1.0, label=label)
        steer.axhline(-limit, color='tab:red', linestyle=style, linewidth=1.0)
    steer.set_ylabel('steering [rad]')
    steer.legend(loc='best', fontsize='small')

    speed.plot(t, trace['speed'], color='tab:blue', label='speed')
    speed.plot(t, trace['speed_command'], color='tab:orange', linewidth=0.8,
               label='command')
    speed.axhline(scenario.speed, color='0.5', linestyle='--', linewidth=1.0, label='cruise')
    speed.set_ylabel('speed [m/s]')
    speed.set_xlabel('t [s]')
    speed.legend(loc='best', fontsize='small')
    for ax in axes:
        ax.grid(True, alpha=0.3)
    fig.tight_layout()
    try:
        fig.savefig(str(path), dpi=100)
    finally:
        plt.close(fig)
