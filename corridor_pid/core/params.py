# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""The table of every parameter: name, type, default, range, unit, liveness, description.

This table is the one place where defaults live. The node declares its ROS parameters from
it, the params-file loader and the CLI validate against it (through
:func:`corridor_pid.core.config.config_from_params`), and the README's parameter table is
generated from it.
"""

from __future__ import annotations

import math
from typing import NamedTuple

DOUBLE = 'double'
INTEGER = 'integer'
BOOL = 'bool'
STRING = 'string'
DOUBLE_ARRAY = 'double_array'

ParamValue = float | int | bool | str | tuple[float, ...]


class ParamSpec(NamedTuple):
    """One parameter: its dotted name, ROS type, default, bounds and documentation."""

    name: str
    kind: str
    default: ParamValue
    unit: str
    description: str
    live: bool = False
    low: float | None = None
    high: float | None = None
    choices: tuple[str, ...] = ()
    low_open: bool = False


INF = math.inf

PARAMS: tuple[ParamSpec, ...] = (
    # --- gains (live) ---
    ParamSpec('gains.kp', DOUBLE, 0.8, 'rad/m',
              'Proportional gain on the lateral error e.', True, 0.0, 50.0),
    ParamSpec('gains.ki', DOUBLE, 0.0, 'rad/(m*s)',
              'Integral gain on e (0 = no integral action).', True, 0.0, 50.0),
    ParamSpec('gains.kd', DOUBLE, 0.05, 'rad*s/m',
              'Derivative gain on the rate of the measured part of e.', True, 0.0, 50.0),
    ParamSpec('gains.reference_speed', DOUBLE, 0.0, 'm/s',
              'Speed at which the gains are stated; > 0 scales them with speed so the loop '
              'keeps its margins (0 = no scheduling).', True, 0.0, 30.0),
    ParamSpec('lookahead', DOUBLE, 1.3, 'm',
              'Lookahead distance L in e = -((y - target_offset) + L*sin(theta)).',
              True, 0.0, 20.0),
    ParamSpec('target_offset', DOUBLE, 0.0, 'm',
              'Lateral offset to hold from the centreline, positive left.', True, -5.0, 5.0),
    ParamSpec('integral.method', STRING, 'tracking', '',
              'Windup guard: tracking (back-calculation), conditional (integrate only while '
              'not saturated) or off.', True, choices=('tracking', 'conditional', 'off')),
    ParamSpec('integral.tracking_time', DOUBLE, 0.5, 's',
              'Back-calculation tracking time constant Tt.', True, 0.0, 100.0, low_open=True),
    ParamSpec('integral.bound', DOUBLE, 0.2, 'rad',
              'Largest magnitude of the integral term.', True, 0.0, 3.0),
    ParamSpec('derivative.source', STRING, 'measurement', '',
              'What the D term differentiates: measurement (the measured part of e, no kick '
              'on a target_offset change) or error.', True,
              choices=('measurement', 'error')),
    ParamSpec('derivative.rate_from', STRING, 'difference', '',
              'How the rate is obtained: difference of successive poses, or odometry '
              '(speed and yaw rate of an Odometry pose, when present).', True,
              choices=('difference', 'odometry')),
    ParamSpec('derivative.filter_time', DOUBLE, 0.15, 's',
              'Time constant of the first-order filter on the D term (0 = unfiltered).',
              True, 0.0, 10.0),
    ParamSpec('retune.blend_time', DOUBLE, 1.0, 's',
              'Time constant with which the bumpless-retune offset decays.', True, 0.0, 60.0,
              low_open=True),
    ParamSpec('feedforward.enabled', BOOL, True, '',
              'Add atan(wheelbase*kappa(s + lookahead)) for the course curvature.', True),
    ParamSpec('smoothing.enabled', BOOL, True, '',
              'Smooth the lateral offset and heading error with an alpha-beta filter.', True),
    ParamSpec('smoothing.alpha', DOUBLE, 0.5, '',
              'Alpha-beta filter position gain (0, 1].', True, 0.0, 1.0, low_open=True),
    ParamSpec('smoothing.beta', DOUBLE, 0.1, '',
              'Alpha-beta filter rate gain [0, 2).', True, 0.0, 1.99),
    ParamSpec('delay_compensation.enabled', BOOL, False, '',
              'Predict the pose from its stamp to now with the bicycle model.', True),
    ParamSpec('delay_compensation.max_age', DOUBLE, 0.3, 's',
              'Poses older than this are predicted over this span only.', True, 0.0, 5.0),
    ParamSpec('speed.cruise', DOUBLE, 1.0, 'm/s',
              'Cruise speed (at most speed.max).', True, 0.0, 30.0),
    ParamSpec('speed.slowdown_error', DOUBLE, 0.5, 'm',
              'Lateral error at which the speed is halved (0 = no slowdown on error).',
              True, 0.0, 20.0),
    # --- vehicle facts (not live) ---
    ParamSpec('vehicle.wheelbase', DOUBLE, 0.9, 'm',
              'Distance from rear to front axle.', False, 0.0, 20.0, low_open=True),
    ParamSpec('vehicle.steer_time_constant', DOUBLE, 0.1, 's',
              'First-order time constant of the steering actuator.', False, 0.0, 5.0),
    ParamSpec('vehicle.steer_delay', DOUBLE, 0.05, 's',
              'Dead time of the steering actuator and pose pipeline.', False, 0.0, 2.0),
    # --- safety limits (not live) ---
    ParamSpec('steering.max_angle', DOUBLE, 0.5, 'rad',
              'Largest steering angle magnitude.', False, 0.0, 1.5, low_open=True),
    ParamSpec('steering.max_rate', DOUBLE, 1.0, 'rad/s',
              'Largest steering angle rate.', False, 0.0, 20.0, low_open=True),
    ParamSpec('steering.trim', DOUBLE, 0.0, 'rad',
              'Steering angle that drives straight.', False, -0.5, 0.5),
    ParamSpec('speed.max', DOUBLE, 1.5, 'm/s',
              'Largest speed ever commanded.', False, 0.0, 30.0),
    ParamSpec('speed.max_accel', DOUBLE, 0.5, 'm/s^2',
              'Largest speed increase rate.', False, 0.0, 20.0, low_open=True),
    ParamSpec('speed.max_decel', DOUBLE, 1.0, 'm/s^2',
              'Largest speed decrease rate; every stop ramps down at this rate.',
              False, 0.0, 20.0, low_open=True),
    ParamSpec('speed.max_lateral_accel', DOUBLE, 1.0, 'm/s^2',
              'Lateral-acceleration limit that lowers the speed in curves.',
              False, 0.0, 20.0, low_open=True),
    ParamSpec('watchdog.timeout', DOUBLE, 0.3, 's',
              'Stop when no pose has been accepted for this long (node clock).',
              False, 0.0, 10.0, low_open=True),
    ParamSpec('watchdog.recovery_count', INTEGER, 5, '',
              'Consecutive accepted poses needed to resume after a stop.', False, 1, 1000),
    ParamSpec('course.points', DOUBLE_ARRAY, (), 'm',
              'Centreline polyline, flat [x0, y0, x1, y1, ...]; empty = x-axis of the pose '
              'frame.', False),
    ParamSpec('pose_frame', STRING, '', '',
              "Frame id poses must carry ('' = any).", False),
    ParamSpec('control.rate', DOUBLE, 0.0, 'Hz',
              'Fixed control rate (0 = compute on each pose arrival).', False, 0.0, 1000.0),
    # --- node plumbing (not live) ---
    ParamSpec('pose_type', STRING, 'pose_stamped', '',
              'Message type on the pose topic.', False,
              choices=('pose_stamped', 'pose_with_covariance', 'odometry')),
    ParamSpec('pose_qos', STRING, 'sensor_data', '',
              'QoS of the pose subscription: sensor_data (best effort) or reliable.', False,
              choices=('sensor_data', 'reliable')),
    ParamSpec('cmd_vel_stamped', BOOL, True, '',
              'Publish cmd_vel as TwistStamped (false: plain Twist).', False),
    ParamSpec('output_type', STRING, 'twist', '',
              'Extra output: twist (cmd_vel only) or ackermann (also ackermann_drive).',
              False, choices=('twist', 'ackermann')),
    ParamSpec('start_enabled', BOOL, False, '',
              'Start tracking without a call to ~/enable.', False),
    ParamSpec('diagnostics.rate', DOUBLE, 2.0, 'Hz',
              'Rate of the /diagnostics status and of the watchdog timer.', False, 1.0, 100.0),
    # --- live stability guard ---
    ParamSpec('tuning.guard', STRING, 'reject', '',
              'What a live gain change below the margin floors does: reject, warn or off.',
              True, choices=('reject', 'warn', 'off')),
    ParamSpec('tuning.min_phase_margin', DOUBLE, 45.0, 'deg',
              'Phase-margin floor of the live guard.', False, 0.0, 90.0),
    ParamSpec('tuning.min_gain_margin', DOUBLE, 6.0, 'dB',
              'Gain-margin floor (both directions) of the live guard.', False, 0.0, 40.0),
    ParamSpec('tuning.min_delay_margin_ratio', DOUBLE, 2.0, '',
              'Delay-margin floor as a multiple of vehicle.steer_delay.', False, 0.0, 100.0),
)

SPECS: dict[str, ParamSpec] = {spec.name: spec for spec in PARAMS}
LIVE_NAMES: frozenset[str] = frozenset(spec.name for spec in PARAMS if spec.live)
DEFAULTS: dict[str, ParamValue] = {spec.name: spec.default for spec in PARAMS}


def _range_text(spec: ParamSpec) -> str:
    if spec.choices:
        return ' \\| '.join(spec.choices)
    if spec.low is None and spec.high is None:
        return ''
    low = '' if spec.low is None else f"{spec.low:g}{' <' if spec.low_open else ' ≤'} "
    high = '' if spec.high is None else f' ≤ {spec.high:g}'
    return f'{low}x{high}'


def _default_text(spec: ParamSpec) -> str:
    value = spec.default
    if isinstance(value, bool):
        return 'true' if value else 'false'
    if isinstance(value, tuple):
        return '(absent)' if not value else str(list(value))
    if isinstance(value, str):
        return f"'{value}'"
    return str(value)


def markdown_table() -> str:
    """Return the README's parameter table (name, unit, default, range, live, meaning)."""
    rows = ['| name | unit | default | range | live | meaning |',
            '|---|---|---|---|---|---|']
    for spec in PARAMS:
        rows.append(f'| `{spec.name}` | {spec.unit} | {_default_text(spec)} | '
                    f"{_range_text(spec)} | {'yes' if spec.live else 'no'} | "
                    f'{spec.description} |')
    return '\n'.join(rows) + '\n'
