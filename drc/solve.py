"""Operating point of an LED branch at every corner at once, and choosing its series resistor.

A branch is a drive voltage V, a total series resistance R (pin output resistance plus
resistors, may be 0) and a string of stages in series; each stage is diodes in parallel (the
same voltage across each, currents add); each diode follows the SPICE diode law with its own
RS (Shockley with series resistance; the SPICE2 temperature law, see drc/diode.py):

    V = I*R + sum_k Vstage_k(I),     I_j = IS_j(T) * (exp((Vstage - I_j*RS_j)/(N_j*Vt)) - 1)

Corners are numpy arrays that broadcast together (usually shape (C,)); nothing loops over
corners in Python (each iteration works on the corners still moving). Method: safeguarded
Newton (a Newton step, or bisection when the step leaves the bracket or shrinks too slowly)
on u = ln(I + I_floor), where I_floor is the saturation current of the weakest stage, the
most negative current the string can carry; in that variable the loop equation is smooth
from deep reverse bias to a dead short. Where |I| is small against I_floor, a few Newton
steps in I itself restore its digits. A stage of several diodes is solved the same way for
its voltage; one diode with RS, at a given voltage, is solved in closed form through the
Wright omega function (w + ln w = x).
Accuracy: about 1e-12 relative in the current (KVL residual ~1e-14 V) while the saturation
currents are those of real parts; a diode current in a parallel stage is good to a little
of that diode's IS in absolute terms. Currents are capped near 1e300 A (e.g. a diode with
RS = 0 driven by a stiff source with R = 0): finite, and plainly a short.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Sequence

import numpy as np

from drc.diode import (DiodeParams, ZERO_CELSIUS_K, saturation_current, thermal_voltage,
                       voltage_at_current)
from drc.errors import InputError
from drc import preferred

Stage = Sequence[DiodeParams]

_U_CAP = 690.0           # ln of the largest current + I_floor we allow
CURRENT_CAP_A = math.exp(_U_CAP)   # about 1e300 A: a current this big means a dead short
_TOL_U = 1e-15           # convergence in u = ln(I + I_floor) (plus a few ulps of u)
_TOL_V = 1e-16           # convergence of a stage voltage, volts (and relative)
_MAX_ITER = 200


@dataclass(frozen=True)
class StringSolution:
    """The operating point at every corner.

    current_A: total branch current; stage_V[k]: voltage across stage k;
    diode_current_A[k][j] and forward_V[k][j]: current through, and voltage across (RS
    included), diode j of stage k. All arrays have the broadcast shape of the inputs.
    """

    current_A: np.ndarray
    stage_V: list[np.ndarray]
    diode_current_A: list[list[np.ndarray]]
    forward_V: list[list[np.ndarray]]


class _Diode:
    """One diode's constants at the corners' temperatures (flat arrays)."""

    __slots__ = ("IS", "lnIS", "nvt", "RS", "lnA", "lnB")

    def __init__(self, d: DiodeParams | None, temperature_K: np.ndarray | None):
        if d is None:
            return
        self.IS = saturation_current(d, temperature_K)
        self.lnIS = np.log(self.IS)
        self.nvt = d.N * thermal_voltage(temperature_K)
        self.RS = float(d.RS)
        if self.RS > 0:
            self.lnA = np.log(self.IS * self.RS / self.nvt)   # ln(IS*RS/(N*Vt))
            self.lnB = np.log(self.nvt / self.RS)             # ln(N*Vt/RS)

    def take(self, index: np.ndarray) -> "_Diode":
        """The same diode at a subset of the corners."""
        out = _Diode(None, None)
        out.IS, out.lnIS, out.nvt, out.RS = self.IS[index], self.lnIS[index], self.nvt[index], self.RS
        if self.RS > 0:
            out.lnA, out.lnB = self.lnA[index], self.lnB[index]
        return out

    def log_h(self, v: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """ln(I + IS) at the diode voltage v (RS included), and d ln(I + IS)/dv."""
        if self.RS == 0.0:
            return self.lnIS + v / self.nvt, 1.0 / self.nvt
        # I + IS = (N*Vt/RS) * omega(ln(IS*RS/(N*Vt)) + (v + IS*RS)/(N*Vt))
        y = _log_wright_omega(self.lnA + (v + self.IS * self.RS) / self.nvt)
        lh = self.lnB + y
        with np.errstate(over="ignore"):
            return lh, 1.0 / (self.nvt + self.RS * np.exp(lh))

    def voltage(self, lh: np.ndarray) -> np.ndarray:
        """The diode voltage (RS included) at which ln(I + IS) = lh (explicit)."""
        with np.errstate(over="ignore"):
            return self.nvt * (lh - self.lnIS) + (np.exp(lh) - self.IS) * self.RS

    def current(self, v: np.ndarray) -> np.ndarray:
        """I = IS * (exp(ln h - ln IS) - 1) at the diode voltage v, without cancelling."""
        if self.RS == 0.0:
            return self.IS * np.expm1(v / self.nvt)
        return self.IS * np.expm1(self.log_h(v)[0] - self.lnIS)


def _log_wright_omega(x: np.ndarray) -> np.ndarray:
    """y = ln(w) where w + ln(w) = x (w is the Wright omega function of x).

    Starting values and the fourth-order Fritsch-Shafer-Crowley iteration of Lawrence,
    Corless and Jeffrey (ACM TOMS 38(3), Algorithm 917, 2012); two steps reach double
    precision. Below x = -30, w = e^x (1 - e^x) to double precision, kept in logs.
    Each starting value is worked out only where it is used (element by element the same
    arithmetic as working all three out everywhere and choosing).
    """
    x = np.asarray(x, dtype=float)
    with np.errstate(all="ignore"):
        w = np.empty(x.shape)
        low = x <= -2.0
        high = x > 1.0
        middle = ~(low | high)
        if low.any():
            ex = np.exp(x[low])
            w[low] = ex - ex ** 2 + 1.5 * ex ** 3
        if middle.any():
            mid = x[middle] - 1.0
            w[middle] = (1.0 + mid / 2 + mid ** 2 / 16 - mid ** 3 / 192 - mid ** 4 / 3072
                         + 13 * mid ** 5 / 61440)
        if high.any():
            xs = x[high]
            lx = np.log(xs)
            w[high] = xs - lx + lx / xs + lx * (lx - 2.0) / (2.0 * xs ** 2)
        for _ in range(2):
            r = x - w - np.log(w)
            w1 = 1.0 + w
            q = 2.0 * w1 * (w1 + 2.0 * r / 3.0)
            w = w * (1.0 + r / w1 * (q - r) / (q - 2.0 * r))
        deep = x < -30.0
        if not deep.any():
            return np.asarray(np.log(w))
        return np.where(deep, x - np.exp(np.minimum(x, -30.0)), np.log(np.where(deep, 1.0, w)))


def _safeguarded_newton(func, x0, lo, hi, tol_abs, tol_rel):
    """Root of an increasing function on [lo, hi] per element of flat arrays.

    func(x, index) -> (f, dfdx) evaluates at the elements `index` only (those still moving).
    Newton's step where it stays inside the bracket and shrinks fast enough (at least
    halving against the step before last), else bisection (the rule of "rtsafe", Press et
    al., Numerical Recipes). An element stops once its step or its bracket is below
    tol_abs + tol_rel*|x|.
    """
    x, lo, hi = (np.array(a, dtype=float).copy() for a in (x0, lo, hi))
    index = np.arange(x.size)
    step = step_before = hi - lo
    for _ in range(_MAX_ITER):
        xi, loi, hii = x[index], lo[index], hi[index]
        f, df = func(xi, index)
        hii = np.where(f > 0, xi, hii)
        loi = np.where(f < 0, xi, loi)
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            newton = f / df
            trial = xi - newton
            bad = (~np.isfinite(trial) | (trial < loi) | (trial > hii)
                   | (np.abs(2.0 * newton) > np.abs(step_before)))
        trial = np.where(bad, 0.5 * (loi + hii), trial)
        trial = np.where(f == 0, xi, trial)
        step_before, step = step, trial - xi
        lo[index], hi[index] = loi, hii
        tol = tol_abs + tol_rel * np.abs(xi)
        moving = ~((np.abs(step) <= tol) | (hii - loi <= tol))
        x[index] = np.where(moving, trial, xi)
        index, step, step_before = index[moving], step[moving], step_before[moving]
        if index.size == 0:
            break
    return x


def _logsumexp(parts: list[np.ndarray]) -> np.ndarray:
    out = parts[0]
    for p in parts[1:]:
        out = np.logaddexp(out, p)
    return out


class _StageSolver:
    """A stage of diodes in parallel: its voltage from ls = ln(I_stage + sum IS).

    Equal diodes in a stage (LEDs of one part number side by side) give equal numbers at
    every step, so each distinct one is evaluated once and its values stand for its equals
    (`_each`): the same arithmetic as evaluating every diode, done once per kind. A stage
    of equal diodes only shares its current equally, so its voltage is explicit."""

    def __init__(self, diodes: list[_Diode], params: list[DiodeParams] | None = None):
        self.diodes = diodes
        self.sum_IS = sum(d.IS for d in diodes)
        self.last_V = np.full(self.sum_IS.shape, np.nan)   # warm start for the next solve
        params = params if params is not None else [object() for _ in diodes]
        firsts: dict = {}
        self.which = [firsts.setdefault(p, j) for j, p in enumerate(params)]
        self.distinct = sorted(set(self.which))

    def _each(self, diodes, fn) -> list:
        """fn(diode) for every diode of the stage (given as `diodes`, in stage order), each
        distinct diode evaluated once."""
        done = {j: fn(diodes[j]) for j in self.distinct}
        return [done[j] for j in self.which]

    def voltage(self, ls: np.ndarray, index: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Stage voltage at the corners `index` where ln(I + sum IS) = ls, and dV/d(ls)."""
        if len(self.diodes) == 1:
            d = self.diodes[0].take(index)
            with np.errstate(over="ignore"):
                return d.voltage(ls), d.nvt + d.RS * np.exp(ls)
        if len(self.distinct) == 1:
            # equal diodes share the current equally: ln(I/m + IS) = ls - ln m, explicit
            d = self.diodes[0].take(index)
            lh = ls - math.log(len(self.diodes))
            with np.errstate(over="ignore"):
                return d.voltage(lh), d.nvt + d.RS * np.exp(lh)
        diodes = [d.take(index) if j in self.distinct else None for j, d in enumerate(self.diodes)]
        # Each diode carries at most all of it and one carries at least its m-th share.
        hi = np.minimum.reduce(self._each(diodes, lambda d: d.voltage(ls)))
        lo = np.minimum.reduce(self._each(diodes, lambda d: d.voltage(ls - math.log(len(diodes)))))

        def residual(v, sub):
            logs, slopes = zip(*self._each(diodes, lambda d: d.take(sub).log_h(v)))
            total = _logsumexp(list(logs))
            slope = sum(np.exp(lh - total) * s for lh, s in zip(logs, slopes))
            return total - ls[sub], slope

        last = self.last_V[index]
        start = np.where(np.isfinite(last), np.clip(last, lo, hi), hi)
        v = _safeguarded_newton(residual, start, lo, hi, _TOL_V, _TOL_V)
        self.last_V[index] = v
        logs, slopes = zip(*self._each(diodes, lambda d: d.log_h(v)))
        # d(ls)/dV = sum_j (h_j / s) * d(ln h_j)/dV, with s = sum_j h_j (well scaled)
        return v, 1.0 / sum(np.exp(lh - ls) * s for lh, s in zip(logs, slopes))

    def log_sum(self, v: np.ndarray) -> np.ndarray:
        """ln(I_stage + sum IS) with the whole voltage v across the stage (every corner)."""
        return _logsumexp(self._each(self.diodes, lambda d: d.log_h(v)[0]))

    def voltage_at_current(self, current: np.ndarray, index: np.ndarray):
        """Stage voltage and dV/dI at the corners `index` from the stage current itself
        (precise where the current is small against the saturation currents)."""
        sum_IS = self.sum_IS[index]
        if len(self.diodes) == 1:
            d = self.diodes[0].take(index)
            return (d.nvt * np.log1p(current / d.IS) + current * d.RS,
                    d.nvt / (current + d.IS) + d.RS)
        ls = np.log(sum_IS) + np.log1p(current / sum_IS)
        volts, dv_dls = self.voltage(ls, index)
        return volts, dv_dls / (current + sum_IS)

    def currents(self, v: np.ndarray, stage_current: np.ndarray) -> list[np.ndarray]:
        if len(self.diodes) == 1:
            return [stage_current]
        if len(self.distinct) == 1:          # equal diodes: an equal share each
            share = stage_current / len(self.diodes)
            return [share.copy() for _ in self.diodes]
        return [c.copy() for c in self._each(self.diodes, lambda d: d.current(v))]


