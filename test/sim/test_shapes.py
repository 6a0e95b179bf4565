# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Centreline points from straights and arcs: on the circle, with the right curvature."""

from __future__ import annotations

import math

from corridor_pid.core.course import Course
from corridor_pid.sim.shapes import Arc, centreline_points, Straight
import numpy as np
import pytest


def test_arc_vertices_lie_on_the_circle() -> None:
    """A left quarter turn of radius 3 m from the origin has its centre at (0, 3)."""
    points = np.array(centreline_points([Arc(3.0, math.pi / 2)], spacing=0.2, digits=9))
    np.testing.assert_allclose(np.hypot(points[:, 0], points[:, 1] - 3.0), 3.0, atol=1e-9)
    assert points[-1] == pytest.approx([3.0, 3.0])


def test_s_bend_ends_parallel_and_offset() -> None:
    """Two opposite arcs return to the first heading, shifted sideways by 2 R (1 - cos a)."""
    radius, angle = 8.0, 0.35
    points = centreline_points([Straight(2.0), Arc(radius, angle), Arc(radius, -angle),
                                Straight(5.0)], digits=9)
    (x0, y0), (x1, y1) = points[-2], points[-1]
    assert math.atan2(y1 - y0, x1 - x0) == pytest.approx(0.0, abs=1e-9)
    assert y1 == pytest.approx(2.0 * radius * (1.0 - math.cos(angle)))


def test_course_curvature_of_a_sampled_arc_is_one_over_the_radius() -> None:
    """The core's vertex curvature of the sampled arc is 1/R inside the arc (within 1 %)."""
    radius = 2.5
    course = Course([tuple(p) for p in centreline_points(
        [Straight(5.0), Arc(radius, math.pi / 2), Straight(5.0)], spacing=0.4)])
    middle = 5.0 + radius * math.pi / 4
    assert course.curvature_at(middle) == pytest.approx(1.0 / radius, rel=0.01)
    assert course.curvature_at(2.0) == 0.0
