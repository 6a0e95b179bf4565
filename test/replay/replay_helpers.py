# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Recorded runs for the replay tests: the simulator's closed loop, as a bag would hold it.

A run is :func:`corridor_pid.sim.loop.simulate` on an invented delivery-cart scenario (a
straight 2.4 m hospital corridor; kinematic bicycle with steering lag, rate limit and drive
lag; pose sensor with noise, a pipeline delay and an optional dropout), turned by
:func:`corridor_pid.replay.record.sim_recording` into the poses (header stamp = when
measured, receive time = when they reached the controller) and the commands the node sent.
"""

from __future__ import annotations

from typing import NamedTuple

from corridor_pid.core.config import Config, config_from_params
from corridor_pid.replay.record import RecordedCommand, RecordedPose, sim_recording
from corridor_pid.sim.loop import simulate
from corridor_pid.sim.scenario import scenario_from_mapping

START_NS = 15_000_000_000
"""Bag clock at the simulator's t = 0 (ns): a multiple of the watchdog period (75 ms with
the default 0.3 s timeout), so the simulator's timer ticks fall where a node's would."""


def params(**changes: object) -> Config:
    """Return a validated config; keyword names spell '.' as '__'."""
    return config_from_params({k.replace('__', '.'): v for k, v in changes.items()})


class RecordedRun(NamedTuple):
    """What the bag of a run holds, plus the controller's own view for checks."""

    poses: list[RecordedPose]
    commands: list[RecordedCommand]
    computed: list[bool]
    """Per pose: whether the controller computed (and the node sent) a command for it."""
    config: Config
    """The controller's configuration as run (course and cruise from the scenario)."""


def recorded_run(config: Config, *, duration: float = 12.0, rate: float = 50.0,
                 y0: float = 0.4, gap: tuple[float, float] | None = None,
                 noise: float = 0.005, seed: int = 7) -> RecordedRun:
    """Return a simulated run of ``config`` from ``y0`` [m] left of the corridor's centre.

    Args:
        config: the controller (its vehicle beliefs included); the scenario's cruise speed
            is its ``speed.cruise``.
        duration: length of the run (s).
        rate: pose rate (Hz).
        y0: initial lateral offset (m).
        gap: the pose sensor is silent in [t0, t1) (s): a localization dropout.
        noise: pose position noise (m; heading noise a tenth of it in rad).
        seed: noise seed.

    """
    scenario = scenario_from_mapping({
        'vehicle': {'wheelbase': config.vehicle.wheelbase, 'steer_time_constant': 0.08,
                    'steer_delay': 0.04, 'speed_time_constant': 0.2},
        'steering': {'max_angle': config.steering.max_angle,
                     'max_rate': config.steering.max_rate},
        'corridor_width': 2.4, 'start': {'y': y0}, 'speed': config.speed.cruise,
        'duration': duration, 'pose_rate': rate, 'pose_delay': 0.004,
        'pose_noise': {'position': noise, 'heading': noise / 10.0, 'seed': seed},
        'dropouts': [] if gap is None else [list(gap)],
    }, 'replay-test cart')
    result = simulate(scenario, config)
    poses, commands = sim_recording(result, START_NS)
    computed = [step.computed for (_, step), sample in zip(result.steps, result.samples)
                if sample is not None]
    return RecordedRun(poses, commands, computed, result.config)
