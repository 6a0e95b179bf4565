# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Centreline geometry: projection of a pose onto the course.

The course is the x-axis of the pose frame, or a polyline whose first and last segments are
extended for projection. :meth:`Course.project` returns the signed lateral offset ``y``
(positive left of the direction of travel), the heading error ``theta`` relative to the
course tangent, the curvature ``kappa`` (positive turning left) and the progress ``s``.

The tangent heading and the curvature are interpolated linearly between vertices (a vertex
takes the mean heading of its two segments and the turning angle over the mean segment
length as curvature), so ``theta`` and ``kappa`` are continuous across joins; the nearest
segment is found by a local search from the last one, so a projection costs amortised O(1).
"""

from __future__ import annotations

import bisect
import math
from collections.abc import Sequence
from typing import NamedTuple

__all__ = ['Course', 'Projection', 'wrap_angle']


def wrap_angle(angle: float) -> float:
    """Return ``angle`` wrapped into [-pi, pi) (rad)."""
    return (angle + math.pi) % (2.0 * math.pi) - math.pi


class Projection(NamedTuple):
    """A pose seen from the course: y [m], theta [rad], kappa [1/m], s [m], segment index."""

    lateral: float
    heading: float
    curvature: float
    progress: float
    index: int


class Course:
    """A centreline: the x-axis (no points) or a polyline of (x, y) vertices [m]."""

    def __init__(self, points: Sequence[tuple[float, float]] = ()) -> None:
        """Build the course from vertices; fewer than two means the x-axis."""
        self._hint = 0
        pts = [(float(x), float(y)) for x, y in points]
        self.straight = len(pts) < 2
        self.points = pts
        if self.straight:
            self.length = math.inf
            return
        ax: list[float] = []
        ay: list[float] = []
        ux: list[float] = []
        uy: list[float] = []
        lengths: list[float] = []
        starts: list[float] = []
        headings: list[float] = []
        s = 0.0
        for (x0, y0), (x1, y1) in zip(pts[:-1], pts[1:]):
            dx, dy = x1 - x0, y1 - y0
            seg = math.hypot(dx, dy)
            if seg <= 0.0:
                raise ValueError(f'course vertices coincide at ({x0!r}, {y0!r})')
            ax.append(x0)
            ay.append(y0)
            ux.append(dx / seg)
            uy.append(dy / seg)
            lengths.append(seg)
            starts.append(s)
            headings.append(math.atan2(dy, dx))
            s += seg
        self._ax, self._ay, self._ux, self._uy = ax, ay, ux, uy
        self._len, self._s0 = lengths, starts
        self.length = s
        n = len(lengths)
        # Vertex tangents and curvatures (vertex i joins segments i-1 and i).
        vert_heading = [headings[0]]
        vert_kappa = [0.0]
        for i in range(1, n):
            turn = wrap_angle(headings[i] - headings[i - 1])
            vert_heading.append(headings[i - 1] + 0.5 * turn)
            vert_kappa.append(turn / (0.5 * (lengths[i - 1] + lengths[i])))
        vert_heading.append(headings[-1])
        vert_kappa.append(0.0)
        self._vh, self._vk = vert_heading, vert_kappa
        self._vs = starts + [s]

    # -- queries along the course -------------------------------------------------------

    def _segment_at(self, s: float) -> int:
        return min(max(bisect.bisect_right(self._s0, s) - 1, 0), len(self._len) - 1)

    def _interp(self, values: list[float], i: int, s: float, angle: bool) -> float:
        frac = (s - self._s0[i]) / self._len[i]
        frac = 0.0 if frac < 0.0 else 1.0 if frac > 1.0 else frac
        a, b = values[i], values[i + 1]
        if angle:
            return a + frac * wrap_angle(b - a)
        return a + frac * (b - a)

    def curvature_at(self, s: float) -> float:
        """Return the course curvature at progress ``s`` (1/m; positive turns left)."""
        if self.straight:
            return 0.0
        return self._interp(self._vk, self._segment_at(s), s, False)

    def heading_at(self, s: float) -> float:
        """Return the course tangent heading at progress ``s`` (rad)."""
        if self.straight:
            return 0.0
        return self._interp(self._vh, self._segment_at(s), s, True)

    def point_at(self, s: float) -> tuple[float, float]:
        """Return the centreline point at progress ``s`` (m), extended past the ends."""
        if self.straight:
            return (s, 0.0)
        i = self._segment_at(s)
        t = s - self._s0[i]
        return (self._ax[i] + t * self._ux[i], self._ay[i] + t * self._uy[i])

    # -- projection ---------------------------------------------------------------------

    def _distance2(self, i: int, x: float, y: float) -> float:
        dx, dy = x - self._ax[i], y - self._ay[i]
        t = dx * self._ux[i] + dy * self._uy[i]
        last = len(self._len) - 1
        if t < 0.0 and i > 0:
            t = 0.0
        elif t > self._len[i] and i < last:
            t = self._len[i]
        ex, ey = dx - t * self._ux[i], dy - t * self._uy[i]
        return ex * ex + ey * ey

    def reset_hint(self) -> None:
        """Forget the remembered segment (after a jump or a new run)."""
        self._hint = 0

    def project(self, x: float, y: float, yaw: float) -> Projection:
        """Return the projection of pose (x [m], y [m], yaw [rad]) onto the course."""
        if self.straight:
            return Projection(y, wrap_angle(yaw), 0.0, x, 0)
        i = self._hint
        last = len(self._len) - 1
        dist = self._distance2
        best = dist(i, x, y)
        while i < last:
            nxt = dist(i + 1, x, y)
            if nxt >= best:
                break
            i, best = i + 1, nxt
        while i > 0:
            prv = dist(i - 1, x, y)
            if prv >= best:
                break
            i, best = i - 1, prv
        self._hint = i
        ux, uy = self._ux[i], self._uy[i]
        dx, dy = x - self._ax[i], y - self._ay[i]
        t = dx * ux + dy * uy
        cross = ux * dy - uy * dx
        if (t < 0.0 and i > 0) or (t > self._len[i] and i < last):
            lateral = math.copysign(math.sqrt(best), cross)
            t = 0.0 if t < 0.0 else self._len[i]
        else:
            lateral = cross
        s = self._s0[i] + t
        heading = self._interp(self._vh, i, s, True)
        kappa = self._interp(self._vk, i, s, False)
        return Projection(lateral, wrap_angle(yaw - heading), kappa, s, i)

    def global_pose(self, s: float, lateral: float, heading_error: float
                    ) -> tuple[float, float, float]:
        """Return (x, y, yaw) of the pose at progress s with offset and heading error."""
        px, py = self.point_at(s)
        h = self.heading_at(s)
        return (px - lateral * math.sin(h), py + lateral * math.cos(h),
                wrap_angle(h + heading_error))
