# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""A three-panel picture of a replayed bag (matplotlib, Agg backend; PNG).

Panels, over seconds from the first pose: the recorded lateral offset from the params
file's course with the settling band (and the corridor half-width when known); the steering
command recorded and replayed with the steering limit; the speed command recorded and
replayed. Watchdog stops of the replay are shaded.
"""

from __future__ import annotations

from pathlib import Path

from corridor_pid.core.config import Config
from corridor_pid.replay.report import ReplayReport
from corridor_pid.sim.metrics import settling_band
from corridor_pid.sim.plot import pyplot
import numpy as np

__all__ = ['write_replay_plot']


def _stopped_spans(report: ReplayReport, origin: float) -> list[tuple[float, float]]:
    """Return the (start, end) times [s from the first pose] the replay spent stopped."""
    run = report.run
    spans: list[tuple[float, float]] = []
    start: float | None = None
    for t, state in zip(run.time.tolist(), run.state):
        if state == 'stopped' and start is None:
            start = t
        elif state != 'stopped' and start is not None:
            spans.append((start - origin, t - origin))
            start = None
    if start is not None:
        spans.append((start - origin, float(run.time[-1]) - origin))
    return spans


def write_replay_plot(report: ReplayReport, config: Config, path: str | Path) -> None:
    """Write the PNG of ``report`` to ``path`` (raises OSError when it cannot be written)."""
    plt = pyplot()
    track, run = report.track, report.run
    origin = float(track.time[0])
    stamp_t = track.stamp - track.stamp[0]
    step_t = run.time - origin
    sent = run.computed | np.fromiter((s != 'tracking' for s in run.state), bool,
                                      len(run.state))
    recorded = {c.channel: c for c in report.recorded}
    fig, axes = plt.subplots(3, 1, figsize=(10, 9), sharex=True)
    ax_y, ax_s, ax_v = axes
    ax_y.plot(stamp_t, report.lateral, color='tab:blue', lw=1.2, label='recorded y')
    band = settling_band(float(report.lateral[0]))
    ax_y.axhspan(-band, band, color='tab:green', alpha=0.12, label='settling band')
    corridor_width = report.corridor_width
    if corridor_width is not None:
        for sign in (-1.0, 1.0):
            ax_y.axhline(sign * corridor_width / 2.0, color='k', lw=1.0, ls='--')
    ax_y.set_ylabel('lateral offset [m]')
    ax_s.plot(step_t[sent], run.steering[sent], color='tab:orange', lw=1.2,
              label='replayed')
    if 'steering' in recorded:
        rec = recorded['steering']
        ax_s.plot(rec.time - origin, rec.value, color='tab:gray', lw=1.0, ls='--',
                  label=f'recorded {rec.topic}')
    for sign in (-1.0, 1.0):
        ax_s.axhline(sign * config.steering.max_angle, color='tab:red', lw=0.8, ls=':')
    ax_s.set_ylabel('steering [rad]')
    ax_v.plot(step_t[sent], run.speed[sent], color='tab:orange', lw=1.2, label='replayed')
    if 'speed' in recorded:
        rec = recorded['speed']
        ax_v.plot(rec.time - origin, rec.value, color='tab:gray', lw=1.0, ls='--',
                  label=f'recorded {rec.topic}')
    ax_v.set_ylabel('speed [m/s]')
    ax_v.set_xlabel('time from the first pose [s]')
    for ax in axes:
        for t0, t1 in _stopped_spans(report, origin):
            ax.axvspan(t0, t1, color='tab:red', alpha=0.1)
        ax.grid(True, alpha=0.3)
        ax.legend(loc='upper right', fontsize=8)
    fig.suptitle(f'replay of {report.bag} ({track.topic}, {len(track)} poses)')
    fig.tight_layout()
    try:
        fig.savefig(path, dpi=100)
    finally:
        plt.close(fig)
