# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Score a recorded run with the metrics every scoring command prints.

The lateral metrics (``rms_lateral_error``, ``max_lateral_error``, ``final_lateral_error``,
``overshoot``, ``settling_time``, ``diverged``) and ``mean_speed`` describe the recorded
path: the recorded poses projected onto the params file's course, over their stamps. The
vehicle speed is the Odometry twist when the poses carry one, else the rate of progress
along the course. ``steering_saturated_fraction``, ``steering_rate_saturated_fraction`` and
``watchdog_stops`` describe what the replayed controller commanded on those poses.
"""

from __future__ import annotations

from corridor_pid.core.config import Config
from corridor_pid.core.course import Course
from corridor_pid.replay.drive import ReplayedRun
from corridor_pid.replay.track import PoseTrack
from corridor_pid.sim.metrics import Metrics, metrics_from
import numpy as np

__all__ = ['recorded_metrics', 'recorded_path']


def recorded_path(track: PoseTrack, config: Config) -> tuple[np.ndarray, np.ndarray]:
    """Return (lateral offset y [m], progress s [m]) of every recorded pose on the course."""
    course = Course(config.course.xy())
    project = course.project
    lateral = np.empty(len(track))
    progress = np.empty(len(track))
    for i, (x, y, yaw) in enumerate(zip(track.x.tolist(), track.y.tolist(),
                                        track.yaw.tolist())):
        proj = project(x, y, yaw)
        lateral[i] = proj.lateral
        progress[i] = proj.progress
    return lateral, progress


def recorded_metrics(track: PoseTrack, run: ReplayedRun, config: Config,
                     corridor_width: float | None = None,
                     path: tuple[np.ndarray, np.ndarray] | None = None) -> Metrics:
    """Return the metrics of the recorded run replayed under ``config``.

    Args:
        track: the recorded poses.
        run: their replay through the controller.
        config: the controller configuration (its course defines the lateral offset).
        corridor_width: for ``diverged`` (m); None gives ``diverged = None``.
        path: :func:`recorded_path` of the track, when already computed.

    """
    lateral, progress = recorded_path(track, config) if path is None else path
    if track.speed is not None:
        speed = np.abs(track.speed)
    elif len(track) > 1:
        speed = np.gradient(progress, track.stamp)
    else:
        speed = np.zeros(1)
    return metrics_from(track.stamp, lateral, speed, run.state, run.angle_saturated,
                        run.rate_saturated, run.computed, corridor_width)
