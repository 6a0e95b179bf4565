# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""The pose sensor: schedule, seeded noise, delay and dropouts."""

from __future__ import annotations

from corridor_pid.sim.sensor import PoseSensor
import numpy as np
import pytest


def test_schedule_and_delay() -> None:
    """Sample k is stamped k / rate and arrives pose_delay later."""
    sensor = PoseSensor(rate=50.0, duration=2.0, delay=0.03)
    assert len(sensor) == 101
    sample = sensor.measure(10, 1.0, 2.0, 0.5)
    assert sample.stamp == pytest.approx(0.2)
    assert sensor.arrival(10) == pytest.approx(0.23)
    assert (sample.x, sample.y, sample.yaw) == (1.0, 2.0, 0.5)


def test_noise_has_the_stated_spread_and_is_seeded() -> None:
    """Position and heading noise have the configured standard deviations; a seed fixes them."""
    sensor = PoseSensor(100.0, 100.0, position_noise=0.02, heading_noise=0.01, seed=11)
    samples = [sensor.measure(k, 0.0, 0.0, 0.0) for k in range(len(sensor))]
    xs = np.array([s.x for s in samples])
    yaws = np.array([s.yaw for s in samples])
    # 10001 draws: the sample standard deviation is within a few percent of the true one.
    assert np.std(xs) == pytest.approx(0.02, rel=0.05)
    assert np.std(yaws) == pytest.approx(0.01, rel=0.05)
    again = PoseSensor(100.0, 100.0, position_noise=0.02, heading_noise=0.01, seed=11)
    assert again.noise == sensor.noise
    other = PoseSensor(100.0, 100.0, position_noise=0.02, heading_noise=0.01, seed=12)
    assert other.noise != sensor.noise


def test_dropout_window_loses_the_samples_inside() -> None:
    """Samples taken in [t0, t1) are lost; the ones at t1 and after arrive."""
    sensor = PoseSensor(10.0, 3.0, dropouts=[(1.0, 1.5)])
    lost = [t for t, gone in zip(sensor.times, sensor.lost, strict=True) if gone]
    assert lost == pytest.approx([1.0, 1.1, 1.2, 1.3, 1.4])


def test_heading_noise_wraps() -> None:
    """A noisy heading stays in [-pi, pi)."""
    sensor = PoseSensor(10.0, 1.0, heading_noise=0.5, seed=3)
    yaws = [sensor.measure(k, 0.0, 0.0, 3.1).yaw for k in range(len(sensor))]
    assert all(-np.pi <= yaw < np.pi for yaw in yaws)
