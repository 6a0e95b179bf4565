# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Events of a demo run, the goals they prove, and the effect of the live retune (s, m).

Two sources: what the script did (enable, retune, refused changes, pose outage; logged as
it happens) and what the run shows afterwards (:func:`observed_events`: the new gain in
force, the watchdog stop, the vehicle at rest, tracking again, the end of the course), read
from the run table and the controller's state changes.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any, NamedTuple

from corridor_pid.demo.script import DemoScript
from corridor_pid.demo.table import RunTable, StateChange
from corridor_pid.sim.metrics import Metrics
import numpy as np

__all__ = [
    'AT_REST_SPEED', 'EVENT_KINDS', 'Event', 'Goal', 'goals_of', 'observed_events',
    'retune_effect', 'rms_between', 'state_changes',
]

AT_REST_SPEED = 0.01
"""Speed [m/s] below which the vehicle counts as at rest."""

EVENT_KINDS: dict[str, str] = {
    'enabled': 'the controller was enabled through its ~/enable service',
    'retune': 'a live parameter change was sent and applied',
    'retune_in_force': 'the first control cycle computed with the new gain',
    'refused': 'an unsafe parameter change was refused, with its reason',
    'blackout': 'the pose stream was cut (simulated localization outage)',
    'watchdog_stop': 'the controller entered stopped (no pose for watchdog.timeout)',
    'at_rest': f'the vehicle came to rest (speed below {AT_REST_SPEED} m/s)',
    'blackout_end': 'the pose stream was restored',
    'recovered': 'the controller was tracking again',
    'course_end': 'the vehicle passed the end of the course (finished)',
}
"""Every event kind of ``summary.json`` and what it means."""


class Event(NamedTuple):
    """One event: simulated time [s], kind (:data:`EVENT_KINDS`), a line of text, details."""

    time: float
    kind: str
    text: str
    detail: dict[str, Any]

    def as_dict(self) -> dict[str, Any]:
        """Return the JSON form: t, kind, text and the details."""
        return {'t': round(self.time, 6), 'kind': self.kind, 'text': self.text, **self.detail}


class Goal(NamedTuple):
    """A goal of the run: met or not, and why."""

    ok: bool
    detail: str


def state_changes(diagnostics: Sequence[tuple[float, str, int]], origin: float
                  ) -> list[StateChange]:
    """Return the controller's state changes by simulated time [s], in time order.

    Args:
        diagnostics: (ROS stamp [s], state, watchdog stops) of every diagnostics message.
        origin: ROS time [s] of simulated time 0 (0 in the fast pace).

    """
    changes: list[StateChange] = []
    for stamp, state, _ in sorted(diagnostics, key=lambda d: d[0]):
        if not changes or changes[-1].state != state:
            changes.append(StateChange(stamp - origin, state))
    return changes


def rms_between(t: np.ndarray, y: np.ndarray, t0: float, t1: float) -> float:
    """Return the RMS of ``y`` over the samples with ``t0 <= t < t1`` (nan if none)."""
    pick = (t >= t0) & (t < t1)
    if not np.any(pick):
        return float('nan')
    return float(np.sqrt(np.mean(np.square(y[pick]))))


def retune_effect(t: np.ndarray, lateral: np.ndarray, without: Any, script: DemoScript
                  ) -> dict[str, Any]:
    """Return the effect of the retune: live run against the run without it (m).

    ``without`` has ``t`` and ``lateral`` of the same run simulated offline without the
    retune (outage included). Compared from the retune to the end of the run: the RMS
    lateral error and the largest excursion to the side opposite the start (overshoot).
    """
    window = (script.retune_at, script.duration + 1e-9)

    def opposite(tt: np.ndarray, yy: np.ndarray) -> float:
        side = 1.0 if yy[0] >= 0.0 else -1.0
        pick = tt >= window[0]
        return float(max(0.0, np.max(-side * yy[pick]))) if np.any(pick) else float('nan')

    return {
        'gain': script.retune.name, 'from': script.retune_from, 'to': script.retune.value,
        'window': [script.retune_at, script.duration],
        'live_rms': rms_between(t, lateral, *window),
        'without_retune_rms': rms_between(without.t, without.lateral, *window),
        'live_overshoot': opposite(t, lateral),
        'without_retune_overshoot': opposite(without.t, without.lateral),
    }


