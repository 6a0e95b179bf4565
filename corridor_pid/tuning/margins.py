# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Stability margins of a loop transfer function: gain (both directions), phase, delay.

Definitions (loop L(s), closed loop 1 + L(s) = 0, negative feedback):

- *gain crossover* ``wc``: ``|L(j wc)| = 1``; *phase margin* ``180 deg + arg L(j wc)``
  wrapped into (-180, 180]; the smallest over all crossovers is reported.
- *phase crossover* ``w180``: ``arg L(j w180) = -180 deg (mod 360)``; the loop gain can be
  multiplied by ``k = 1/|L(j w180)|`` before the closed loop changes stability there.
  With integral action the lateral loop has three integrators and is conditionally stable:
  lowering the gain destabilises it too. So two gain margins are reported: the *upper* one
  (the smallest ``k > 1``) and the *lower* one (the largest ``k < 1``), as factors and in dB
  (the lower one is negative in dB).
- *delay margin*: the extra dead time the loop tolerates, the smallest
  ``(phase margin at wc, in [0, 2 pi)) / wc`` over the crossovers (0 when already unstable).
- *stability* from the closed-loop poles, the delay replaced by a Padé approximant.

Crossings are bracketed on a dense logarithmic frequency grid and refined by vectorised
bisection; the phase is continuous by construction (see :class:`RationalLoop.phase`), so
the many phase crossings an exact delay produces are found without unwrapping errors.
numpy-only: the node's live guard uses it.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
import math

from corridor_pid.tuning.linear import (
    ComplexArray,
    DEFAULT_PADE_ORDER,
    FloatArray,
    LoopModel,
    RationalLoop,
)
import numpy as np
import numpy.typing as npt

BoolArray = npt.NDArray[np.bool_]

__all__ = ['Margins', 'loop_margins', 'model_margins']

#: Grid density [points per decade] for bracketing crossings.
POINTS_PER_DECADE = 60
#: Bisection steps per crossing: a bracket of ratio 10**(1/60) shrinks below 1e-7
#: relative, and the final interpolation makes the error of second order in that.
BISECTION_STEPS = 20
#: A closed-loop pole with a real part above this [1/s] counts as not stable.
STABILITY_TOLERANCE = -1e-9


@dataclass(frozen=True)
class Margins:
    """Stability margins of one loop.

    Attributes:
        stable: every closed-loop pole (Padé delay) has a negative real part.
        phase_margin: smallest phase margin over the gain crossovers [deg]; inf if none.
        crossover_frequency: gain crossover of that phase margin [rad/s]; nan if none.
        gain_margin_upper: factor (> 1) by which the loop gain may rise; inf if none.
        gain_margin_lower: factor (< 1) to which the loop gain may fall; 0 if none.
        upper_phase_crossover: frequency of the upper gain margin [rad/s]; nan if none.
        lower_phase_crossover: frequency of the lower gain margin [rad/s]; nan if none.
        delay_margin: extra dead time tolerated [s]; inf if no crossover, 0 if unstable.
        max_sensitivity: peak of |1/(1 + L(jw))| on the grid (dimensionless).
        spectral_abscissa: largest real part of the closed-loop poles [1/s].
        damping: smallest damping ratio of the closed-loop poles (1 for real poles).
        gain_crossovers: every gain crossover frequency found [rad/s].
        phase_crossovers: every phase crossover frequency found [rad/s].
        poles: closed-loop poles [1/s] (Padé delay).

    """

    stable: bool
    phase_margin: float
    crossover_frequency: float
    gain_margin_upper: float
    gain_margin_lower: float
    upper_phase_crossover: float
    lower_phase_crossover: float
    delay_margin: float
    max_sensitivity: float
    spectral_abscissa: float
    damping: float
    gain_crossovers: tuple[float, ...]
    phase_crossovers: tuple[float, ...]
    poles: tuple[complex, ...]

    @property
    def gain_margin_upper_db(self) -> float:
        """Upper gain margin [dB] (positive; inf if none)."""
        return _db(self.gain_margin_upper)

    @property
    def gain_margin_lower_db(self) -> float:
        """Lower gain margin [dB] (negative; -inf if none)."""
        return _db(self.gain_margin_lower)

    def as_dict(self) -> dict[str, object]:
        """Return a JSON-friendly dict (units in the key docs; inf and nan as None)."""
        return {
            'stable': self.stable,
            'phase_margin': _finite(self.phase_margin),
            'crossover_frequency': _finite(self.crossover_frequency),
            'gain_margin_upper': _finite(self.gain_margin_upper_db),
            'gain_margin_lower': _finite(self.gain_margin_lower_db),
            'upper_phase_crossover': _finite(self.upper_phase_crossover),
            'lower_phase_crossover': _finite(self.lower_phase_crossover),
            'delay_margin': _finite(self.delay_margin),
            'max_sensitivity': _finite(self.max_sensitivity),
            'spectral_abscissa': _finite(self.spectral_abscissa),
            'damping': _finite(self.damping),
        }


