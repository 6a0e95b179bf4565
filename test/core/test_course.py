# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Course projection: signs, continuity across joins, curvature of sampled arcs."""

from __future__ import annotations

import math

from corridor_pid.core.course import Course, wrap_angle
import numpy as np
import pytest


def _arc(radius: float, sweep: float, n: int) -> list[tuple[float, float]]:
    """Return n+1 vertices of a left-turning arc from the origin heading +x."""
    return [(radius * math.sin(a), radius * (1.0 - math.cos(a)))
            for a in np.linspace(0.0, sweep, n + 1)]


def test_straight_course_is_the_x_axis() -> None:
    """Without points, y is the pose's y and theta its yaw (REP 103: left positive)."""
    p = Course().project(3.0, 0.25, 0.1)
    assert (p.lateral, p.curvature, p.progress) == (0.25, 0.0, 3.0)
    assert p.heading == pytest.approx(0.1)
    assert Course().length == math.inf


def test_polyline_signs_and_progress() -> None:
    """Left of an L-shaped course is positive; progress adds segment lengths."""
    course = Course([(0.0, 0.0), (10.0, 0.0), (10.0, 10.0)])
    assert course.project(4.0, 0.0, 0.0).progress == pytest.approx(4.0)
    p = course.project(4.0, 0.5, 0.0)
    assert p.lateral == pytest.approx(0.5)
    # Off the centreline, progress is measured between vertex bisectors: close, not equal.
    assert p.progress == pytest.approx(4.0, abs=0.3)
    q = course.project(10.5, 6.0, math.pi / 2)  # on the second leg (heading +y), right of it
    assert q.lateral == pytest.approx(-0.5)
    assert q.progress == pytest.approx(16.0, abs=0.3)
    assert q.heading == pytest.approx(0.0, abs=0.3)


def test_ends_are_extended() -> None:
    """Before the start and past the end, projection continues along the end segments."""
    course = Course([(0.0, 0.0), (10.0, 0.0), (20.0, 5.0)])
    before = course.project(-3.0, 1.0, 0.0)
    assert before.progress == pytest.approx(-3.0)
    assert before.lateral == pytest.approx(1.0)
    end = course.project(30.0, 10.0, math.atan2(5.0, 10.0))
    assert end.progress > course.length


def test_arc_curvature_and_heading() -> None:
    """A finely sampled arc of radius R has curvature 1/R and tangent heading s/R.

    Source: definition of curvature of a circle (common practice, no source).
    """
    radius = 8.0
    course = Course(_arc(radius, math.pi / 2, 60))
    for s in (2.0, 5.0, 9.0):
        assert course.curvature_at(s) == pytest.approx(1.0 / radius, rel=0.01)
        assert course.heading_at(s) == pytest.approx(s / radius, abs=0.01)


def _s_bend(radius: float, sweep: float, step: float) -> list[tuple[float, float]]:
    """Return vertices of a left arc then a right arc (an S-bend), spaced ``step`` [m]."""
    pts = [(0.0, 0.0)]
    heading = 0.0
    n = int(round(radius * sweep / step))
    for turn in (1.0, -1.0):
        for _ in range(n):
            heading += turn * step / radius
            x, y = pts[-1]
            pts.append((x + step * math.cos(heading), y + step * math.sin(heading)))
    return pts


def test_projection_is_continuous_along_a_sweep() -> None:
    """Sweeping a point 0.3 m inside an S-bend, y, s, theta and kappa change smoothly.

    Each output's change per sweep step is bounded by the step times its largest slope
    (curvature slope: 2/R over one segment at the inflection).
    """
    radius, seg = 6.0, 0.4
    course = Course(_s_bend(radius, 0.8, seg))
    prev = None
    ds = 0.01
    kappa_slope = 2.0 / radius / seg
    for s in np.arange(0.5, course.length - 0.5, ds):
        px, py = course.point_at(float(s))
        h = course.heading_at(float(s))
        x, y = px - 0.3 * math.sin(h), py + 0.3 * math.cos(h)
        p = course.project(x, y, h)
        if prev is not None:
            assert abs(p.lateral - prev.lateral) < 0.01
            assert 0.0 < p.progress - prev.progress < 3 * ds
            assert abs(wrap_angle(p.heading - prev.heading)) < 0.01
            assert abs(p.curvature - prev.curvature) < 3 * ds * kappa_slope
        prev = p


def test_local_search_recovers_after_a_jump() -> None:
    """A teleport far along the course still finds the nearest segment."""
    course = Course([(float(i), 0.0) for i in range(200)])
    course.project(1.0, 0.0, 0.0)
    p = course.project(150.5, -0.2, 0.0)
    assert p.segment == 150
    assert p.lateral == pytest.approx(-0.2)
    course.reset_hint()
    assert course.project(10.5, 0.1, 0.0).segment == 10


def test_wrap_angle() -> None:
    """Angles wrap into [-pi, pi)."""
    assert wrap_angle(3 * math.pi) == pytest.approx(-math.pi)
    assert wrap_angle(-0.5) == -0.5


def test_coincident_vertices_raise() -> None:
    """Zero-length segments are refused."""
    with pytest.raises(ValueError, match='coincide'):
        Course([(0.0, 0.0), (0.0, 0.0)])


def test_long_straight_beside_an_arc_stays_straight() -> None:
    """A 20 m straight before a finely sampled arc has no curvature until near the joint.

    The integral of curvature over the course equals the total turn (common practice, no
    source: the turning angle is the integral of curvature along the path).
    """
    radius = 5.0
    arc = _arc(radius, math.pi / 2, 40)
    course = Course([(-20.0, 0.0)] + arc)
    assert course.curvature_at(5.0) == 0.0
    assert course.curvature_at(19.0) == 0.0
    assert course.curvature_at(20.0 + 3.0) == pytest.approx(1.0 / radius, rel=0.01)
    s = np.linspace(0.0, course.length, 200_001)
    turn = np.trapezoid([course.curvature_at(float(v)) for v in s], s)
    (x0, y0), (x1, y1) = arc[-2], arc[-1]
    polyline_turn = math.atan2(y1 - y0, x1 - x0)  # the first segment heads along +x
    assert turn == pytest.approx(polyline_turn, rel=1e-4)
