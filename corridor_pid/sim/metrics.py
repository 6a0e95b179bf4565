# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Run metrics with the names every scoring command prints (m, s, fractions 0-1).

Every metric is computed from the samples of one run: times ``t`` [s] (the first sample is
the start of the run, the last its end), the lateral offset ``y`` [m] of the vehicle from the
centreline at those times (positive left; in the simulator the *true* offset, not the
measured one), the vehicle speed [m/s] at those times, and per control cycle whether the
angle and rate limits bound the steering command. ``y[0]`` is the initial offset.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import asdict, dataclass

import numpy as np
from numpy.typing import ArrayLike

__all__ = [
    'METRIC_UNITS',
    'SETTLING_BAND_FLOOR',
    'Metrics',
    'diverged',
    'final_lateral_error',
    'max_lateral_error',
    'mean_speed',
    'metric_text',
    'metrics_from',
    'overshoot',
    'rms_lateral_error',
    'saturated_fraction',
    'settling_band',
    'settling_time',
    'watchdog_stops',
]

SETTLING_BAND_FLOOR = 0.05
"""Narrowest settling band half-width (m)."""

CENTRED = 0.001
"""An initial offset below this (m) counts as starting on the centreline."""

METRIC_UNITS: dict[str, str] = {
    'rms_lateral_error': 'm', 'max_lateral_error': 'm', 'final_lateral_error': 'm',
    'overshoot': 'm', 'settling_time': 's', 'steering_saturated_fraction': '',
    'steering_rate_saturated_fraction': '', 'watchdog_stops': '', 'diverged': '',
    'mean_speed': 'm/s',
}
"""Unit of every metric ('' for counts, fractions and booleans)."""


def _abs(y: ArrayLike) -> np.ndarray:
    values: np.ndarray = np.abs(np.asarray(y, dtype=float))
    if values.size == 0:
        raise ValueError('a run needs at least one sample')
    return values


def rms_lateral_error(y: ArrayLike) -> float:
    """Return the root mean square of ``|y|`` over the samples of the run (m)."""
    a = _abs(y)
    return float(np.sqrt(np.mean(a * a)))


def max_lateral_error(y: ArrayLike) -> float:
    """Return the largest ``|y|`` over the samples of the run (m)."""
    return float(np.max(_abs(y)))


def final_lateral_error(y: ArrayLike) -> float:
    """Return ``|y|`` at the last sample of the run (m)."""
    return float(_abs(y)[-1])


def overshoot(y: ArrayLike) -> float:
    """Return the largest excursion (m) to the side opposite the initial offset.

    With ``s = sign(y[0])``: ``max(0, max(-s * y))`` over the whole run. When
    ``|y[0]| < 1 mm`` the vehicle starts centred and the first sample with ``|y| > 5 cm``
    gives the side instead (the run's first real excursion plays the initial offset's
    role); with no such sample the overshoot is 0.
    """
    values = np.asarray(y, dtype=float)
    a = _abs(values)
    if a[0] >= CENTRED:
        side = float(np.sign(values[0]))
    else:
        beyond = np.flatnonzero(a > SETTLING_BAND_FLOOR)
        if beyond.size == 0:
            return 0.0
        side = float(np.sign(values[beyond[0]]))
    return float(max(0.0, np.max(-side * values)))


def settling_band(y0: float) -> float:
    """Return the settling band half-width ``max(0.05 m, 0.1 * |y0|)`` (m)."""
    return max(SETTLING_BAND_FLOOR, 0.1 * abs(y0))


def settling_time(t: ArrayLike, y: ArrayLike) -> float:
    """Return the last time (s, from the start of the run) ``|y|`` is outside the band.

    The band is :func:`settling_band` of ``y[0]``. Returns 0 when ``|y|`` never exceeds it,
    and the run's duration when the last sample is still outside. Otherwise the time is
    that of the last crossing back into the band, interpolated linearly between the last
    sample outside and the next one.
    """
    times = np.asarray(t, dtype=float)
    values = np.asarray(y, dtype=float)
    band = settling_band(float(values[0]))
    outside = np.flatnonzero(_abs(values) > band)
    if outside.size == 0:
        return 0.0
    i = int(outside[-1])
    if i == values.size - 1:
        return float(times[-1] - times[0])
    edge = band if values[i] > 0.0 else -band
    frac = (values[i] - edge) / (values[i] - values[i + 1])
    return float(times[i] + frac * (times[i + 1] - times[i]) - times[0])


def saturated_fraction(saturated: ArrayLike, computed: ArrayLike | None = None) -> float:
    """Return the share (0-1) of control cycles in which a limit bound the command.

    Args:
        saturated: per sample, whether the limit bound the steering command.
        computed: per sample, whether it is a control cycle (a new command was computed);
            all samples when None. No control cycle at all gives 0.

    """
    flags = np.asarray(saturated, dtype=bool)
    if computed is not None:
        flags = flags[np.asarray(computed, dtype=bool)]
    return float(np.mean(flags)) if flags.size else 0.0


def watchdog_stops(states: Sequence[str]) -> int:
    """Return the number of entries into the ``stopped`` state (a count)."""
    count = 0
    previous = ''
    for state in states:
        if state == 'stopped' and previous != 'stopped':
            count += 1
        previous = state
    return count


def diverged(y: ArrayLike, corridor_width: float | None) -> bool | None:
    """Return whether ``|y|`` ever exceeded half the corridor width (None: width unknown)."""
    if corridor_width is None:
        return None
    return bool(np.max(_abs(y)) > 0.5 * corridor_width)


def mean_speed(speed: ArrayLike) -> float:
    """Return the mean vehicle speed over the samples of the run (m/s)."""
    values = np.asarray(speed, dtype=float)
    return float(np.mean(values)) if values.size else 0.0


def metric_text(value: float | int | bool | None, unit: str, missing: str = 'n/a') -> str:
    """Return a metric as a table shows it: '0.123 m', '12.5 %' (unit ''), 'yes', '3'."""
    if value is None:
        return missing
    if isinstance(value, bool):
        return 'yes' if value else 'no'
    if isinstance(value, int):
        return str(value)
    if unit == '':
        return f'{100.0 * value:.1f} %'
    return f'{value:.3f} {unit}'


@dataclass(frozen=True)
class Metrics:
    """The scores of one run; see the function of the same name for each definition."""

    rms_lateral_error: float
    max_lateral_error: float
    final_lateral_error: float
    overshoot: float
    settling_time: float
    steering_saturated_fraction: float
    steering_rate_saturated_fraction: float
    watchdog_stops: int
    diverged: bool | None
    mean_speed: float

    def as_dict(self) -> dict[str, float | int | bool | None]:
        """Return the metrics as a plain dict in the order of the contract."""
        return asdict(self)


def metrics_from(t: ArrayLike, y: ArrayLike, speed: ArrayLike, states: Sequence[str],
                 angle_saturated: ArrayLike, rate_saturated: ArrayLike,
                 computed: ArrayLike | None = None,
                 corridor_width: float | None = None) -> Metrics:
    """Return every metric of a run from its samples (see the module docstring)."""
    return Metrics(
        rms_lateral_error=rms_lateral_error(y),
        max_lateral_error=max_lateral_error(y),
        final_lateral_error=final_lateral_error(y),
        overshoot=overshoot(y),
        settling_time=settling_time(t, y),
        steering_saturated_fraction=saturated_fraction(angle_saturated, computed),
        steering_rate_saturated_fraction=saturated_fraction(rate_saturated, computed),
        watchdog_stops=watchdog_stops(states),
        diverged=diverged(y, corridor_width),
        mean_speed=mean_speed(speed),
    )