def _check_stages(stages) -> list[list[DiodeParams]]:
    try:
        out = [list(stage) for stage in stages]
    except TypeError:
        raise InputError(None, "stages must be a list of stages, each a list of diodes") from None
    if not out or any(not stage for stage in out):
        raise InputError(None, "an LED string needs at least one stage of at least one diode")
    for stage in out:
        for d in stage:
            if not isinstance(d, DiodeParams):
                raise InputError(None, f"a stage holds {d!r}, not a DiodeParams")
            if not (0 < d.IS < math.inf and 0 < d.N < math.inf and 0 <= d.RS < math.inf
                    and math.isfinite(d.EG) and math.isfinite(d.XTI)):
                raise InputError(None, f"diode parameters out of range (IS > 0, N > 0, RS >= 0): {d}")
    return out


def solve_string(drive_V, resistance_ohm, stages: Sequence[Stage], temperature_K) -> StringSolution:
    """Operating point of V -- R -- stage 1 -- stage 2 -- ... -- back to V's other end.

    drive_V, resistance_ohm, temperature_K: arrays (or floats) that broadcast together; the
    results have their broadcast shape.

    >>> led = DiodeParams(IS=1e-19, N=2.0, RS=10.0, EG=2.0)
    >>> sol = solve_string(np.array([3.0, 3.3]), np.array([100.0, 100.0]), [[led]],
    ...                    np.array([300.15, 300.15]))
    >>> bool(np.all(np.diff(sol.current_A) > 0))
    True
    """
    chosen = _check_stages(stages)
    v, r, t = np.broadcast_arrays(*(np.asarray(a, dtype=float)
                                    for a in (drive_V, resistance_ohm, temperature_K)))
    shape = v.shape
    v, r, t = (np.ravel(a).copy() for a in (v, r, t))
    if not np.all(np.isfinite(v)):
        raise InputError(None, "drive voltage must be finite at every corner")
    if not np.all(np.isfinite(r) & (r >= 0)):
        raise InputError(None, "series resistance must be finite and not negative at every corner")
    if not np.all(np.isfinite(t) & (t > 0)):
        raise InputError(None, "temperature must be above 0 K at every corner")

    solvers = [_StageSolver([_Diode(d, t) for d in stage], stage) for stage in chosen]
    floor = np.minimum.reduce([s.sum_IS for s in solvers])          # I >= -floor
    # ln(I + sum IS_k) = ln(e^u + delta_k): exact for the weakest stage, where delta_k = 0
    deltas = [s.sum_IS - floor for s in solvers]
    log_deltas = [np.log(np.where(dl > 0, dl, 1.0)) for dl in deltas]

    def stage_logs(u, index):
        return [np.where(dl[index] > 0, np.logaddexp(u, ldl[index]), u)
                for dl, ldl in zip(deltas, log_deltas)]

    def residual(u, index):
        with np.errstate(over="ignore"):
            eu = np.exp(u)
        logs = stage_logs(u, index)
        volts, slopes = zip(*(s.voltage(ls, index) for s, ls in zip(solvers, logs)))
        f = (eu - floor[index]) * r[index] + sum(volts) - v[index]
        # d ls_k / du = e^u / s_k = exp(u - ls_k)
        return f, eu * r[index] + sum(dv * np.exp(u - ls) for dv, ls in zip(slopes, logs))

    # Bracket. Forward (V > 0): I between 0 and what R and the RS alone allow, and below
    # what any one stage would carry with all of V across it. Reverse (V <= 0): I between
    # 0 and a value deep enough that the weakest stage alone takes more than -V.
    ln_floor = np.log(floor)
    r_min = r + sum(1.0 / sum(1.0 / d.RS for d in s.diodes) if all(d.RS > 0 for d in s.diodes)
                    else 0.0 for s in solvers)
    with np.errstate(divide="ignore", over="ignore"):
        by_resistance = np.where(r_min > 0, np.log(np.maximum(v, 0) / np.where(r_min > 0, r_min, 1.0)
                                                  + floor), np.inf)
    by_stage = np.minimum.reduce([s.log_sum(v) for s in solvers])
    forward = v > 0
    u_hi = np.where(forward, np.minimum(np.minimum(by_resistance, by_stage), _U_CAP), ln_floor)
    deepest = np.minimum.reduce([d.lnIS + np.minimum(v, 0) / d.nvt
                                 for s in solvers for d in s.diodes]) - 1.0
    u_lo = np.where(forward, ln_floor, deepest)
    u_hi = np.maximum(u_hi, u_lo)

    u = _safeguarded_newton(residual, u_hi, u_lo, u_hi, _TOL_U, 4e-16)
    everywhere = np.arange(u.size)
    logs = stage_logs(u, everywhere)
    with np.errstate(over="ignore"):
        current = np.exp(u) - floor

    # Where |I| is well below I_floor, e^u - I_floor has lost digits of I: polish with
    # Newton steps in I itself, the stages' logs then taken as ln(sum IS) + log1p(I/sum IS).
    small = np.flatnonzero(np.abs(current) < 0.5 * floor)
    if small.size:
        def loop(i):
            volts, slopes = zip(*(s.voltage_at_current(i, small) for s in solvers))
            return i * r[small] + sum(volts) - v[small], r[small] + sum(slopes)

        i_small = current[small]
        f, df = loop(i_small)
        for _ in range(3):
            better = np.clip(i_small - f / df, -0.75 * floor[small], 0.75 * floor[small])
            f_better, df_better = loop(better)
            take = np.isfinite(f_better) & (np.abs(f_better) < np.abs(f))
            i_small = np.where(take, better, i_small)
            f, df = np.where(take, f_better, f), np.where(take, df_better, df)
        current[small] = i_small

    stage_V, diode_I, forward_V = [], [], []
    for s, ls in zip(solvers, logs):
        vs, _ = s.voltage(ls, everywhere)
        if small.size:
            vs[small] = s.voltage_at_current(current[small], small)[0]
        stage_V.append(vs.reshape(shape))
        diode_I.append([c.reshape(shape) for c in s.currents(vs, current)])
        forward_V.append([vs.reshape(shape) for _ in s.diodes])
    current = current.reshape(shape)
    return StringSolution(current, stage_V, diode_I, forward_V)


