# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Centreline vertices from straights and circular arcs (m, rad).

Scenario files list their course as points; this helper samples arcs and S-bends into such
points so that a course is written down by its geometry::

    centreline_points([Straight(6.0), Arc(5.0, 0.5), Arc(5.0, -0.5), Straight(10.0)])

An arc of radius ``r`` turning through ``angle`` (positive left) is sampled with chords no
longer than ``spacing``; its vertices lie on the arc, so the polyline's vertex curvature
approaches ``1/r``. Straights are cut into pieces no longer than ``spacing`` too: the course
interpolates curvature between vertices, so a long single segment before an arc would
spread the arc's curvature over its whole length.
"""

from __future__ import annotations

from collections.abc import Sequence
import math
from typing import NamedTuple

__all__ = ['Arc', 'Straight', 'centreline_points']


class Straight(NamedTuple):
    """A straight piece of ``length`` [m]."""

    length: float


class Arc(NamedTuple):
    """A circular piece of ``radius`` [m] turning through ``angle`` [rad] (positive left)."""

    radius: float
    angle: float


def centreline_points(pieces: Sequence[Straight | Arc], start: tuple[float, float] = (0.0, 0.0),
                      heading: float = 0.0, spacing: float = 0.5, digits: int = 4
                      ) -> list[list[float]]:
    """Return the vertices [[x, y], ...] (m, rounded to ``digits``) of a chain of pieces.

    Args:
        pieces: straights and arcs, in order of travel.
        start: first vertex (m).
        heading: direction of travel at the first vertex (rad).
        spacing: longest chord or straight piece between two vertices (m).
        digits: decimal places kept in the output.

    """
    x, y = start
    points = [[round(x, digits), round(y, digits)]]
    for piece in pieces:
        if isinstance(piece, Straight):
            count = max(1, math.ceil(piece.length / spacing))
            for i in range(1, count + 1):
                d = piece.length * i / count
                points.append([round(x + d * math.cos(heading), digits),
                               round(y + d * math.sin(heading), digits)])
            x += piece.length * math.cos(heading)
            y += piece.length * math.sin(heading)
            continue
        radius, angle = piece
        side = 1.0 if angle >= 0.0 else -1.0
        # Centre of the arc, to the left (angle > 0) or right of the direction of travel.
        cx = x - side * radius * math.sin(heading)
        cy = y + side * radius * math.cos(heading)
        count = max(1, math.ceil(abs(angle) * radius / spacing))
        for i in range(1, count + 1):
            h = heading + angle * i / count
            px = cx + side * radius * math.sin(h)
            py = cy - side * radius * math.cos(h)
            points.append([round(px, digits), round(py, digits)])
        heading += angle
        x = cx + side * radius * math.sin(heading)
        y = cy - side * radius * math.cos(heading)
    return points