def _db(factor: float) -> float:
    if factor == 0.0:
        return -math.inf
    return 20.0 * math.log10(factor)


def _finite(value: float) -> float | None:
    return value if math.isfinite(value) else None


def model_margins(model: LoopModel, pade_order: int | None = None) -> Margins:
    """Return the margins of the linearised lateral loop ``model``.

    Args:
        model: the loop at one speed.
        pade_order: None for the exact delay in the frequency response (poles still use a
            Padé approximant of order DEFAULT_PADE_ORDER); an order to use the Padé
            approximant everywhere (as python-control does with ``pade``).

    """
    return loop_margins(model.loop(), pade_order)


def loop_margins(loop: RationalLoop, pade_order: int | None = None) -> Margins:
    """Return the margins of a loop transfer function in factored form.

    Args:
        loop: the loop L(s), its delay exact.
        pade_order: see :func:`model_margins`.

    """
    freq_loop = loop if pade_order is None else loop.with_pade(pade_order)
    poles = loop.closed_loop_poles(DEFAULT_PADE_ORDER if pade_order is None else pade_order)
    abscissa = float(np.max(poles.real)) if poles.size else -math.inf
    stable = bool(poles.size) and abscissa < STABILITY_TOLERANCE
    damping = _min_damping(poles)

    grid = _grid(freq_loop)
    if freq_loop.gain == 0.0:
        return Margins(stable, math.inf, math.nan, math.inf, 0.0, math.nan, math.nan,
                       math.inf, 1.0, abscissa, damping, (), (),
                       tuple(complex(p) for p in poles))

    # --- crossings: gain (log|L| = 0) and phase ((phase + pi) / 2 pi passes an integer) --
    def values(w: FloatArray, target: FloatArray, is_phase: BoolArray) -> FloatArray:
        log_l = freq_loop.log_response(w)
        turns = (log_l.imag + math.pi) / (2.0 * math.pi) - target
        return np.asarray(np.where(is_phase, turns, log_l.real), dtype=float)

    log_grid = freq_loop.log_response(grid)
    lm = log_grid.real
    lo_list: list[float] = []
    hi_list: list[float] = []
    tgt_list: list[float] = []
    kind_list: list[bool] = []
    for i in np.nonzero(np.signbit(lm[:-1]) != np.signbit(lm[1:]))[0]:
        lo_list.append(grid[i])
        hi_list.append(grid[i + 1])
        tgt_list.append(0.0)
        kind_list.append(False)
    level = np.floor((log_grid.imag + math.pi) / (2.0 * math.pi))
    for i in np.nonzero(level[:-1] != level[1:])[0]:
        a, b = level[i], level[i + 1]
        for n in range(int(min(a, b)) + 1, int(max(a, b)) + 1):
            lo_list.append(grid[i])
            hi_list.append(grid[i + 1])
            tgt_list.append(float(n))
            kind_list.append(True)
    is_phase = np.array(kind_list, dtype=bool)
    roots = _bisect(values, np.array(lo_list), np.array(hi_list), np.array(tgt_list), is_phase)
    wc, w180 = roots[~is_phase], np.sort(roots[is_phase])

    # --- phase margin and delay margin ----------------------------------------------------
    if wc.size:
        pm = np.degrees(np.mod(freq_loop.phase(wc) + 2.0 * math.pi, 2.0 * math.pi)) - 180.0
        pm = np.where(pm <= -180.0, pm + 360.0, pm)
        worst = int(np.argmin(pm))
        phase_margin, crossover = float(pm[worst]), float(wc[worst])
        lag = np.mod(np.radians(pm), 2.0 * math.pi)
        delay_margin = float(np.min(lag / wc)) if stable else 0.0
    else:
        phase_margin, crossover, delay_margin = math.inf, math.nan, math.inf

    # --- gain margins in both directions --------------------------------------------------
    upper, lower, w_up, w_low = math.inf, 0.0, math.nan, math.nan
    if w180.size:
        with np.errstate(divide='ignore'):
            k = 1.0 / freq_loop.magnitude(w180)
        above = k > 1.0
        if np.any(above):
            j = int(np.argmin(np.where(above, k, np.inf)))
            upper, w_up = float(k[j]), float(w180[j])
        below = k < 1.0
        if np.any(below):
            j = int(np.argmax(np.where(below, k, -np.inf)))
            lower, w_low = float(k[j]), float(w180[j])

    return Margins(
        stable=stable, phase_margin=phase_margin, crossover_frequency=crossover,
        gain_margin_upper=upper, gain_margin_lower=lower, upper_phase_crossover=w_up,
        lower_phase_crossover=w_low, delay_margin=delay_margin,
        max_sensitivity=_max_sensitivity(freq_loop, grid), spectral_abscissa=abscissa,
        damping=damping, gain_crossovers=tuple(float(w) for w in wc),
        phase_crossovers=tuple(float(w) for w in w180),
        poles=tuple(complex(p) for p in poles))


