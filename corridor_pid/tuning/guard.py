# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Live stability guard: may a configuration's gains run at a given speed? (numpy-only).

The node calls :func:`guard_verdict` on every live change of a gain, ``lookahead`` or
``derivative.filter_time`` (parameter ``tuning.guard``: ``reject`` refuses the change with
the verdict's reason, ``warn`` applies it and logs the reason, ``off`` skips the check).

The verdict is taken on the linearised loop (:mod:`corridor_pid.tuning.linear`) with the
configuration's own belief of the vehicle, at the current speed and at the cruise speed
(the speed the vehicle is about to run at; below ``MIN_SPEED`` a speed is skipped). It
fails when the closed loop is unstable or below a floor: ``tuning.min_phase_margin`` [deg],
``tuning.min_gain_margin`` [dB] in both directions (the loop may rise *and* fall by that
much), and a delay margin of ``tuning.min_delay_margin_ratio`` times
``vehicle.steer_delay``. It does not model the steering limits, the sampling of the poses
or the smoothing filter: a pass is necessary for a safe retune, not sufficient.
"""

from __future__ import annotations

import math
from typing import NamedTuple

from corridor_pid.core.config import Config
from corridor_pid.tuning.linear import LoopModel
from corridor_pid.tuning.margins import Margins, model_margins

__all__ = ['GuardVerdict', 'MIN_SPEED', 'guard_verdict', 'margin_shortfalls']

#: Speeds below this [m/s] are not checked: the steering has (almost) no lateral effect.
MIN_SPEED = 0.05


class GuardVerdict(NamedTuple):
    """Outcome of the guard.

    Attributes:
        ok: stable and every margin at or above its floor at every speed checked.
        reason: '' when ok, else one line naming the speed and the failing margins,
            e.g. 'unstable at 1.20 m/s: phase margin -12.3 deg < 45.0 deg'.
        margins: margins at the speed that failed (or the last one checked); None when no
            speed was checked.
        speed: the speed [m/s] the margins belong to (nan when none was checked).

    """

    ok: bool
    reason: str
    margins: Margins | None
    speed: float


def margin_shortfalls(config: Config, margins: Margins) -> list[str]:
    """Return a phrase for every floor of ``config.tuning`` that ``margins`` miss."""
    floors = config.tuning
    out: list[str] = []
    if margins.phase_margin < floors.min_phase_margin:
        out.append(f'phase margin {margins.phase_margin:.1f} deg < '
                   f'{floors.min_phase_margin:.1f} deg')
    if margins.gain_margin_upper_db < floors.min_gain_margin:
        out.append(f'upper gain margin {margins.gain_margin_upper_db:.1f} dB < '
                   f'{floors.min_gain_margin:.1f} dB')
    if margins.gain_margin_lower_db > -floors.min_gain_margin:
        out.append(f'lower gain margin {margins.gain_margin_lower_db:.1f} dB > '
                   f'{-floors.min_gain_margin:.1f} dB')
    need = floors.min_delay_margin_ratio * config.vehicle.steer_delay
    if margins.delay_margin < need:
        out.append(f'delay margin {margins.delay_margin:.3f} s < {need:.3f} s '
                   f'({floors.min_delay_margin_ratio:g} x vehicle.steer_delay)')
    return out


def guard_verdict(config: Config, speed: float) -> GuardVerdict:
    """Return whether the gains of ``config`` may run at ``speed`` [m/s] (and at cruise).

    The gains checked are those in force at each speed (speed scheduling applied).
    """
    speeds = [v for v in dict.fromkeys((abs(speed), config.speed.cruise)) if v >= MIN_SPEED]
    last: Margins | None = None
    last_speed = math.nan
    for v in speeds:
        model = LoopModel.from_config(config, v)
        margins = model_margins(model)
        last, last_speed = margins, v
        if model.kp == 0.0 and model.ki == 0.0 and model.kd == 0.0:
            return GuardVerdict(False, f'unstable at {v:.2f} m/s: no feedback '
                                f'(gains.kp, gains.ki and gains.kd are all 0)', margins, v)
        problems = margin_shortfalls(config, margins)
        if not margins.stable:
            # Gain and delay margins only measure the distance to instability of a stable
            # loop; for an unstable one name its phase margin and its rightmost pole.
            problems = [p for p in problems if p.startswith('phase')]
            problems.append(f'closed-loop pole at {margins.spectral_abscissa:+.3g} 1/s')
            return GuardVerdict(False, f'unstable at {v:.2f} m/s: ' + '; '.join(problems),
                                margins, v)
        if problems:
            return GuardVerdict(False, f'below the margin floor at {v:.2f} m/s: '
                                + '; '.join(problems), margins, v)
    return GuardVerdict(True, '', last, last_speed)
