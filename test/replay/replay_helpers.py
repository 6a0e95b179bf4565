# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Recorded runs for the replay tests: a closed loop of the core controller and a bicycle.

The "vehicle" is the kinematic bicycle about the rear axle (Rajamani, *Vehicle Dynamics and
Control*, 2nd ed. 2012, ch. 2) with ideal actuators, integrated exactly over each pose
interval with :func:`corridor_pid.core.kinematics.arc_step`. The loop runs the controller as
the node does (one step per pose at its arrival, watchdog ticks in between), and records
what a bag on the vehicle would hold: the poses (header stamp = when measured, receive
time = when they arrived) and the commands sent (received a little after their pose).
"""

from __future__ import annotations

import math
from typing import NamedTuple

from corridor_pid.core.config import Config, config_from_params
from corridor_pid.core.controller import Controller, PoseSample
from corridor_pid.core.kinematics import arc_step
from corridor_pid.core.timing import watchdog_period
from corridor_pid.replay.record import RecordedCommand, RecordedPose

BASE_NS = 1_700_000_000_000_000_000
"""Bag clock at the start of a recorded run (ns): a plausible wall-clock epoch."""

POSE_DELAY_NS = 4_000_000
"""Pose pipeline latency: receive time minus header stamp (ns)."""

COMMAND_DELAY_NS = 1_000_000
"""Time from a pose's arrival to the recording of its command (ns)."""


def params(**changes: object) -> Config:
    """Return a validated config; keyword names spell '.' as '__'."""
    return config_from_params({k.replace('__', '.'): v for k, v in changes.items()})


class RecordedRun(NamedTuple):
    """What the bag of a run holds, plus the controller's own view for checks."""

    poses: list[RecordedPose]
    commands: list[RecordedCommand]
    computed: list[bool]
    """Per pose: whether the node computed (and sent) a command for it."""
    commands_per_pose: int
    """How many of ``commands`` answer a pose (the others are watchdog ramp-down ticks)."""


def recorded_run(config: Config, *, duration: float = 12.0, rate: float = 50.0,
                 y0: float = 0.4, gap: tuple[float, float] | None = None,
                 frame_id: str = 'map') -> RecordedRun:
    """Return a closed-loop run of ``config`` from lateral offset ``y0`` [m].

    Args:
        config: the controller (and the vehicle's wheelbase).
        duration: length of the run (s).
        rate: pose rate (Hz).
        y0: initial lateral offset (m).
        gap: no pose is delivered in [t0, t1) (s from the start): a localization dropout.
        frame_id: frame of the poses.

    """
    controller = Controller(config, enabled=True)
    period = watchdog_period(config)
    wheelbase = config.vehicle.wheelbase
    x, y, yaw = 0.0, y0, 0.0
    steer = speed = 0.0
    poses: list[RecordedPose] = []
    commands: list[RecordedCommand] = []
    computed: list[bool] = []
    count = int(round(duration * rate))
    dt_ns = int(round(1e9 / rate))
    first_arrival = None
    ticks = 1
    for k in range(count + 1):
        stamp_ns = BASE_NS + k * dt_ns
        if k:
            x, y, yaw = arc_step(x, y, yaw, speed, steer, wheelbase, dt_ns * 1e-9)
        t_rel = k * dt_ns * 1e-9
        if gap is not None and gap[0] <= t_rel < gap[1]:
            continue
        arrival_ns = stamp_ns + POSE_DELAY_NS
        t = arrival_ns * 1e-9
        if first_arrival is None:
            first_arrival = t
        while first_arrival + ticks * period < t:
            tick_t = first_arrival + ticks * period
            tick = controller.step(None, tick_t)
            ticks += 1
            if tick.state.value == 'stopped':  # the node sends the ramp down on its timer
                steer, speed = tick.steering, tick.speed
                commands.append(RecordedCommand(round(tick_t * 1e9) + COMMAND_DELAY_NS,
                                                steer, speed))
        pose = RecordedPose(arrival_ns, stamp_ns, x, y, yaw, frame_id,
                            speed, speed * math.tan(steer) / wheelbase)
        # The stamp in seconds as a node computes it from builtin_interfaces/Time.
        stamp = stamp_ns // 1_000_000_000 + (stamp_ns % 1_000_000_000) * 1e-9
        result = controller.step(PoseSample(stamp, x, y, yaw, frame_id), t)
        poses.append(pose)
        computed.append(result.computed)
        if result.computed:
            steer, speed = result.steering, result.speed
            commands.append(RecordedCommand(arrival_ns + COMMAND_DELAY_NS, steer, speed))
    return RecordedRun(poses, commands, computed, sum(computed))
