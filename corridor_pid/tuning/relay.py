# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Relay feedback experiment: ultimate gain Ku and period Pu [s] from a limit cycle.

A relay of amplitude ``d`` closes the loop, ``u = +d`` while ``e = setpoint - y > 0`` and
``-d`` while ``e < 0``. Most plants then settle into a limit cycle at the frequency where
the plant phase is -180 deg; with output half peak-to-peak ``a`` the describing function
gives ``Ku ~ 4 d / (pi a)`` and ``Pu`` = the cycle's period (Åström & Hägglund,
"Automatic tuning of simple regulators with specifications on phase and amplitude
margins", Automatica 20(5), 1984).

Three plants are offered: any plant given as a step function (``u -> y`` after one time
step), a linear state-space plant with dead time (exact zero-order-hold discretisation),
and the vehicle itself in the closed-loop simulator, where the relay is the core
controller's P term at a high gain clamped by a steering limit of ``d`` (a saturation whose
linear zone is far smaller than the oscillation acts as a relay, same describing function).
"""

from __future__ import annotations

from collections import deque
from collections.abc import Callable
import dataclasses
from dataclasses import dataclass
import math
from typing import TYPE_CHECKING

from corridor_pid.core.errors import TuningError
from corridor_pid.tuning.linear import FloatArray, LoopModel
import numpy as np

if TYPE_CHECKING:
    from corridor_pid.core.config import Config
    from corridor_pid.sim.scenario import Scenario

__all__ = [
    'PlantStep', 'RelayResult', 'limit_cycle', 'linear_vehicle_relay', 'relay_experiment',
    'simulated_vehicle_relay', 'state_space_plant',
]

PlantStep = Callable[[float], float]
"""A plant: apply input ``u`` for one time step, return the output at the step's end."""

#: Largest relative drift of the measured periods for a settled limit cycle.
PERIOD_SPREAD = 0.05
#: kp [rad/m] that turns the steering clamp into a relay in the simulated experiment
#: (the top of gains.kp's range).
RELAY_KP = 50.0


@dataclass(frozen=True)
class RelayResult:
    """Outcome of a relay experiment.

    Attributes:
        ultimate_gain: Ku = 4 d / (pi a) [input units per output unit].
        ultimate_period: Pu [s], mean period of the measured cycles.
        amplitude: a, half the output's peak-to-peak over the measured cycles.
        relay_amplitude: d [input units].
        cycles: number of cycles measured.
        period_spread: (longest - shortest) / mean of the measured periods (jitter).
        source: where the limit cycle ran ('step function', 'linear model', 'simulator').
        t: time [s] of the record.
        y: output of the record.

    """

    ultimate_gain: float
    ultimate_period: float
    amplitude: float
    relay_amplitude: float
    cycles: int
    period_spread: float
    source: str
    t: FloatArray = dataclasses.field(repr=False)
    y: FloatArray = dataclasses.field(repr=False)

    def as_dict(self) -> dict[str, object]:
        """Return the figures (not the record) as a JSON-friendly dict."""
        return {'ultimate_gain': self.ultimate_gain, 'ultimate_period': self.ultimate_period,
                'amplitude': self.amplitude, 'relay_amplitude': self.relay_amplitude,
                'cycles': self.cycles, 'period_spread': self.period_spread,
                'source': self.source}