def forward_voltage_at(d: DiodeParams, current_A, temperature_K):
    """Voltage across a diode (RS included) that carries `current_A` (> -IS) at `temperature_K`.

    >>> float(forward_voltage_at(DiodeParams(), 1e-3, 300.15)) > 0.6
    True
    """
    return voltage_at_current(d, current_A, temperature_K)


def led_model_from_forward_voltages(v_at_1mA: float, v_at_20mA: float,
                                    tempco_V_per_K: float = -0.002,
                                    temperature_C: float = 27.0) -> DiodeParams:
    """A SPICE diode model through (1 mA, v_at_1mA) and (20 mA, v_at_20mA) at temperature_C.

    The split between the junction and RS (two points do not fix it): the junction's
    ideal-diode rise from 1 mA to 20 mA is N*Vt*ln(20); we give the junction half of the
    measured rise, but no less than an ideality N = 2 (a common-practice value for LEDs at
    indicator currents) and no more than the whole rise; RS carries the rest. For a white
    LED at 2.6/3.1 V this gives N = 3.2 and RS = 13 ohm; for red at 1.8/2.0 V, N = 2 and
    RS = 2.4 ohm. Then IS puts the curve through the 1 mA point, and EG (XTI = 3) gives the
    requested dV/dT at constant 1 mA: with the SPICE2 law, dVj/dT = (Vj - EG - XTI*Vt)/T,
    whatever N is. TNOM is temperature_C, so the points hold at that temperature.

    >>> d = led_model_from_forward_voltages(2.6, 3.1)
    >>> round(float(forward_voltage_at(d, 20e-3, 300.15)), 6)
    3.1
    """
    i1, i2 = 1e-3, 20e-3
    values = (v_at_1mA, v_at_20mA, tempco_V_per_K, temperature_C)
    if not all(isinstance(x, (int, float)) and math.isfinite(x) for x in values):
        raise InputError(None, f"LED fit needs finite numbers, got {values}")
    if v_at_1mA <= 0 or v_at_20mA <= v_at_1mA:
        raise InputError(None, f"LED forward voltages must rise with current: "
                               f"{v_at_1mA} V at 1 mA, {v_at_20mA} V at 20 mA")
    temperature_K = temperature_C + ZERO_CELSIUS_K
    if temperature_K <= 0:
        raise InputError(None, f"temperature {temperature_C} °C is below absolute zero")
    vt = float(thermal_voltage(temperature_K))
    rise = v_at_20mA - v_at_1mA
    n_all = rise / (vt * math.log(i2 / i1))
    n = min(n_all, max(2.0, 0.5 * n_all))
    rs = is_ = 0.0
    for _ in range(3):   # ln((IS+I2)/(IS+I1)) is ln(20) to 1e-15; refine anyway
        junction_rise = n * vt * math.log((is_ + i2) / (is_ + i1))
        rs = max(rise - junction_rise, 0.0) / (i2 - i1)
        is_ = i1 / math.expm1((v_at_1mA - i1 * rs) / (n * vt))
    vj = v_at_1mA - i1 * rs
    xti = 3.0
    eg = (vj - temperature_K * tempco_V_per_K) * (i1 + is_) / i1 - xti * vt
    if not eg > 0:
        raise InputError(None, f"no diode model has tempco {tempco_V_per_K} V/K at {v_at_1mA} V "
                               f"(it would need EG = {eg:.3g} eV)")
    return DiodeParams(IS=is_, N=n, RS=rs, XTI=xti, EG=eg, TNOM_C=float(temperature_C))


