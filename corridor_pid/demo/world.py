# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""The simulated vehicle's world on one timeline: plant, pose sensor, holds (m, rad, s).

The ROS-free half of the simulated vehicle node (``corridor_pid.ros.sim_node``). Time runs
from 0 to ``duration`` seconds of simulated time. On that timeline:

- the sensor takes sample ``k`` of the true pose at ``k / pose_rate``; it is lost when that
  time falls in one of the scenario's dropout windows or while a *blackout* is switched on
  (from outside, e.g. by the demo's script); otherwise it reaches the controller
  ``pose_delay`` later (a *pose* event, which the node publishes);
- a lost sample still gives a pose event at its arrival time, with ``sample`` None (the node
  then publishes nothing, but the slot exists, as in the offline loop's trace);
- *hold* events stop the timeline at given times so that someone can act at exactly that
  simulated time (the demo retunes the controller there); the caller resumes by asking for
  the next event;
- an *end* event at ``duration``.

:meth:`SimWorld.next_event` advances the plant (:class:`corridor_pid.sim.plant.Plant`) to
the next event and returns it; commands enter the plant with :meth:`SimWorld.steer` and
:meth:`SimWorld.drive` at the plant's current time. A pose event at the same time as a hold
comes after it; a sample taken at the same time as an arrival is taken first. Taking a
sample is an event of its own only on request (``next_event(samples=True)``): a caller
that follows the wall clock (the real-time pace) must wait for it, or the next pose would
go out when its sample is taken instead of ``pose_delay`` later.
"""

from __future__ import annotations

from collections import deque
from collections.abc import Sequence
import enum
import math
from typing import NamedTuple

from corridor_pid.core.controller import PoseSample
from corridor_pid.core.course import Course
from corridor_pid.sim.loop import TRACE_COLUMNS
from corridor_pid.sim.plant import Plant
from corridor_pid.sim.scenario import Scenario
from corridor_pid.sim.sensor import PoseSensor

__all__ = ['SIM_STATE_FIELDS', 'EventKind', 'Phase', 'SimWorld', 'WorldEvent']

_TRUTH = {name: (name, unit, meaning) for name, unit, meaning in TRACE_COLUMNS}

SIM_STATE_FIELDS: tuple[tuple[str, str, str], ...] = (
    ('time', 's', 'simulated time since the start of the run'),
    *(_TRUTH[name] for name in ('x', 'y', 'yaw', 'lateral', 'heading_error', 'progress',
                                'steer', 'speed')),
    ('steer_command', 'rad', 'last steering command received'),
    ('speed_command', 'm/s', 'last speed command received'),
    ('pose_stamp', 's', 'header stamp of the pose sent in this slot (NaN: lost)'),
    ('node_time', 's', "controller's node time of the cycle that answered it (NaN: none)"),
    ('phase', '', '0 running, 1 held, 2 finished'),
)
"""Fields of the simulated vehicle's ``~/state`` message (Float64MultiArray), in order:
name, unit, meaning. The names are also in the message's ``layout.dim[0].label``."""

STATE_NAMES: tuple[str, ...] = tuple(name for name, _, _ in SIM_STATE_FIELDS)


class EventKind(enum.Enum):
    """What happens at an event of the timeline."""

    POSE = 'pose'
    HOLD = 'hold'
    SAMPLE = 'sample'
    END = 'end'


class Phase(enum.IntEnum):
    """The ``phase`` field of a state row."""

    RUNNING = 0
    HELD = 1
    FINISHED = 2


class WorldEvent(NamedTuple):
    """One event: its kind, time [s], and for a pose event the slot and the sample."""

    kind: EventKind
    time: float
    slot: int = -1
    sample: PoseSample | None = None
    """The sample arriving now, in the course frame with its stamp [s] on the sim clock;
    None when it was lost (dropout or blackout). For a sample event: the sample taken
    (None when lost)."""


class SimWorld:
    """The scenario's vehicle and pose sensor, advanced from event to event."""

    def __init__(self, scenario: Scenario, duration: float | None = None,
                 holds: Sequence[float] = (), frame_id: str = '') -> None:
        """Place the vehicle at the start; draw the sensor noise of the whole run.

        Args:
            scenario: the plant, course, sensor and dropouts.
            duration: length of the run [s]; default the scenario's.
            holds: simulated times [s] at which the timeline stops (in [0, duration]).
            frame_id: frame id of the samples.

        """
        self.scenario = scenario
        self.duration = scenario.duration if duration is None else duration
        noise = scenario.pose_noise
        self.sensor = PoseSensor(scenario.pose_rate, self.duration, noise.position,
                                 noise.heading, noise.seed, scenario.pose_delay,
                                 scenario.dropouts, frame_id)
        self.plant = Plant(scenario)
        self.truth = Course(scenario.course_points)
        self.blackout = False
        self.blacked_out = 0
        """Samples lost to a blackout (not counting the scenario's dropouts)."""
        self._holds = deque(sorted(t for t in holds if 0.0 <= t <= self.duration))
        self._next_sample = 0
        self._in_flight: deque[tuple[float, int, PoseSample | None]] = deque()
        self._ended = False
        self.steer_command = 0.0
        self.speed_command = 0.0

    @property
    def time(self) -> float:
        """Simulated time of the plant [s]."""
        return self.plant.t

    def next_time(self) -> float:
        """Return the time [s] of the next event (``inf`` after the end)."""
        if self._ended:
            return math.inf
        sensor = self.sensor
        k = self._next_sample
        candidates = [self.duration]
        if k < len(sensor):
            candidates.append(sensor.times[k])
        if self._in_flight:
            candidates.append(self._in_flight[0][0])
        if self._holds:
            candidates.append(self._holds[0])
        return min(candidates)

    def next_event(self, samples: bool = False) -> WorldEvent:
        """Advance the plant to the next event and return it (END again after the end).

        Args:
            samples: also return the taking of a sample (a SAMPLE event); by default it
                is done on the way to the next pose, hold or end event.

        """
        sensor = self.sensor
        plant = self.plant
        while not self._ended:
            k = self._next_sample
            t_sample = sensor.times[k] if k < len(sensor) else math.inf
            t_arrive = self._in_flight[0][0] if self._in_flight else math.inf
            t_hold = self._holds[0] if self._holds else math.inf
            t_next = min(t_sample, t_arrive, t_hold)
            if t_next > self.duration:
                plant.run_to(self.duration)
                self._ended = True
                break
            plant.run_to(t_next)
            if t_hold == t_next:
                self._holds.popleft()
                return WorldEvent(EventKind.HOLD, t_next)
            if t_sample == t_next:
                sample: PoseSample | None = None
                if sensor.lost[k]:
                    pass
                elif self.blackout:
                    self.blacked_out += 1
                else:
                    sample = sensor.measure(k, plant.x, plant.y, plant.yaw)
                self._in_flight.append((sensor.arrival(k), k, sample))
                self._next_sample = k + 1
                if samples:
                    return WorldEvent(EventKind.SAMPLE, t_next, k, sample)
                continue
            _, slot, arriving = self._in_flight.popleft()
            return WorldEvent(EventKind.POSE, t_next, slot, arriving)
        return WorldEvent(EventKind.END, self.duration)

    def advance_to(self, t: float) -> None:
        """Move the plant on to ``t`` [s] between events (real time), never past the next."""
        self.plant.run_to(min(t, self.next_time()))

    def steer(self, value: float) -> None:
        """Send a steering command [rad] at the plant's current time (acts after dead time)."""
        self.steer_command = value
        self.plant.steering.command(self.plant.t, value)

    def drive(self, value: float) -> None:
        """Send a speed command [m/s] at the plant's current time (acts at once)."""
        self.speed_command = value
        self.plant.drive.command(value)

    def row(self, pose_stamp: float = math.nan, node_time: float = math.nan,
            phase: Phase = Phase.RUNNING) -> tuple[float, ...]:
        """Return the state row of :data:`SIM_STATE_FIELDS` at the plant's current time."""
        plant = self.plant
        proj = self.truth.project(plant.x, plant.y, plant.yaw)
        return (plant.t, plant.x, plant.y, plant.yaw, proj.lateral, proj.heading,
                proj.progress, plant.steering.angle, plant.drive.speed, self.steer_command,
                self.speed_command, pose_stamp, node_time, float(phase))
