# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""The simulated vehicle as one object: bicycle + steering actuator + drive lag (m, rad, s).

Shared by the offline closed loop (:func:`corridor_pid.sim.loop.simulate`) and the simulated
vehicle node (``corridor_pid.ros.sim_node``), so both move the same plant the same way.
Between command changes the actuators are advanced exactly and the pose by RK4
(:func:`corridor_pid.sim.vehicle.rk4_step`), in pieces no longer than ``max_step`` and split
where the steering rate limit stops binding.
"""

from __future__ import annotations

from corridor_pid.sim.actuators import SpeedActuator, SteeringActuator
from corridor_pid.sim.scenario import Scenario
from corridor_pid.sim.vehicle import rk4_step

__all__ = ['DEFAULT_MAX_STEP', 'Plant']

DEFAULT_MAX_STEP = 0.005
"""Longest plant integration step (s)."""


class Plant:
    """The scenario's vehicle: rear-axle pose, wheel angle, speed and their actuators.

    Attributes:
        t: plant time (s since the start of the run).
        x, y, yaw: rear-axle pose in the course frame (m, m, rad; yaw not wrapped).
        steering: the steering actuator (dead time, angle and rate limit, lag).
        drive: the drive-speed lag.

    """

    def __init__(self, scenario: Scenario, max_step: float = DEFAULT_MAX_STEP) -> None:
        """Place the vehicle at the scenario's start pose, at rest, wheels at 0 rad."""
        vehicle = scenario.vehicle
        start = scenario.start
        self.steering = SteeringActuator(vehicle.steer_time_constant, scenario.steering.max_rate,
                                         scenario.steering.max_angle, vehicle.steer_delay)
        self.drive = SpeedActuator(vehicle.speed_time_constant)
        self.wheelbase = vehicle.wheelbase
        self.max_step = max_step
        self.t = 0.0
        self.x, self.y, self.yaw = start.x, start.y, start.heading

    def advance(self, t_next: float) -> None:
        """Move the plant to ``t_next`` [s] with the actuator targets held.

        Buffered steering commands that fall due before ``t_next`` are *not* applied: the
        caller stops at :meth:`SteeringActuator.next_change` first (see :meth:`run_to`).
        """
        steering, drive = self.steering, self.drive
        wheelbase, max_step = self.wheelbase, self.max_step
        t, x, y, yaw = self.t, self.x, self.y, self.yaw
        while t < t_next:
            h = t_next - t
            whole = True
            if h > max_step:
                h, whole = max_step, False
            ramp = steering.ramp_time()
            if 1e-9 < ramp < h:
                h, whole = ramp, False
            a_mid, a_end = steering.angles_after(h)
            v_mid, v_end = drive.speeds_after(h)
            x, y, yaw = rk4_step(x, y, yaw, wheelbase, h, (drive.speed, v_mid, v_end),
                                 (steering.angle, a_mid, a_end))
            steering.angle, drive.speed = a_end, v_end
            t = t_next if whole else t + h
        self.t, self.x, self.y, self.yaw = t, x, y, yaw

    def run_to(self, t_next: float) -> None:
        """Move the plant to ``t_next`` [s], applying buffered steering commands when due."""
        steering = self.steering
        while steering.next_change() <= t_next:
            self.advance(steering.next_change())
            steering.apply_due(self.t)
        self.advance(t_next)
        steering.apply_due(self.t)

    def command(self, t: float, steer: float, speed: float) -> None:
        """Send a command at ``t`` [s]: steering [rad] (acts after the dead time), speed [m/s]."""
        self.steering.command(t, steer)
        self.drive.command(speed)