@dataclass(frozen=True)
class SeriesResistorChoice:
    """What `choose_series_resistor` found.

    verdict: "ok" (some value fits); "too-dim" (even no added resistor leaves the least
    current below the visible current); "too-bright" (even the largest value lets the
    greatest current exceed the maximum); "no-value-fits" (the corners spread the current
    too widely, or the window lies between two neighbouring series values).
    acceptable_ohm: the values that fit, ascending; best_ohm: the one that gives the most
    current while staying within the maximum (None if none fits). candidates_ohm, and for
    each candidate low_current_A (least over the low corners) and high_current_A (greatest
    over the high corners); zero_added_low_current_A: the least current with nothing added.
    """

    verdict: str
    message: str
    acceptable_ohm: tuple[float, ...]
    best_ohm: float | None
    candidates_ohm: tuple[float, ...]
    low_current_A: np.ndarray
    high_current_A: np.ndarray
    zero_added_low_current_A: float


def choose_series_resistor(drive_V, fixed_resistance_ohm, stages: Sequence[Stage], temperature_K,
                           low_mask, high_mask, visible_current_A: float, max_current_A: float,
                           series: str = "E24", lowest_ohm: float = 1.0,
                           highest_ohm: float = 1e6, candidate_factor=None) -> SeriesResistorChoice:
    """Series-resistor values (from `series`, lowest_ohm..highest_ohm) that keep the LED lit
    and within its maximum at every corner.

    Corner arrays have shape (C,); low_mask and high_mask are boolean (C,) arrays (None: all
    corners): the least current over the low corners must be at least visible_current_A and
    the greatest over the high corners at most max_current_A. All candidates are solved at
    once, corners x candidates. candidate_factor (C,) scales each candidate at each corner
    (the resistor tolerance).

    >>> led = led_model_from_forward_voltages(1.8, 2.0)
    >>> c = choose_series_resistor(np.array([3.0, 3.3]), np.array([40.0, 40.0]), [[led]],
    ...                            np.array([300.15, 300.15]), None, None, 1e-3, 10e-3)
    >>> c.verdict, c.best_ohm
    ('ok', 100.0)
    """
    v = np.atleast_1d(np.asarray(drive_V, dtype=float))
    r = np.atleast_1d(np.asarray(fixed_resistance_ohm, dtype=float))
    t = np.atleast_1d(np.asarray(temperature_K, dtype=float))
    try:
        v, r, t = np.broadcast_arrays(v, r, t)
    except ValueError:
        raise InputError(None, "corner arrays do not have matching shapes") from None
    if v.ndim != 1:
        raise InputError(None, "corner arrays must be one-dimensional")
    corners = v.shape[0]
    masks = []
    for name, mask in (("low_mask", low_mask), ("high_mask", high_mask)):
        m = np.ones(corners, dtype=bool) if mask is None else np.asarray(mask, dtype=bool)
        if m.shape != (corners,) or not m.any():
            raise InputError(None, f"{name} must select at least one of the {corners} corners")
        masks.append(m)
    low, high = masks
    if not (visible_current_A > 0 and max_current_A > 0):
        raise InputError(None, "visible and maximum currents must be positive")

    candidates, current = series_currents(v, r, stages, t, candidate_factor, series,
                                          lowest_ohm, highest_ohm)
    low_current = np.min(np.where(low[:, None], current, np.inf), axis=0)
    high_current = np.max(np.where(high[:, None], current, -np.inf), axis=0)
    return series_verdict(low_current, high_current, candidates, visible_current_A,
                          max_current_A, series)


