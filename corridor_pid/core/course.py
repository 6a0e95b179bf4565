# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Centreline geometry: projection of a pose onto the course.

The course is the x-axis of the pose frame, or a polyline whose first and last segments are
extended for projection. :meth:`Course.project` returns the signed lateral offset ``y``
(positive left of the direction of travel), the heading error ``theta`` relative to the
course tangent, the curvature ``kappa`` (positive turning left) and the progress ``s``.

The tangent heading is interpolated linearly between vertices (a vertex takes the mean
heading of its two segments); a vertex's turning angle is spread as a tent of curvature
over plus and minus the shorter adjacent segment, so the turn is conserved and a long
straight beside a finely sampled arc stays straight. Each segment owns the region between
the bisectors of its end vertices, so ``y``, ``s`` and ``theta`` are continuous across
joins; the owning segment is found by walking from the last one, so a projection costs
amortised O(1).
"""

from __future__ import annotations

import bisect
from collections.abc import Sequence
import math
from typing import NamedTuple

__all__ = ['Course', 'Projection', 'wrap_angle']

_PI = math.pi
_TAU = 2.0 * math.pi
_new_projection = tuple.__new__


def wrap_angle(angle: float) -> float:
    """Return ``angle`` wrapped into [-pi, pi) (rad)."""
    return (angle + math.pi) % (2.0 * math.pi) - math.pi


class Projection(NamedTuple):
    """A pose seen from the course: y [m], theta [rad], kappa [1/m], s [m], segment."""

    lateral: float
    heading: float
    curvature: float
    progress: float
    segment: int


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
        # A vertex's turn is spread as a tent of curvature over +/- the shorter adjacent
        # segment (area = turn), so a long straight next to a sampled arc stays straight and
        # a uniformly sampled arc of radius R has curvature exactly 1/R.
        vert_heading = [headings[0]]
        vert_kappa = [0.0]
        widths = [1.0]
        for i in range(1, n):
            turn = wrap_angle(headings[i] - headings[i - 1])
            width = min(lengths[i - 1], lengths[i])
            vert_heading.append(headings[i - 1] + 0.5 * turn)
            vert_kappa.append(turn / width)
            widths.append(width)
        vert_heading.append(headings[-1])
        vert_kappa.append(0.0)
        widths.append(1.0)
        self._vh, self._vk, self._vw = vert_heading, vert_kappa, widths
        self._dvh = [wrap_angle(b - a) for a, b in zip(vert_heading[:-1], vert_heading[1:])]
        self._last = n - 1
        # Miter offsets at the vertices: moving by d along them keeps distance d from both
        # adjacent segment lines.
        self._mx: list[float] = []
        self._my: list[float] = []
        for k, vh in enumerate(vert_heading):
            if 0 < k < n:
                half = 0.5 * wrap_angle(headings[k] - headings[k - 1])
                scale = 1.0 / max(math.cos(half), 0.2)
            else:
                scale = 1.0
            self._mx.append(-math.sin(vh) * scale)
            self._my.append(math.cos(vh) * scale)
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

    def _kappa(self, i: int, s: float) -> float:
        """Return the curvature on segment i at progress s: the two end vertices' tents."""
        into = s - self._s0[i]
        left = 1.0 - into / self._vw[i]
        right = 1.0 - (self._len[i] - into) / self._vw[i + 1]
        kappa = 0.0
        if left > 0.0:
            kappa += self._vk[i] * (left if left < 1.0 else 1.0)
        if right > 0.0:
            kappa += self._vk[i + 1] * (right if right < 1.0 else 1.0)
        return kappa

    def curvature_at(self, s: float) -> float:
        """Return the course curvature at progress ``s`` (1/m; positive turns left)."""
        if self.straight:
            return 0.0
        return self._kappa(self._segment_at(s), s)

    def curvature_ahead(self, index: int, s: float) -> float:
        """Return the curvature at progress ``s`` (1/m) found from segment ``index``.

        The search walks from the projection's segment: O(1) for a short lookahead.
        """
        if self.straight:
            return 0.0
        starts = self._s0
        last = len(starts) - 1
        i = index
        while i < last and s >= starts[i + 1]:
            i += 1
        while i > 0 and s < starts[i]:
            i -= 1
        return self._kappa(i, s)

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

    def _lam(self, i: int, x: float, y: float) -> float:
        """Return the fraction along segment i between its vertex bisectors (may be <0, >1)."""
        qx, qy = x - self._ax[i], y - self._ay[i]
        dx, dy = self._ux[i] * self._len[i], self._uy[i] * self._len[i]
        max_, may = self._mx[i], self._my[i]
        mx, my = self._mx[i + 1] - max_, self._my[i + 1] - may
        # cross(q - lam*D, mA + lam*M) = 0  ->  a lam^2 + b lam + c = 0
        a = -(dx * my - dy * mx)
        b = (qx * my - qy * mx) - (dx * may - dy * max_)
        c = qx * may - qy * max_
        if abs(a) < 1e-12:
            return -c / b if b != 0.0 else 0.0
        disc = b * b - 4.0 * a * c
        naive = (qx * dx + qy * dy) / (self._len[i] ** 2)
        if disc < 0.0:
            return naive
        root = math.sqrt(disc)
        r1, r2 = (-b + root) / (2.0 * a), (-b - root) / (2.0 * a)
        return r1 if abs(r1 - naive) <= abs(r2 - naive) else r2

    def reset_hint(self) -> None:
        """Forget the remembered segment (after a jump or a new run)."""
        self._hint = 0

    def project(self, x: float, y: float, yaw: float) -> Projection:
        """Return the projection of pose (x [m], y [m], yaw [rad]) onto the course.

        Each segment owns the region between the bisectors of its two end vertices; inside
        it, the pose lies on the line joining the two vertex miter offsets at distance
        ``y``, at fraction ``lam`` along the segment, so ``y``, ``s`` and the interpolated
        tangent are continuous across joins.
        """
        if self.straight:
            return _new_projection(Projection, (y, (yaw + _PI) % _TAU - _PI, 0.0, x, 0))
        last = self._last
        i = self._hint
        lam = self._lam(i, x, y)
        if lam > 1.0 or lam < 0.0:
            for _ in range(last + 1):  # the walk is bounded by the segment count
                if lam > 1.0 and i < last:
                    i += 1
                elif lam < 0.0 and i > 0:
                    i -= 1
                else:
                    break
                nxt = self._lam(i, x, y)
                if (lam > 1.0 and nxt < 0.0) or (lam < 0.0 and nxt > 1.0):
                    lam = 0.0 if nxt < 0.0 else 1.0  # numerically on a bisector
                    break
                lam = nxt
            self._hint = i
        qx, qy = x - self._ax[i], y - self._ay[i]
        seg = self._len[i]
        if (lam < 0.0 and i == 0) or (lam > 1.0 and i == last):
            # Extended end segment: plain perpendicular projection.
            ux, uy = self._ux[i], self._uy[i]
            along = qx * ux + qy * uy
            s = self._s0[i] + along
            heading = self._vh[i + 1] if i == last and lam > 1.0 else self._vh[i]
            return Projection(ux * qy - uy * qx, wrap_angle(yaw - heading), 0.0, s, i)
        wx = self._mx[i] + lam * (self._mx[i + 1] - self._mx[i])
        wy = self._my[i] + lam * (self._my[i + 1] - self._my[i])
        ox, oy = qx - lam * self._ux[i] * seg, qy - lam * self._uy[i] * seg
        lateral = (ox * wx + oy * wy) / (wx * wx + wy * wy)
        frac = 0.0 if lam < 0.0 else 1.0 if lam > 1.0 else lam
        heading = self._vh[i] + frac * self._dvh[i]
        into = frac * seg  # the two end vertices' curvature tents (see _kappa)
        left = 1.0 - into / self._vw[i]
        right = 1.0 - (seg - into) / self._vw[i + 1]
        kappa = (self._vk[i] * left if left > 0.0 else 0.0) + (
            self._vk[i + 1] * right if right > 0.0 else 0.0)
        return _new_projection(Projection, (
            lateral, (yaw - heading + _PI) % _TAU - _PI, kappa, self._s0[i] + lam * seg, i))

    def global_pose(self, s: float, lateral: float, heading_error: float
                    ) -> tuple[float, float, float]:
        """Return (x, y, yaw) of the pose at progress s with offset and heading error."""
        px, py = self.point_at(s)
        h = self.heading_at(s)
        return (px - lateral * math.sin(h), py + lateral * math.cos(h),
                wrap_angle(h + heading_error))
