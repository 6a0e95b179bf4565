# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""The demo's script: what happens when during a run (s of simulated time).

Over a run of ``duration`` seconds:

1. ``t = 0``: the controller is enabled through its ``~/enable`` service.
2. :data:`RETUNE_FRACTION` of the way in: one gain is raised live through the parameter
   service (the change ``ros2 param set`` makes). The gain and its new value are chosen so
   that the live stability guard accepts them (:func:`retune_for`).
3. :data:`UNSAFE_FRACTION` of the way in: changes that must be refused, one at a time: a
   read-only safety limit (``steering.max_angle``), a negative gain and, when the guard is
   on, a gain the stability guard rejects. Each must come back with a reason and leave the
   values in force untouched.
4. :data:`BLACKOUT_FRACTION` of the way in: the simulated pose sensor goes silent for
   :func:`blackout_length` (five watchdog timeouts, at least 2.5 s, long enough for the
   ramp to bring a cart at cruise speed to rest): the controller must stop the vehicle,
   then take up tracking again once poses return.
"""

from __future__ import annotations

from dataclasses import dataclass
import math

from corridor_pid.core.config import Config, config_from_params
from corridor_pid.core.errors import ConfigError, DemoError

__all__ = [
    'BLACKOUT_FRACTION', 'MIN_DURATION', 'RETUNE_FRACTION', 'UNSAFE_FRACTION', 'DemoScript',
    'ParamChange', 'blackout_length', 'demo_script', 'retune_for', 'unstable_change_for',
]

RETUNE_FRACTION = 0.1
UNSAFE_FRACTION = 0.2
BLACKOUT_FRACTION = 0.55
MIN_DURATION = 10.0
"""Shortest run [s] the script fits in (retune, refusals, outage and recovery)."""

RETUNE_FACTORS = (1.6, 1.4, 1.2)
"""Factors tried, in order, for the live raise of ``gains.kp``: the first one the guard
accepts is used."""

UNSTABLE_FACTORS = (8.0, 15.0, 30.0)
"""Factors tried for a ``gains.kp`` the stability guard must refuse."""


@dataclass(frozen=True)
class ParamChange:
    """One parameter set the script makes: name, value, and why (shown to the user)."""

    name: str
    value: float
    why: str


@dataclass(frozen=True)
class DemoScript:
    """Times [s] and changes of one demo run."""

    duration: float
    retune_at: float
    retune: ParamChange
    retune_from: float
    unsafe_at: float
    unsafe: tuple[ParamChange, ...]
    blackout_at: float
    blackout_end: float

    def holds(self) -> tuple[float, ...]:
        """Return the simulated times [s] at which the fast pace holds for the script."""
        return (self.retune_at, self.unsafe_at, self.blackout_at, self.blackout_end)


def blackout_length(config: Config) -> float:
    """Return the length [s] of the pose outage: 5 watchdog timeouts, at least 2.5 s."""
    return max(2.5, 5.0 * config.watchdog.timeout)


def _guard_ok(config: Config, changes: dict[str, object], speed: float) -> bool | None:
    """Return whether the live guard accepts ``changes`` (None: guard off or unavailable)."""
    if config.tuning.guard == 'off':
        return None
    try:
        new = config_from_params(changes, base=config)
    except ConfigError:
        return False
    try:
        from corridor_pid.tuning.guard import guard_verdict
    except ImportError:
        return None
    return guard_verdict(new, speed).ok


def retune_for(config: Config) -> ParamChange:
    """Return the live retune of the demo: ``gains.kp`` raised by the first accepted factor.

    Raises:
        DemoError: the guard refuses every factor of :data:`RETUNE_FACTORS`.

    """
    kp = config.gains.kp
    for factor in RETUNE_FACTORS:
        value = round(kp * factor, 3)
        if _guard_ok(config, {'gains.kp': value}, config.speed.cruise) is not False:
            return ParamChange('gains.kp', value,
                               f'raise the proportional gain x{factor:g} for a quicker '
                               'return to the centre')
    raise DemoError(f'gains.kp: the stability guard refuses every demo retune of {kp!r} '
                    f'(x{", x".join(f"{f:g}" for f in RETUNE_FACTORS)})')


def unstable_change_for(config: Config) -> ParamChange | None:
    """Return a ``gains.kp`` the stability guard refuses (None when the guard is off)."""
    kp = max(config.gains.kp, 0.1)
    for factor in UNSTABLE_FACTORS:
        value = round(kp * factor, 3)
        if _guard_ok(config, {'gains.kp': value}, config.speed.cruise) is False:
            return ParamChange('gains.kp', value,
                               f'x{factor:g} the proportional gain: too little stability margin')
    return None


def demo_script(config: Config, duration: float) -> DemoScript:
    """Return the script of a run of ``duration`` seconds under ``config``.

    Raises:
        DemoError: the run is shorter than :data:`MIN_DURATION`, or no retune passes.

    """
    if not duration >= MIN_DURATION or not math.isfinite(duration):
        raise DemoError(f'--duration: the demo needs at least {MIN_DURATION:g} s of '
                        f'simulated time, got {duration!r}')
    retune = retune_for(config)
    limit = config.steering.max_angle
    unsafe = [
        ParamChange('steering.max_angle', round(limit * 1.5, 3),
                    'widen the steering limit while driving (a safety limit: read-only)'),
        ParamChange('gains.kd', -abs(config.gains.kd) or -0.1,
                    'a negative derivative gain'),
    ]
    unstable = unstable_change_for(config)
    if unstable is not None:
        unsafe.append(unstable)
    blackout_at = round(BLACKOUT_FRACTION * duration, 2)
    return DemoScript(
        duration=duration,
        retune_at=round(RETUNE_FRACTION * duration, 2),
        retune=retune,
        retune_from=config.gains.kp,
        unsafe_at=round(UNSAFE_FRACTION * duration, 2),
        unsafe=tuple(unsafe),
        blackout_at=blackout_at,
        blackout_end=round(blackout_at + blackout_length(config), 2),
    )