def series_currents(drive_V, fixed_resistance_ohm, stages: Sequence[Stage], temperature_K,
                    candidate_factor=None, series: str = "E24", lowest_ohm: float = 1.0,
                    highest_ohm: float = 1e6) -> tuple[np.ndarray, np.ndarray]:
    """(candidates, current): the series values of `series` from lowest_ohm to highest_ohm,
    and the string's current at every corner (rows) with nothing added (column 0) and with
    each candidate added (columns 1..K), each scaled by candidate_factor at its corner (the
    resistor tolerance, as the resistor it replaces carried). The table choose_series_resistor
    judges with `series_verdict`; corner arrays have shape (C,) (drc.solve.solve_string
    solves each element on its own, so a corner's row does not depend on the others)."""
    v = np.atleast_1d(np.asarray(drive_V, dtype=float))
    r = np.atleast_1d(np.asarray(fixed_resistance_ohm, dtype=float))
    t = np.atleast_1d(np.asarray(temperature_K, dtype=float))
    v, r, t = np.broadcast_arrays(v, r, t)
    corners = v.shape[0]
    candidates = preferred.values_between(lowest_ohm, highest_ohm, series)
    added = np.concatenate(([0.0], candidates))                       # column 0: nothing added
    factor = np.ones(corners) if candidate_factor is None else np.broadcast_to(
        np.asarray(candidate_factor, dtype=float), (corners,))
    sol = solve_string(v[:, None], r[:, None] + added[None, :] * factor[:, None], stages, t[:, None])
    return candidates, sol.current_A                                   # (C, 1 + K)