def _grid(loop: RationalLoop) -> FloatArray:
    """Return a log-spaced frequency grid [rad/s] spanning every corner of ``loop``."""
    corners = [abs(r) for r in loop.zeros + loop.poles if abs(r) > 0.0]
    if loop.delay > 0.0:
        corners.append(1.0 / loop.delay)
    if loop.gain != 0.0:
        # frequency where an integrator-like loop of this gain would cross 1
        corners.append(abs(loop.gain) ** (1.0 / max(1, len(loop.poles) - len(loop.zeros))))
    if not corners:
        corners = [1.0]
    lo = min(corners) * 1e-3
    hi = max(corners) * 1e3
    if loop.delay > 0.0:
        # beyond ~100/T the exact delay turns the phase faster than the grid samples it;
        # the loop gain there is far below any crossing of interest
        hi = min(hi, max(100.0 / loop.delay, min(corners) * 10.0))
    lo, hi = max(lo, 1e-8), min(hi, 1e8)
    n = int(math.ceil(math.log10(hi / lo) * POINTS_PER_DECADE)) + 1
    return np.asarray(np.logspace(math.log10(lo), math.log10(hi), n), dtype=float)


def _bisect(fun: Callable[[FloatArray, FloatArray, BoolArray], FloatArray], lo: FloatArray,
            hi: FloatArray, target: FloatArray, kind: BoolArray) -> FloatArray:
    """Return roots of fun(w, target, kind) = 0 inside each bracket [lo, hi].

    Bisection in log frequency, then one linear interpolation across the final bracket.
    """
    if lo.size == 0:
        return np.array([], dtype=float)
    a, b = np.log(lo), np.log(hi)
    fa = fun(lo, target, kind)
    fb = fun(hi, target, kind)
    for _ in range(BISECTION_STEPS):
        m = 0.5 * (a + b)
        fm = fun(np.exp(m), target, kind)
        same = np.signbit(fm) == np.signbit(fa)
        a = np.where(same, m, a)
        fa = np.where(same, fm, fa)
        b = np.where(same, b, m)
        fb = np.where(same, fb, fm)
    with np.errstate(invalid='ignore', divide='ignore'):
        frac = np.where(fb != fa, fa / (fa - fb), 0.5)
    frac = np.clip(np.nan_to_num(frac, nan=0.5), 0.0, 1.0)
    return np.asarray(np.exp(a + frac * (b - a)), dtype=float)


def _max_sensitivity(loop: RationalLoop, grid: FloatArray) -> float:
    """Return max |1/(1 + L(jw))|, refined on a fine grid around the coarse peak."""
    s = np.abs(1.0 / (1.0 + loop.response(grid)))
    i = int(np.argmax(s))
    lo, hi = grid[max(i - 1, 0)], grid[min(i + 1, grid.size - 1)]
    fine = np.geomspace(lo, hi, 201)
    return float(max(np.max(np.abs(1.0 / (1.0 + loop.response(fine)))), s[i]))


def _min_damping(poles: ComplexArray) -> float:
    """Return the smallest damping ratio -Re(p)/|p| over the poles (1 when none)."""
    nonzero = poles[np.abs(poles) > 0.0]
    if nonzero.size == 0:
        return 1.0 if poles.size == 0 else 0.0
    return float(np.min(-nonzero.real / np.abs(nonzero)))