def _first_change(changes: Sequence[StateChange], state: str, after: float
                  ) -> StateChange | None:
    return next((c for c in changes if c.state == state and c.time >= after - 1e-9), None)


def observed_events(table: RunTable, changes: Sequence[StateChange], script: DemoScript
                    ) -> list[Event]:
    """Return the events the run shows (see the module docstring), in time order."""
    c = table.columns
    t = c['t']
    events: list[Event] = []
    name = script.retune.name.split('.')[-1]
    if name in c:
        in_force = np.flatnonzero((t >= script.retune_at) & (c['computed'] > 0)
                                  & (c[name] == script.retune.value))
        if in_force.size:
            i = int(in_force[0])
            events.append(Event(
                float(t[i]), 'retune_in_force',
                f'{script.retune.name} {script.retune.value:g} in force (bumpless offset '
                f"{c['blend'][i]:+.4f} rad, decaying)",
                {'name': script.retune.name, 'value': script.retune.value,
                 'blend': float(c['blend'][i])}))
    stop = _first_change(changes, 'stopped', script.blackout_at)
    if stop is not None:
        events.append(Event(stop.time, 'watchdog_stop',
                            f'watchdog: controller stopped {stop.time - script.blackout_at:.2f}'
                            ' s after the outage began; ramping down',
                            {'after_outage': round(stop.time - script.blackout_at, 6)}))
        rest = np.flatnonzero((t >= stop.time) & (c['speed'] < AT_REST_SPEED))
        if rest.size and t[rest[0]] <= script.blackout_end + 1e-9:
            i = int(rest[0])
            events.append(Event(float(t[i]), 'at_rest',
                                f'vehicle at rest ({c["speed"][i]:.3f} m/s)',
                                {'speed': float(c['speed'][i])}))
    back = _first_change(changes, 'tracking', script.blackout_end)
    if back is not None and stop is not None:
        events.append(Event(back.time, 'recovered',
                            f'tracking again {back.time - script.blackout_end:.2f} s after '
                            'poses returned',
                            {'after_outage_end': round(back.time - script.blackout_end, 6)}))
    end = _first_change(changes, 'finished', 0.0)
    if end is not None:
        events.append(Event(end.time, 'course_end', 'past the end of the course: finished',
                            {}))
    return sorted(events, key=lambda e: e.time)


def goals_of(metrics: Metrics, events: Sequence[Event]) -> dict[str, Goal]:
    """Return the goals of the run by name, each met or not with a reason.

    The goals: no divergence, the retune applied, every unsafe change refused, a watchdog
    stop during the outage, tracking again after it.
    """
    kinds = {e.kind for e in events if e.kind != 'retune' or e.detail.get('successful')}
    refused = [e for e in events if e.kind == 'refused']
    accepted_unsafe = [e for e in refused if not e.detail.get('as_expected')]
    if metrics.diverged is None:
        divergence = Goal(True, 'no corridor width known: not checked')
    else:
        divergence = Goal(not metrics.diverged,
                          f'max |lateral error| {metrics.max_lateral_error:.3f} m')
    return {
        'no_divergence': divergence,
        'retune_applied': Goal(
            {'retune', 'retune_in_force'} <= kinds,
            'new gain acknowledged and in force' if {'retune', 'retune_in_force'} <= kinds
            else 'the retune was not applied'),
        'unsafe_refused': Goal(
            bool(refused) and not accepted_unsafe,
            f'{len(refused) - len(accepted_unsafe)} of {len(refused)} refused with a reason, '
            'values in force unchanged' if refused else 'no unsafe change was tried'),
        'watchdog_stop': Goal('watchdog_stop' in kinds,
                              'stopped during the outage' if 'watchdog_stop' in kinds
                              else 'no stop seen during the outage'),
        'recovered': Goal('recovered' in kinds,
                          'tracking again after the outage' if 'recovered' in kinds
                          else 'did not track again after the outage'),
    }