def series_verdict(low_current, high_current, candidates, visible_current_A: float,
                   max_current_A: float, series: str = "E24") -> SeriesResistorChoice:
    """What a table of currents says about the series resistor, in words.

    low_current and high_current have one entry per column of `series_currents`' table
    (column 0: nothing added, then each of `candidates`): the least current over the corners
    that must stay lit, and the greatest over those that must stay within the maximum. A
    candidate fits when its least is at least visible_current_A and its greatest at most
    max_current_A; the best fitting one gives the most current. `series` names the series
    in the message. choose_series_resistor is series_currents, its masks, then this.
    """
    low_current = np.asarray(low_current, dtype=float)
    high_current = np.asarray(high_current, dtype=float)
    fits = (low_current[1:] >= visible_current_A) & (high_current[1:] <= max_current_A)
    acceptable = tuple(float(c) for c, ok in zip(candidates, fits) if ok)
    best = None
    if acceptable:
        best = float(candidates[int(np.argmax(np.where(fits, high_current[1:], -np.inf)))])
        verdict = "ok"
        message = (f"{len(acceptable)} {series.upper()} values fit, "
                   f"{preferred.format_resistance(acceptable[0])} to "
                   f"{preferred.format_resistance(acceptable[-1])}; "
                   f"{preferred.format_resistance(best)} gives the most current")
    elif low_current[0] < visible_current_A:
        verdict = "too-dim"
        message = (f"even with no resistor added the least current is {low_current[0]:.3g} A, "
                   f"below the visible {visible_current_A:.3g} A")
    elif high_current[-1] > max_current_A:
        verdict = "too-bright"
        message = (f"even {preferred.format_resistance(candidates[-1])} lets "
                   f"{high_current[-1]:.3g} A through, above the maximum {max_current_A:.3g} A")
    else:
        verdict = "no-value-fits"
        message = ("no series value keeps the current between the visible and the maximum "
                   "at every corner")
    return SeriesResistorChoice(verdict, message, acceptable, best, tuple(candidates),
                                low_current[1:], high_current[1:], float(low_current[0]))