def limit_cycle(t: FloatArray, y: FloatArray, relay_amplitude: float, setpoint: float = 0.0,
                cycles: int = 4, source: str = 'record') -> RelayResult:
    """Return Ku and Pu from the last ``cycles`` periods of a relay record.

    Periods are taken between upward crossings of ``setpoint`` (linearly interpolated); the
    first crossing is skipped as transient. The amplitude is the mean over those cycles of
    half of each cycle's peak-to-peak. A sampled loop's cycles jitter by a sample or so; the
    cycle counts as settled when the mean periods of the earlier and the later half of the
    measured cycles agree within ``PERIOD_SPREAD``.

    Raises:
        TuningError: fewer than ``cycles + 2`` crossings, or periods that still drift.

    """
    t = np.asarray(t, dtype=float)
    y = np.asarray(y, dtype=float) - setpoint
    up = np.nonzero((y[:-1] < 0.0) & (y[1:] >= 0.0))[0]
    if up.size < cycles + 2:
        raise TuningError(
            f'relay: only {max(up.size - 1, 0)} cycles in {t[-1] - t[0]:.3g} s, need '
            f'{cycles + 1}; lengthen the experiment or raise the relay amplitude')
    frac = -y[up] / (y[up + 1] - y[up])
    crossings = t[up] + frac * (t[up + 1] - t[up])
    last = crossings[-(cycles + 1):]
    periods = np.diff(last)
    pu = float(np.mean(periods))
    half = max(1, cycles // 2)
    drift = float(abs(np.mean(periods[:half]) - np.mean(periods[-half:])) / pu)
    if drift > PERIOD_SPREAD:
        raise TuningError(
            f'relay: no steady limit cycle (period drift {100.0 * drift:.1f} % > '
            f'{100.0 * PERIOD_SPREAD:.0f} %); lengthen the experiment')
    spread = float((np.max(periods) - np.min(periods)) / pu)
    halves = []
    for a, b in zip(last[:-1], last[1:]):
        window = (t >= a) & (t <= b)
        halves.append(0.5 * float(np.max(y[window]) - np.min(y[window])))
    amp = float(np.mean(halves))
    if not amp > 0.0:
        raise TuningError('relay: the output does not oscillate')
    ku = 4.0 * relay_amplitude / (math.pi * amp)
    return RelayResult(ku, pu, amp, relay_amplitude, cycles, spread, source, t, y + setpoint)


def relay_experiment(plant: PlantStep, dt: float, relay_amplitude: float, duration: float,
                     setpoint: float = 0.0, initial_output: float = 0.0, cycles: int = 4,
                     source: str = 'step function') -> RelayResult:
    """Return Ku and Pu of ``plant`` from a relay feedback run of ``duration`` [s].

    Args:
        plant: one call advances the plant by ``dt`` with the input held; returns the output.
        dt: time step [s].
        relay_amplitude: d, in plant input units.
        duration: length of the run [s].
        setpoint: the output level the relay switches about.
        initial_output: the plant's output before the first step.
        cycles: periods to measure at the end of the run.
        source: label for the report.

    Raises:
        TuningError: bad arguments or no settled limit cycle.

    """
    if not (dt > 0.0 and duration > dt and relay_amplitude > 0.0):
        raise TuningError(
            f'relay: needs dt > 0, duration > dt and amplitude > 0, got dt={dt!r}, '
            f'duration={duration!r}, amplitude={relay_amplitude!r}')
    n = int(round(duration / dt))
    t: FloatArray = np.arange(n + 1, dtype=float) * dt
    y: FloatArray = np.empty(n + 1, dtype=float)
    y[0] = initial_output
    u = relay_amplitude if setpoint - initial_output >= 0.0 else -relay_amplitude
    for k in range(n):
        e = setpoint - y[k]
        if e > 0.0:
            u = relay_amplitude
        elif e < 0.0:
            u = -relay_amplitude
        y[k + 1] = plant(u)
    return limit_cycle(t, y, relay_amplitude, setpoint, cycles, source)


def state_space_plant(a: FloatArray, b: FloatArray, c: FloatArray, dt: float,
                      delay: float = 0.0) -> PlantStep:
    """Return a step function of ``dx/dt = A x + B u(t - delay)``, ``y = C x``, from rest.

    Exact zero-order-hold discretisation (matrix exponential); the delay is rounded to whole
    steps. Needs scipy (offline tools).
    """
    from corridor_pid.tuning._extras import scipy_linalg
    expm = scipy_linalg().expm
    n = a.shape[0]
    block = np.zeros((n + 1, n + 1))
    block[:n, :n] = a * dt
    block[:n, n:] = b * dt
    phi = expm(block)
    ad, bd = phi[:n, :n], phi[:n, n:]
    state = np.zeros((n, 1))
    buffer: deque[float] = deque([0.0] * int(round(delay / dt)))

    def step(u: float) -> float:
        nonlocal state
        buffer.append(u)
        state = ad @ state + bd * buffer.popleft()
        return float((c @ state)[0, 0])

    return step


def linear_vehicle_relay(config: Config, speed: float | None = None,
                         relay_amplitude: float = 0.02, cycles: int = 4) -> RelayResult:
    """Return the relay experiment on the linearised vehicle of ``config`` at ``speed``.

    The relay drives the steering command from the error ``e = -(y + L theta)`` about the
    centreline; Ku is in rad/m, i.e. directly a kp.
    """
    model = LoopModel.from_config(config, speed)
    a, b, c = model.plant_state_space()
    period_guess = _period_guess(model)
    dt = min(period_guess / 400.0, 0.001)
    plant = state_space_plant(a, b, c, dt, model.steer_delay)
    initial = -0.01
    # warm-up covering 30 guessed periods
    return relay_experiment(plant, dt, relay_amplitude, 30.0 * period_guess,
                            initial_output=initial, cycles=cycles, source='linear model')


def _period_guess(model: LoopModel) -> float:
    """Return a rough ultimate period [s] of the P-only loop (for the run length)."""
    p_only = dataclasses.replace(model, kp=1.0, ki=0.0, kd=0.0)
    from corridor_pid.tuning.margins import model_margins
    m = model_margins(p_only)
    if math.isfinite(m.upper_phase_crossover):
        return 2.0 * math.pi / m.upper_phase_crossover
    return 1.0


def simulated_vehicle_relay(scenario: Scenario, config: Config, relay_amplitude: float = 0.02,
                            cycles: int = 8, duration: float | None = None) -> RelayResult:
    """Return the relay experiment on the vehicle of ``scenario`` in the closed-loop simulator.

    The scenario's vehicle and sensor timing are kept; the run is on a straight course from
    1 cm off the centreline, without pose noise or dropouts, at the scenario's speed. The
    controller is the core controller with kp = RELAY_KP, no I or D, no feedforward, and
    its steering clamp at ``relay_amplitude``: a relay in all but a linear zone of
    ``relay_amplitude / RELAY_KP`` metres.
    """
    from corridor_pid.sim.loop import simulate
    from corridor_pid.sim.scenario import PoseNoise, StartPose

    if relay_amplitude >= scenario.steering.max_angle:
        raise TuningError(
            f'relay amplitude: {relay_amplitude!r} rad must be below the steering limit '
            f'{scenario.steering.max_angle!r}')
    plant = scenario.vehicle
    model = LoopModel(speed=scenario.speed, wheelbase=plant.wheelbase,
                      steer_time_constant=plant.steer_time_constant,
                      steer_delay=plant.steer_delay + scenario.pose_delay
                      + 0.5 / scenario.pose_rate,
                      kp=1.0, ki=0.0, kd=0.0, lookahead=config.lookahead, filter_time=0.0)
    period = _period_guess(model)
    # the limit cycle of a sampled, rate-limited loop is slower than the linear guess
    span = 40.0 * max(period, 20.0 / scenario.pose_rate)
    run = dataclasses.replace(
        scenario, course_points=(), start=StartPose(0.0, -0.01, 0.0),
        pose_noise=PoseNoise(0.0, 0.0, 0), dropouts=(),
        duration=span if duration is None else duration, corridor_width=None)
    relay_cfg = config.replaced({
        'gains.kp': RELAY_KP, 'gains.ki': 0.0, 'gains.kd': 0.0, 'gains.reference_speed': 0.0,
        'integral.method': 'off', 'integral.bound': 0.0, 'feedforward.enabled': False,
        'smoothing.enabled': False, 'delay_compensation.enabled': False,
        'speed.slowdown_error': 0.0, 'steering.max_angle': relay_amplitude,
        'steering.trim': 0.0, 'target_offset': 0.0,
        'speed.max': max(config.speed.max, scenario.speed)})
    result = simulate(run, relay_cfg)
    trace = result.trace
    length = config.lookahead
    z = np.asarray(trace['lateral'] + length * np.sin(trace['heading_error']), dtype=float)
    moving = trace['speed'] >= 0.95 * scenario.speed
    if not np.any(moving):
        raise TuningError('relay: the simulated vehicle never reached its cruise speed')
    first = int(np.argmax(moving))
    t = np.asarray(trace['t'], dtype=float)
    return limit_cycle(t[first:], z[first:], relay_amplitude, 0.0, cycles,
                       'simulator')
