# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""The corridor-centring controller: one ``step`` shared by node, simulator, replay and tuner.

Per accepted pose (header stamp ``stamp``, node clock ``t``)::

    y, theta, kappa, s = course.project(pose)            # y positive left, REP 103
    e      = -((y - target_offset) + L * sin(theta))     # L = lookahead [m]
    steer  = trim + atan(wheelbase * kappa(s + L))       # feedforward (optional)
             + P + I + D + blend                          # see corridor_pid.core.pid
    steer  -> clamp to +/-steering.max_angle -> slew at most steering.max_rate
    speed  = min(cruise, max) / (1 + |e| / slowdown_error),
             <= sqrt(max_lateral_accel * wheelbase / |tan(steer)|),
             slewed by max_accel / max_decel, within [0, speed.max]

States: disabled -> waiting -> tracking -> stopped (watchdog) -> tracking; finished past the
end of the course. While not tracking the speed ramps to 0 at ``speed.max_decel``, the
steering returns to trim within its rate limit and the integrator is held (and reset when
tracking resumes).
"""

from __future__ import annotations

import enum
import math
from typing import NamedTuple

from corridor_pid.core.config import Config, live_change_names
from corridor_pid.core.course import Course
from corridor_pid.core.errors import ConfigError
from corridor_pid.core.kinematics import arc_step
from corridor_pid.core.pid import Integrator, RateFilter, scheduled_gains
from corridor_pid.core.smoothing import AlphaBetaPair
from corridor_pid.core.timing import watchdog_period

__all__ = ['Controller', 'PoseSample', 'State', 'StepResult']

_isfinite = math.isfinite


class State(enum.Enum):
    """Controller state (value: the name shown in diagnostics)."""

    DISABLED = 'disabled'
    WAITING = 'waiting'
    TRACKING = 'tracking'
    STOPPED = 'stopped'
    FINISHED = 'finished'


class PoseSample(NamedTuple):
    """A pose in the course frame: stamp [s], x, y [m], yaw [rad], frame, speed, yaw rate.

    ``speed`` [m/s] and ``yaw_rate`` [rad/s] are present for odometry poses only.
    """

    stamp: float
    x: float
    y: float
    yaw: float
    frame_id: str = ''
    speed: float | None = None
    yaw_rate: float | None = None


class StepResult(NamedTuple):
    """The command and everything that went into it (for diagnostics and logs)."""

    steering: float
    """Limited steering angle [rad]."""
    speed: float
    """Limited speed [m/s]."""
    state: State
    computed: bool
    """A new control was computed from a pose in this step."""
    accepted: bool
    """The sample of this step was accepted."""
    error: float
    """Lateral error e [m]."""
    error_rate: float
    """Filtered rate of the differentiated signal [m/s]."""
    p: float
    i: float
    d: float
    feedforward: float
    blend: float
    """Bumpless-retune offset [rad]."""
    unclamped: float
    """trim + feedforward + P + I + D + blend, before any limit [rad]."""
    angle_saturated: bool
    rate_saturated: bool
    lateral: float
    """y [m], positive left of the centreline."""
    heading: float
    """theta [rad], heading error."""
    curvature: float
    progress: float
    kp: float
    ki: float
    kd: float
    rejected: int
    watchdog_stops: int


class Controller:
    """Steering and speed controller; value in, value out, no ROS."""

    def __init__(self, config: Config, enabled: bool = False) -> None:
        """Create the controller in ``waiting`` (enabled) or ``disabled``."""
        self._config = config
        self._plan = _Plan(config)
        self._course = Course(config.course.xy())
        self.state = State.WAITING if enabled else State.DISABLED
        self._integrator = Integrator()
        self._rate = RateFilter()
        self._smooth = AlphaBetaPair()
        self.rejected = 0
        self.watchdog_stops = 0
        self._last_stamp: float | None = None
        self._t_accept = 0.0
        self._recovery = 0
        self._t_out: float | None = None
        self._steer = config.steering.trim
        self._speed = 0.0
        self._blend = 0.0
        self._excess = 0.0
        self._prev_stamp: float | None = None
        self._last: StepResult | None = None

    # -- public API ---------------------------------------------------------------------

    @property
    def config(self) -> Config:
        """The configuration in force."""
        return self._config

    @property
    def course(self) -> Course:
        """The course geometry."""
        return self._course

    def reset(self) -> None:
        """Forget the control history (integrator, filters, blend); keep counters."""
        self._integrator.value = 0.0
        self._rate.reset()
        self._smooth.reset()
        self._blend = 0.0
        self._excess = 0.0
        self._prev_stamp = None
        self._course.reset_hint()

    def enable(self, on: bool, t: float) -> None:
        """Enable (-> waiting) or disable (-> disabled) the controller at node time ``t``."""
        if on and self.state == State.DISABLED:
            self.reset()
            self._recovery = 0
            self.state = State.WAITING
        elif not on:
            self.state = State.DISABLED

    def retune(self, new: Config, t: float = 0.0) -> None:
        """Apply a validated configuration without stepping the unclamped output.

        Raises:
            ConfigError: when a parameter that is not live would change.

        """
        _, fixed = live_change_names(self._config, new)
        if fixed:
            name = sorted(fixed)[0]
            raise ConfigError(f'{name}: cannot change while running (read-only)')
        old = self._config
        if self._rate.primed:
            # Re-express the last differentiated signal under the new lookahead so the D
            # term sees no jump (a target_offset change still kicks with source 'error').
            last = self._last
            assert last is not None  # primed only by a computed step
            self._rate.last = self._measured(new, last.lateral, last.heading, old.target_offset)
        if self._last is not None and self._prev_stamp is not None:
            before = self._unclamped(old)
            after = self._unclamped(new)
            delta = before - after
            ki_new = scheduled_gains(new.gains, self._speed)[1]
            if ki_new <= 0.0 and self._integrator.value != 0.0:
                delta += self._integrator.value
                self._integrator.value = 0.0
            elif ki_new > 0.0:
                bound = new.integral.bound
                target = self._integrator.value + delta
                absorbed = max(-bound, min(bound, target))
                delta = target - absorbed
                self._integrator.value = absorbed
            self._blend += delta
        self._config = new
        self._plan = _Plan(new)

    def step(self, sample: PoseSample | None, t: float) -> StepResult:
        """Return the command at node time ``t`` [s] for ``sample`` (None on a timer tick)."""
        plan = self._plan
        t_out = self._t_out
        h_out = 0.0 if t_out is None or t < t_out else t - t_out
        self._t_out = t
        accepted = False if sample is None else self._accept(sample, plan)
        state = self.state
        if state is _TRACKING and t - self._t_accept > plan.timeout:
            self.state = state = State.STOPPED
            self.watchdog_stops += 1
            self._recovery = 0
            # The stop ramp starts now: the first stop command steps down by at most one
            # watchdog period of deceleration, not by the whole stale interval.
            if h_out > plan.watchdog_period:
                h_out = plan.watchdog_period
        if accepted:
            if state is _TRACKING:
                result = self._control(sample, t, h_out, plan)  # type: ignore[arg-type]
                if result is not None:
                    self._t_accept = t
                    return result
                accepted = self._overflowed(state)
            else:
                self._t_accept = t
                if state is State.WAITING:
                    self.state = _TRACKING
                    self.reset()
                elif state is State.STOPPED:
                    self._recovery += 1
                    if self._recovery >= plan.recovery_count:
                        self.state = _TRACKING
                        self.reset()
                if self.state is _TRACKING:
                    result = self._control(sample, t, h_out, plan)  # type: ignore[arg-type]
                    if result is not None:
                        return result
                    accepted = self._overflowed(state)
        if state is _TRACKING and not plan.fixed_rate:
            # Computing on each pose, a timer tick (or a rejected pose) while tracking sends
            # no command, so the rate and slew limits keep counting from the last command
            # sent: a watchdog tick must not shrink the allowance of the next pose.
            self._t_out = t_out
        return self._idle(h_out, plan, accepted)

    # -- internals ----------------------------------------------------------------------

    def _overflowed(self, state: State) -> bool:
        """Reject a pose that made the law overflow; return False (not accepted).

        The pose was finite but so large (or so close in time) that the output was not:
        it counts as rejected, the history is forgotten, the state stays ``state`` (it
        neither refreshes the watchdog nor counts towards a recovery).
        """
        self.state = state
        self.rejected += 1
        self.reset()
        if state is State.STOPPED:
            self._recovery -= 1
        return False

    def _accept(self, sample: PoseSample, plan: _Plan) -> bool:
        """Return whether ``sample`` is accepted; handle a large backwards stamp jump.

        Finiteness is checked on the sum of the fields: any NaN or infinity (or values so
        large that they overflow) rejects the pose. A finite pose that still drives the law
        to a non-finite output (e.g. a position of 1e308 m, or a huge jump within a
        nanosecond) is rejected too, after the fact, in :meth:`step`.
        """
        stamp = sample.stamp
        total = stamp + sample.x + sample.y + sample.yaw
        if sample.speed is not None:
            total += sample.speed
        if sample.yaw_rate is not None:
            total += sample.yaw_rate
        if not _isfinite(total) or (plan.pose_frame and sample.frame_id != plan.pose_frame):
            self.rejected += 1
            return False
        last = self._last_stamp
        if last is not None and stamp <= last:
            if last - stamp > plan.timeout:
                # Clock reset or bag loop: start over from this stamp.
                self._last_stamp = stamp
                self.reset()
                if self.state is not State.DISABLED:
                    self.state = State.WAITING
                return False
            self.rejected += 1
            return False
        self._last_stamp = stamp
        return True

    def _unclamped(self, cfg: Config) -> float:
        """Return the unclamped output the last state gives under ``cfg`` [rad]."""
        kp, _, kd = scheduled_gains(cfg.gains, self._speed)
        last = self._last
        assert last is not None  # called only after a computed step
        e = -((last.lateral - cfg.target_offset) + cfg.lookahead * math.sin(last.heading))
        ff = self._feedforward(cfg, last.progress)
        return (cfg.steering.trim + ff + kp * e + self._integrator.value
                + kd * self._rate.value + self._blend)

    def _feedforward(self, cfg: Config, s: float) -> float:
        if not cfg.feedforward.enabled or self._course.straight:
            return 0.0
        return math.atan(cfg.vehicle.wheelbase * self._course.curvature_at(s + cfg.lookahead))

    def _measured(self, cfg: Config, y: float, th: float, offset: float) -> float:
        """Return the differentiated signal [m]: -(y + L sin(theta)), or e with 'error'."""
        if cfg.derivative.source == 'error':
            return -((y - offset) + cfg.lookahead * math.sin(th))
        return -(y + cfg.lookahead * math.sin(th))

    def _control(self, sample: PoseSample, t: float, h_out: float, plan: _Plan
                 ) -> StepResult | None:
        """Return the command computed from an accepted pose; None if the law overflowed."""
        stamp = sample.stamp
        prev = self._prev_stamp
        h = 0.0 if prev is None else stamp - prev
        self._prev_stamp = stamp
        x, yy, yaw = sample.x, sample.y, sample.yaw
        if plan.delay_compensation:
            age = min(max(t - stamp, 0.0), plan.max_age)
            if age > 0.0:
                v = self._speed if sample.speed is None else sample.speed
                x, yy, yaw = arc_step(x, yy, yaw, v, self._steer, plan.wheelbase, age)
        course = self._course
        y, th, kappa, s, index = course.project(x, yy, yaw)
        if plan.smoothing:
            y, th = self._smooth.update(y, th, h, plan.alpha, plan.beta)
        if plan.scheduled:
            kp, ki, kd = scheduled_gains(
                self._config.gains, self._speed if sample.speed is None else sample.speed)
        else:
            kp, ki, kd = plan.kp, plan.ki, plan.kd
        lookahead = plan.lookahead
        lead = lookahead * math.sin(th)
        offset = plan.target_offset
        e = -((y - offset) + lead)
        # D term on the measured part of e (or e itself, derivative.source).
        signal = e if plan.derivative_on_error else -(y + lead)
        rate_filter = self._rate
        if plan.rate_from_odometry and sample.speed is not None and sample.yaw_rate is not None:
            rate_filter.last, rate_filter.primed = signal, True
            rate = rate_filter.update_rate(
                _error_rate(sample.speed, sample.yaw_rate, y, th, kappa, lookahead), h,
                plan.filter_time)
        else:
            rate = rate_filter.update(signal, h, plan.filter_time)
        d = kd * rate
        integ = self._integrator.update(ki, e, h, self._excess, plan.integral)
        blend = self._blend
        if h > 0.0 and blend != 0.0:
            blend *= math.exp(-h / plan.blend_time)
            if -1e-12 < blend < 1e-12:
                blend = 0.0
            self._blend = blend
        p = kp * e
        ff = math.atan(plan.wheelbase * course.curvature_ahead(index, s + lookahead)) \
            if plan.feedforward else 0.0
        u = plan.trim + ff + p + integ + d + blend
        if not _isfinite(u):
            return None
        steer, angle_sat, rate_sat = self._limited_steer(u, h_out, plan)
        self._excess = steer - u if (angle_sat or rate_sat) else 0.0
        # Speed policy: cruise, slowed on error and by the lateral-acceleration limit.
        target = plan.cruise
        if plan.slowdown_error > 0.0:
            target /= 1.0 + abs(e) / plan.slowdown_error
        tan_s = abs(math.tan(steer))
        if tan_s > 1e-9:
            limit = math.sqrt(plan.lateral_wheelbase / tan_s)
            if limit < target:
                target = limit
        speed = self._limited_speed(target, h_out, plan)
        if s > course.length:
            self.state = State.FINISHED
        result: StepResult = _new_result(StepResult, (
            steer, speed, self.state, True, True, e, rate, p, integ, d, ff, blend, u,
            angle_sat, rate_sat, y, th, kappa, s, kp, ki, kd, self.rejected,
            self.watchdog_stops))
        self._last = result
        return result

    def _idle(self, h_out: float, plan: _Plan, accepted: bool) -> StepResult:
        """Return the command while not tracking (or on a timer tick while tracking)."""
        last = self._last
        if self.state is _TRACKING and last is not None:
            return last._replace(computed=False, accepted=accepted, rejected=self.rejected,
                                 watchdog_stops=self.watchdog_stops)
        trim = plan.trim
        steer, _, rate_sat = self._limited_steer(trim, h_out, plan)
        speed = self._limited_speed(0.0, h_out, plan)
        kp, ki, kd = scheduled_gains(self._config.gains, self._speed)
        return StepResult(
            steer, speed, self.state, False, accepted,
            0.0 if last is None else last.error, 0.0, 0.0, self._integrator.value, 0.0, 0.0,
            self._blend, trim, False, rate_sat, *_where(last),
            kp, ki, kd, self.rejected, self.watchdog_stops)

    def _limited_steer(self, u: float, h: float, plan: _Plan) -> tuple[float, bool, bool]:
        """Return (steering [rad], angle-limited, rate-limited) for the wanted ``u``."""
        lim = plan.max_angle
        angle_sat = False
        wanted = u
        if wanted > lim:
            wanted, angle_sat = lim, True
        elif wanted < -lim:
            wanted, angle_sat = -lim, True
        step = plan.max_rate * h
        prev = self._steer
        rate_sat = False
        if wanted > prev + step:
            wanted, rate_sat = prev + step, True
        elif wanted < prev - step:
            wanted, rate_sat = prev - step, True
        self._steer = wanted
        return wanted, angle_sat, rate_sat

    def _limited_speed(self, target: float, h: float, plan: _Plan) -> float:
        """Return ``target`` [m/s] slewed by the accel/decel limits, within [0, speed.max]."""
        prev = self._speed
        up, down = plan.max_accel * h, plan.max_decel * h
        if target > prev + up:
            target = prev + up
        elif target < prev - down:
            target = prev - down
        if target > plan.max_speed:
            target = plan.max_speed
        if target < 0.0:
            target = 0.0
        self._speed = target
        return target


class _Plan:
    """Flat snapshot of the config values ``step`` reads on every pose (hot-path cache)."""

    __slots__ = (
        'timeout', 'recovery_count', 'pose_frame', 'delay_compensation', 'max_age',
        'wheelbase', 'smoothing', 'alpha', 'beta', 'scheduled', 'kp', 'ki', 'kd',
        'lookahead', 'target_offset', 'derivative_on_error', 'rate_from_odometry',
        'filter_time', 'integral', 'blend_time', 'feedforward', 'trim', 'cruise',
        'slowdown_error', 'lateral_wheelbase', 'max_angle', 'max_rate', 'max_accel',
        'max_decel', 'max_speed', 'fixed_rate', 'watchdog_period')

    def __init__(self, cfg: Config) -> None:
        """Copy the values out of the nested config."""
        self.timeout = cfg.watchdog.timeout
        self.recovery_count = cfg.watchdog.recovery_count
        self.pose_frame = cfg.pose_frame
        self.delay_compensation = cfg.delay_compensation.enabled
        self.max_age = cfg.delay_compensation.max_age
        self.wheelbase = cfg.vehicle.wheelbase
        self.smoothing = cfg.smoothing.enabled
        self.alpha, self.beta = cfg.smoothing.alpha, cfg.smoothing.beta
        self.scheduled = cfg.gains.reference_speed > 0.0
        self.kp, self.ki, self.kd = cfg.gains.kp, cfg.gains.ki, cfg.gains.kd
        self.lookahead = cfg.lookahead
        self.target_offset = cfg.target_offset
        self.derivative_on_error = cfg.derivative.source == 'error'
        self.rate_from_odometry = cfg.derivative.rate_from == 'odometry'
        self.filter_time = cfg.derivative.filter_time
        self.integral = cfg.integral
        self.blend_time = cfg.retune.blend_time
        self.feedforward = cfg.feedforward.enabled and bool(cfg.course.points)
        self.trim = cfg.steering.trim
        self.cruise = min(cfg.speed.cruise, cfg.speed.max)
        self.slowdown_error = cfg.speed.slowdown_error
        self.lateral_wheelbase = cfg.speed.max_lateral_accel * cfg.vehicle.wheelbase
        self.max_angle, self.max_rate = cfg.steering.max_angle, cfg.steering.max_rate
        self.max_accel, self.max_decel = cfg.speed.max_accel, cfg.speed.max_decel
        self.max_speed = cfg.speed.max
        self.fixed_rate = cfg.control.rate > 0.0
        self.watchdog_period = watchdog_period(cfg)


def _where(last: StepResult | None) -> tuple[float, float, float, float]:
    """Return (lateral, heading, curvature, progress) of the last computed step (or zeros)."""
    if last is None:
        return 0.0, 0.0, 0.0, 0.0
    return last.lateral, last.heading, last.curvature, last.progress


_TRACKING = State.TRACKING
_new_result = tuple.__new__


def _error_rate(v: float, yaw_rate: float, y: float, th: float, kappa: float,
                lookahead: float) -> float:
    """Return d/dt of -(y + L sin(theta)) from speed [m/s] and yaw rate [rad/s] (m/s).

    Frenet kinematics: dy/dt = v sin(theta), dtheta/dt = yaw_rate - v kappa cos(theta) /
    (1 - kappa y).
    """
    denom = 1.0 - kappa * y
    course_rate = v * kappa * math.cos(th) / denom if abs(denom) > 1e-6 else 0.0
    return -(v * math.sin(th) + lookahead * math.cos(th) * (yaw_rate - course_rate))
