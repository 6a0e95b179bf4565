# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""The closed loop: scenario plant + pose sensor + the core controller (s, m, rad).

Timeline of a run over ``[0, duration]``:

- the sensor takes sample ``k`` of the true pose at ``k / pose_rate``; unless it falls in a
  dropout it reaches the controller ``pose_delay`` later, where ``Controller.step(sample,
  t_arrival)`` runs (with ``control.rate > 0`` the sample is kept instead, and a control
  timer steps on the latest one every ``1 / control.rate``), as the node does;
- a watchdog timer ticks ``Controller.step(None, t)`` every :func:`watchdog_tick`, as the
  node's does (none in fixed-rate mode when the control timer is the faster);
- every step's steering command enters the steering actuator's dead-time buffer
  (``vehicle.steer_delay`` of the scenario) and its speed command goes to the speed lag;
- between these events the plant is advanced exactly for the actuators and by RK4 for the
  pose, in pieces no longer than ``max_step`` and split where the rate limit stops binding.

Which settings win: the scenario is the plant's truth; the controller runs on its own
configuration (its belief of the vehicle included) except the course and the cruise speed,
which the scenario's mission sets (:func:`controller_config`).

The trace has a first row at t = 0, then one row per control opportunity: per pose slot (at
the slot's arrival time, whether the sample arrived or was lost), or per control-timer tick
in fixed-rate mode; see :data:`TRACE_COLUMNS`.
"""

from __future__ import annotations

from collections import deque
from dataclasses import dataclass

from corridor_pid.core.config import Config, config_from_params
from corridor_pid.core.controller import Controller, PoseSample, StepResult
from corridor_pid.core.course import Course
from corridor_pid.core.errors import ConfigError
from corridor_pid.core.timing import watchdog_period, watchdog_tick
from corridor_pid.sim.metrics import Metrics, metrics_from
from corridor_pid.sim.plant import DEFAULT_MAX_STEP, Plant
from corridor_pid.sim.scenario import Scenario
from corridor_pid.sim.sensor import PoseSensor
import numpy as np

__all__ = [
    'DEFAULT_MAX_STEP', 'TRACE_COLUMNS', 'SimResult', 'controller_config', 'simulate',
    'watchdog_period',
]

TRACE_COLUMNS: tuple[tuple[str, str, str], ...] = (
    ('t', 's', 'time since the start of the run'),
    ('x', 'm', 'true rear-axle x in the course frame'),
    ('y', 'm', 'true rear-axle y in the course frame'),
    ('yaw', 'rad', 'true heading in the course frame'),
    ('lateral', 'm', 'true lateral offset from the centreline, positive left'),
    ('heading_error', 'rad', 'true heading error to the centreline tangent'),
    ('progress', 'm', 'true progress along the centreline'),
    ('steer', 'rad', 'actual wheel angle'),
    ('speed', 'm/s', 'actual speed'),
    ('steer_command', 'rad', 'steering command in force (limited)'),
    ('speed_command', 'm/s', 'speed command in force (limited)'),
    ('measured_lateral', 'm', 'lateral offset the controller saw last'),
    ('error', 'm', 'lateral error e of the controller'),
    ('p', 'rad', 'proportional term'),
    ('i', 'rad', 'integral term'),
    ('d', 'rad', 'derivative term'),
    ('feedforward', 'rad', 'curvature feedforward term'),
    ('computed', '', "1 when the row's pose produced a new command"),
    ('angle_saturated', '', '1 when the angle limit bound that command'),
    ('rate_saturated', '', '1 when the rate limit bound that command'),
    ('state', '', "controller state after the row's step"),
)
"""Trace columns: name, unit, meaning."""


@dataclass(frozen=True)
class SimResult:
    """One closed-loop run: its inputs, trace, every controller step and the metrics."""

    scenario: Scenario
    config: Config
    """The controller's configuration as run (course and cruise from the scenario)."""
    trace: dict[str, np.ndarray]
    """Columns of :data:`TRACE_COLUMNS` by name, one row per pose slot."""
    steps: tuple[tuple[float, StepResult], ...]
    """(node time [s], result) of every ``Controller.step`` call, in order."""
    metrics: Metrics
    samples: tuple[PoseSample | None, ...] = ()
    """The pose each step of ``steps`` took (None for a timer tick), for recording."""


def controller_config(scenario: Scenario, config: Config) -> Config:
    """Return ``config`` with the scenario's course and cruise speed (the mission).

    Raises:
        ConfigError: the result is inconsistent (e.g. the cruise speed exceeds
            ``speed.max`` of ``config``).

    """
    mission = {'course.points': scenario.course_flat(), 'speed.cruise': scenario.speed}
    try:
        return config_from_params(mission, base=config)
    except ConfigError as err:
        raise ConfigError(f"{err} (speed.cruise and course.points come from the scenario's "
                          'speed and course)') from err


def simulate(scenario: Scenario, config: Config, max_step: float = DEFAULT_MAX_STEP
             ) -> SimResult:
    """Return the closed-loop run of ``scenario`` under the controller ``config``.

    A pure function: the same inputs give the same result, bit for bit.

    Raises:
        ConfigError: the mission's cruise speed does not fit ``config``.

    """
    cfg = controller_config(scenario, config)
    plant = Plant(scenario, max_step)
    steering, drive = plant.steering, plant.drive
    noise = scenario.pose_noise
    sensor = PoseSensor(scenario.pose_rate, scenario.duration, noise.position, noise.heading,
                        noise.seed, scenario.pose_delay, scenario.dropouts, cfg.pose_frame)
    controller = Controller(cfg, enabled=True)
    truth = Course(scenario.course_points)
    duration = scenario.duration
    rows: list[tuple[float, ...]] = []
    states: list[str] = []
    steps: list[tuple[float, StepResult]] = []
    samples: list[PoseSample | None] = []
    in_flight: deque[tuple[float, PoseSample | None]] = deque()
    last: StepResult | None = None

    def record(now: float, computed: bool, result: StepResult | None) -> None:
        x, y, yaw = plant.x, plant.y, plant.yaw
        proj = truth.project(x, y, yaw)
        if result is None:
            rows.append((now, x, y, yaw, proj.lateral, proj.heading, proj.progress,
                         steering.angle, drive.speed, steering.target, drive.target,
                         0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0))
            states.append(controller.state.value)
            return
        flag = computed and result.computed
        rows.append((now, x, y, yaw, proj.lateral, proj.heading, proj.progress,
                     steering.angle, drive.speed, result.steering, result.speed,
                     result.lateral, result.error, result.p, result.i, result.d,
                     result.feedforward, float(flag),
                     float(flag and result.angle_saturated),
                     float(flag and result.rate_saturated)))
        states.append(result.state.value)

    def command(now: float, sample: PoseSample | None) -> StepResult:
        result = controller.step(sample, now)
        steps.append((now, result))
        samples.append(sample)
        steering.command(now, result.steering)
        drive.command(result.speed)
        return result

    n_samples = len(sensor)
    inf = float('inf')
    fixed = cfg.control.rate > 0.0
    control_period = 1.0 / cfg.control.rate if fixed else inf
    guard_period = watchdog_tick(cfg)
    if fixed and control_period <= guard_period:
        guard_period = inf
    pending: PoseSample | None = None
    k = 0                      # next sample to take
    c = 1 if fixed else 0      # next control tick (fixed-rate mode; tick 0 is at t = 0)
    w = 1                      # next watchdog tick
    if fixed or sensor.arrival(0) > 0.0:
        record(0.0, False, None)
    while True:
        t_sample = sensor.times[k] if k < n_samples else inf
        t_arrive = in_flight[0][0] if in_flight else inf
        t_control = c * control_period if fixed else inf
        t_guard = w * guard_period
        t_event = min(t_sample, t_arrive, t_control, t_guard, steering.next_change())
        if t_event > duration:
            plant.advance(duration)
            break
        plant.advance(t_event)
        t = plant.t
        steering.apply_due(t)
        if t_sample == t:
            sample = None if sensor.lost[k] else sensor.measure(k, plant.x, plant.y, plant.yaw)
            in_flight.append((sensor.arrival(k), sample))
            k += 1
        while in_flight and in_flight[0][0] == t:
            sample = in_flight.popleft()[1]
            if fixed:
                if sample is not None:
                    pending = sample
            elif sample is not None:
                last = command(t, sample)
                record(t, True, last)
            else:
                record(t, False, last)
        if t_control == t:
            last = command(t, pending)
            pending = None
            record(t, True, last)
            c += 1
        if t_guard == t:
            last = command(t, None)
            w += 1
    columns = list(zip(*rows, strict=True))
    trace = {name: np.asarray(col, dtype=float)
             for (name, _, _), col in zip(TRACE_COLUMNS, columns, strict=False)}
    trace['state'] = np.asarray(states)
    metrics = metrics_from(trace['t'], trace['lateral'], trace['speed'], states,
                           trace['angle_saturated'], trace['rate_saturated'],
                           trace['computed'], scenario.corridor_width)
    return SimResult(scenario, cfg, trace, tuple(steps), metrics, tuple(samples))
