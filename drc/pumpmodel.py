"""Periodic steady state of a diode charge pump driven by port pins, at every corner at once.

A small transient model for circuits made of port pins (square waves through an output
resistance), DC rails, resistors, capacitors and SPICE diodes (the LED load is one of the
diodes). Every numeric parameter may be a (C,) array over the corners; the corners are
simulated together as one batch.

Method
------
Variable-step BDF2 (Gear's second-order formula), restarted with one backward-Euler step after
every edge, on a fixed, graded time grid (short steps after each edge, longer ones as the
phase settles; where a phase is long against the time constant an edge excites, the phase
opens with a ramp of steps growing from a fiftieth of it, so the transient is stepped
through rather than crossed). Charges over time (the LED's average) are the trapezoidal
rule on the step ends. For each step the linear part of the circuit (resistors, the capacitors'
companion conductances, the sources' Norton equivalents) is inverted once, ahead of time, and
reduced to the diode ports: the junction voltages then obey `vj = voc - Z @ i(vj)`, a system
of as many unknowns as there are diodes, solved by Newton's method with SPICE's junction
limiting (pnjlim, SPICE3) so the exponential cannot overflow. A diode's series resistance RS
is a resistor to an internal node, as in SPICE. The state carried from step to step is the
capacitor voltages.

The periodic steady state is found by shooting: the period map P(x) (capacitor voltages at
the start of a period -> at its end) is solved for P(x) = x by Newton's method; the map's
Jacobian (the monodromy matrix) is propagated exactly alongside each step. The search stops
when one period repeats to within `tolerance_V` on every capacitor, or after `max_periods`
periods (reported in `settled`).

Before that, the model runs `surge_periods` periods from rest (every capacitor empty) for the
start-up surge, and, where the steady state lights the LED, goes on from rest until the LED's
one-period average current reaches the visible current (bounded by `max_startup_periods`).
The shooting starts where the start-up leaves off, or from `start_x` (say, the steady
state of the same pump before a change). With `steady_only`, the model skips the start-up
and its figures are NaN.

Simplifications: edges are instantaneous; reverse breakdown (BV) and junction capacitance
are not modelled; a source with zero output resistance is given 1 mΩ; every node has
1 nS to ground and every junction SPICE's 1 pS in parallel, so no node floats.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from drc.diode import DiodeParams, saturation_current, thermal_voltage

GROUND = "0"
GMIN_JUNCTION_S = 1e-12      # SPICE's default GMIN, across every junction
GMIN_NODE_S = 1e-9           # from every node to ground, so that no node floats
MIN_SOURCE_RESISTANCE_OHM = 1e-3
NEWTON_RESIDUAL_V = 1e-8      # |vj + Z i(vj) - voc| at which a step's Newton stops
MAX_BDF2_STEP_RATIO = 2.0
EDGE_STEP_SHARE = 1e-3       # the first step after an edge, as a share of the segment
EDGE_TAU_STEPS = 50.0        # where the edge ramp runs: its first step is tau / this
EDGE_RAMP_RATIO = 1.2        # and each next step this much longer (see _edge_ramp)
EDGE_RAMP_FROM = 0.5         # the ramp runs where the graded first step exceeds this share of
                             # edge_tau (at 1.0, a pin kicking an LED through 1 uF came out
                             # 6 to 8 % high against ngspice; at 0.5, within 1.2 %)
NEWTON_STEP_V = 1e-10         # or when a Newton update is this small (round-off)
MAX_NEWTON_ITERATIONS = 60
ROUND_OFF_ULPS = 8.0          # a residual within this many roundings of its terms is zero
PREDICTOR_STEP_V = 0.02       # shooting updates below this use the linear predictor


@dataclass(frozen=True)
class PinDrive:
    """A port pin: `high_V` while high and 0 V while low, through `output_resistance_ohm`.

    Timing is shared by all corners (floats): plain pins are high for the first `duty` share
    of each period after `delay_s`; an `inverted` pin is high for the rest of the period.
    `high_V` and `output_resistance_ohm` may be (C,) arrays. `rest_low`: from rest the pin is
    low until its first rising edge, so a high phase that wraps round the period's end is
    left out of the first period of the start-up (a PULSE source holds its first level,
    here its low one, until its delay).
    """

    name: str
    node: str
    high_V: object
    output_resistance_ohm: object
    frequency_Hz: float
    duty: float = 0.5
    inverted: bool = False
    delay_s: float = 0.0
    rest_low: bool = False


@dataclass(frozen=True)
class RailDrive:
    """A DC rail: `node` held at `voltage_V` through `output_resistance_ohm` (0: 1 mΩ)."""

    name: str
    node: str
    voltage_V: object
    output_resistance_ohm: object = 0.0


@dataclass(frozen=True)
class DiodeBranch:
    """A SPICE diode from `anode` to `cathode` (an LED is one too)."""

    name: str
    anode: str
    cathode: str
    params: DiodeParams


@dataclass
class PumpNetwork:
    """The circuit: node names ("0" is ground), drives and elements.

    `resistors` and `capacitors` are (node_a, node_b, value) triples; values may be (C,) arrays.
    """

    nodes: list[str]
    pins: list[PinDrive] = field(default_factory=list)
    rails: list[RailDrive] = field(default_factory=list)
    resistors: list[tuple] = field(default_factory=list)
    capacitors: list[tuple] = field(default_factory=list)
    diodes: list[DiodeBranch] = field(default_factory=list)


@dataclass
class PumpResult:
    """What `simulate_periodic` finds; every array's first axis is the corner.

    Pin currents are signed as current leaving the pin into the circuit (sourcing > 0).
    `pin_high_peak_A`: the greatest current a pin sources while high (its sourcing peak);
    `pin_low_peak_A`: the greatest current it sinks while low (positive = into the pin).
    `diode_reverse_max_V`: the greatest cathode-above-anode voltage across each diode's
    terminals over the steady period (≤ 0 if it never sees reverse bias).
    `startup_surge_A`: the greatest |pin current| in the first `surge_periods` periods from
    rest. `time_to_visible_s`: from the first edge until the LED's average current over the
    last period (zero before the start) first reaches the visible current; inf where the steady
    state stays below it or it is not reached within `max_startup_periods`.
    `cycles_to_settle`: periods from rest until the state is within `tolerance_V` of the steady
    state, estimated from the monodromy matrix (linearised decay, rho**k * |x*| < tolerance).
    `waveform_*`: one steady period sampled on the model's grid, t = 0 .. period.
    """

    period_s: float
    peak_V: np.ndarray
    average_V: np.ndarray
    ripple_V: np.ndarray
    load_average_A: np.ndarray
    load_peak_A: np.ndarray
    pin_high_peak_A: dict[str, np.ndarray]
    pin_low_peak_A: dict[str, np.ndarray]
    diode_reverse_max_V: dict[str, np.ndarray]
    startup_surge_A: dict[str, np.ndarray]
    time_to_visible_s: np.ndarray
    cycles_to_settle: np.ndarray
    settled: np.ndarray
    periods_simulated: int
    waveform_time_s: np.ndarray
    waveform_V: dict[str, np.ndarray]
    load_current_A: np.ndarray
    pin_current_A: dict[str, np.ndarray]
    startup_time_s: np.ndarray
    startup_V: dict[str, np.ndarray]
    startup_pin_current_A: dict[str, np.ndarray]
    # the capacitor voltages (C, ncap) at the start of the steady period, in the order of
    # the network's capacitors: a re-run of the same pump with a change starts from them
    # (drc.pumps.expand_result leaves them on the reduced corners, as the waveforms)
    steady_x: np.ndarray | None = None
    # every diode's average and peak current over the steady period, and its current on the
    # grid as load_current_A (a pump may feed more than one LED; the load is the first)
    diode_average_A: dict[str, np.ndarray] = field(default_factory=dict)
    diode_peak_A: dict[str, np.ndarray] = field(default_factory=dict)
    diode_current_A: dict[str, np.ndarray] = field(default_factory=dict)


def dickson_estimate(vin, vphi, vd, stages, iout, f, c):
    """Dickson's ladder output with no stray capacitance (IEEE JSSC 11(3), 1976).

    Vout = Vin - Vd + N*(Vphi - Vd) - N*Iout/(f*C); arrays broadcast.
    """
    n = np.asarray(stages, dtype=float)
    return (np.asarray(vin, dtype=float) - vd + n * (np.asarray(vphi, dtype=float) - vd)
            - n * np.asarray(iout, dtype=float) / (np.asarray(f, dtype=float) * c))


# ---------------------------------------------------------------------------------------
# compilation of the network into per-step matrices


def _corner_count(values) -> int:
    count = 1
    for v in values:
        a = np.asarray(v, dtype=float)
        if a.ndim > 1:
            raise ValueError("corner parameters must be scalars or 1-D arrays")
        if a.ndim == 1 and a.size != 1:
            if count not in (1, a.size):
                raise ValueError(f"corner arrays disagree in length: {count} and {a.size}")
            count = a.size
    return count


def _grid(edges: np.ndarray, steps_per_segment: int, grading: float, edge_tau: float = np.inf):
    """Step ends (fractions of a period) and each step's segment.

    Each segment opens with a very short step (EDGE_STEP_SHARE of it) that catches the
    current just after the edge, then `steps_per_segment` steps graded by `grading`.

    `edge_tau` (a fraction of the period) is the shortest time constant an edge can
    excite (see _Compiled). Where the graded grid's first step after the edge step is
    longer than edge_tau, it would cross the edge's transient in one step: its current
    peak (the surge) and the charge it moves (the output's peak, the LED's average) come
    out short, by a quarter and a tenth on a pump toggling at 5 Hz (measured against
    ngspice); longer than half of it, the trapezoidal charge of a decaying LED current
    comes out high. There the segment is stepped by _edge_ramp instead: from edge_tau /
    EDGE_TAU_STEPS up, each step EDGE_RAMP_RATIO times the last, to the graded grid's mean
    step, then even steps (the grid's own would jump in size where the ramp ends).
    """
    bounds = np.append(edges, 1.0)
    ends, segment = [], []
    u = np.arange(1, steps_per_segment + 1) / steps_per_segment
    shape = np.expm1(grading * u) / np.expm1(grading) if grading > 0 else u
    shape = np.concatenate([[EDGE_STEP_SHARE], EDGE_STEP_SHARE + (1 - EDGE_STEP_SHARE) * shape])
    for s in range(len(edges)):
        length = bounds[s + 1] - bounds[s]
        points = length * shape
        if points[1] > edge_tau * EDGE_RAMP_FROM:
            points = _edge_ramp(min(points[0], edge_tau / EDGE_TAU_STEPS),
                                length / steps_per_segment, length)
        ends.append(bounds[s] + points)
        segment.append(np.full(len(points), s))
    return np.concatenate(ends), np.concatenate(segment)


def _edge_ramp(first: float, longest: float, length: float) -> np.ndarray:
    """Step ends over a segment of `length` from 0: a step of `first`, each next one
    EDGE_RAMP_RATIO times the last until they reach `longest`, then even steps no longer
    than that. Every step is at most EDGE_RAMP_RATIO times the one before (BDF2 all along:
    a jump in step size would restart it with a first-order step)."""
    out, end, step = [], 0.0, first
    while step < longest and end + step < length:
        end += step
        out.append(end)
        step *= EDGE_RAMP_RATIO
    rest = length - end
    count = max(int(np.ceil(rest / longest - 1e-9)), 1)
    out.extend(end + rest * np.arange(1, count + 1) / count)
    return np.array(out)


class _Compiled:
    """The network as batched per-step matrices (corner axis first)."""

    def __init__(self, network: PumpNetwork, temperature_K, steps_per_phase: int,
                 grading: float):
        pins, rails = network.pins, network.rails
        if not pins:
            raise ValueError("a pump needs at least one toggling pin")
        freqs = {float(p.frequency_Hz) for p in pins}
        if len(freqs) != 1:
            raise ValueError("all pins of one pump must share one frequency")
        self.period_s = 1.0 / freqs.pop()

        names = [n for n in network.nodes if n != GROUND]
        index = {n: i for i, n in enumerate(names)}
        for d in network.diodes:
            if d.params.RS > 0:
                index[d.name + "#junction"] = len(index)
        self.node_names = names
        self.index = index

        def at(node):
            if node == GROUND:
                return -1
            if node not in index:
                raise ValueError(f"node {node!r} is not in the network's node list")
            return index[node]

        values = [temperature_K]
        values += [p.high_V for p in pins] + [p.output_resistance_ohm for p in pins]
        values += [r.voltage_V for r in rails] + [r.output_resistance_ohm for r in rails]
        values += [r[2] for r in network.resistors] + [c[2] for c in network.capacitors]
        C = _corner_count(values)
        self.corners = C
        n = len(index)
        self.n = n

        def arr(v):
            return np.broadcast_to(np.asarray(v, dtype=float), (C,)).copy()

        G = np.zeros((C, n, n))
        diag = np.arange(n)
        G[:, diag, diag] = GMIN_NODE_S

        def stamp(matrix, a, b, value):
            if a >= 0:
                matrix[:, a, a] += value
            if b >= 0:
                matrix[:, b, b] += value
            if a >= 0 and b >= 0:
                matrix[:, a, b] -= value
                matrix[:, b, a] -= value

        for a, b, r in network.resistors:
            stamp(G, at(a), at(b), 1.0 / arr(r))
        # sources: Norton equivalents
        self.pin_node = np.array([at(p.node) for p in pins])
        self.pin_G = np.stack([1.0 / np.maximum(arr(p.output_resistance_ohm),
                                                MIN_SOURCE_RESISTANCE_OHM) for p in pins], 1)
        self.pin_level = np.stack([arr(p.high_V) for p in pins], 1)
        if (self.pin_node < 0).any():
            raise ValueError("a pin cannot drive ground")
        for k in range(len(pins)):
            G[:, self.pin_node[k], self.pin_node[k]] += self.pin_G[:, k]
        rail_current = np.zeros((C, n))
        for r in rails:
            g = 1.0 / np.maximum(arr(r.output_resistance_ohm), MIN_SOURCE_RESISTANCE_OHM)
            i = at(r.node)
            G[:, i, i] += g
            rail_current[:, i] += g * arr(r.voltage_V)

        # diodes: the junction port (internal node or anode -> cathode), RS as a resistor
        T = arr(temperature_K)
        nd = len(network.diodes)
        self.diode_names = [d.name for d in network.diodes]
        A = np.zeros((nd, n))
        self.diode_anode = np.array([at(d.anode) for d in network.diodes], dtype=int)
        self.diode_cathode = np.array([at(d.cathode) for d in network.diodes], dtype=int)
        Is = np.zeros((C, nd))
        nvt = np.zeros((C, nd))
        for k, d in enumerate(network.diodes):
            anode, cathode = at(d.anode), at(d.cathode)
            if d.params.RS > 0:
                junction = index[d.name + "#junction"]
                stamp(G, anode, junction, np.full(C, 1.0 / d.params.RS))
            else:
                junction = anode
            if junction >= 0:
                A[k, junction] += 1.0
            if cathode >= 0:
                A[k, cathode] -= 1.0
            Is[:, k] = saturation_current(d.params, T)
            nvt[:, k] = d.params.N * thermal_voltage(T)
        self.A, self.Is, self.nvt = A, Is, nvt
        self.vcrit = nvt * np.log(nvt / (np.sqrt(2.0) * Is))
        self.inv_nvt, self.Is_over_nvt = 1.0 / nvt, Is / nvt

        # capacitors
        ncap = len(network.capacitors)
        if ncap == 0:
            raise ValueError("a pump needs at least one capacitor")
        D = np.zeros((ncap, n))
        cap = np.zeros((C, ncap))
        for k, (a, b, c) in enumerate(network.capacitors):
            ia, ib = at(a), at(b)
            if ia >= 0:
                D[k, ia] += 1.0
            if ib >= 0:
                D[k, ib] -= 1.0
            cap[:, k] = arr(c)
        self.D, self.cap, self.ncap, self.nd = D, cap, ncap, nd
        GC = np.einsum("ki,ck,kj->cij", D, cap, D)

        # timing: edges of every pin within one period, as fractions
        edges, spans = {0.0}, []
        for p in pins:
            d = (p.delay_s / self.period_s) % 1.0
            start = (d + p.duty) % 1.0 if p.inverted else d
            width = 1.0 - p.duty if p.inverted else p.duty
            edges.update({round(start, 12) % 1.0, round(start + width, 12) % 1.0})
            spans.append((start, width))
        edge_list = np.array(sorted(edges))
        mids = (edge_list + np.append(edge_list[1:], 1.0)) / 2
        high = np.array([[((m - s) % 1.0) < w for (s, w) in spans] for m in mids])  # (S, P)
        self.segment_high = high
        # the first period from rest: a pin that rests low has no wrapped high phase yet
        first = high.copy()
        wraps = [p.rest_low and s + w > 1.0 + 1e-12 for p, (s, w) in zip(pins, spans)]
        for k, (s, w) in enumerate(spans):
            if wraps[k]:
                first[mids < s, k] = False
        self.first_high = first
        self.first_edge_s = min(s % 1.0 if wrapped else min(s % 1.0, (s + w) % 1.0)
                                for wrapped, (s, w) in zip(wraps, spans)) * self.period_s
        # the shortest time constant an edge excites through a pin: no path from a pin into
        # the capacitors has less resistance than the pin's own, nor less capacitance than
        # the smallest capacitor over the number of capacitors (all of them in series)
        positive = cap[cap > 0]
        edge_tau = (float((1.0 / self.pin_G).min() * positive.min()) / ncap / self.period_s
                    if positive.size else np.inf)
        ends, segment = _grid(edge_list, steps_per_phase, grading, edge_tau)
        self.step_end_s = ends * self.period_s
        h = np.diff(np.concatenate([[0.0], self.step_end_s]))
        self.step_h = h
        self.step_segment = segment
        # the charge a current carries over each step: the trapezoidal rule on its values at
        # the step's ends, but for the step just after an edge, taken at its end alone (a
        # current may jump at an edge; that step is very short). Step k carries
        # charge_end[k] * i[k] + charge_start[k] * i[k - 1]; over a period, i[k] weighs
        # quadrature[k]. A step-end value alone (the rectangle rule) undercounts a current
        # that decays along a long phase: by a tenth on a pump toggling at 5 Hz (measured).
        opens = np.r_[True, segment[1:] != segment[:-1]]
        self.charge_start = np.where(opens, 0.0, h / 2)
        self.charge_end = h - self.charge_start
        self.quadrature = self.charge_end + np.r_[self.charge_start[1:], 0.0]
        K = len(h)

        # source currents per segment: pins through their Norton conductances, plus rails
        def injected(states):
            current = np.repeat(rail_current[None], len(edge_list), 0)
            for s in range(len(edge_list)):
                for k in range(len(pins)):
                    if states[s, k]:
                        current[s, :, self.pin_node[k]] += self.pin_G[:, k] * self.pin_level[:, k]
            return current
        seg_current = injected(high)
        self.seg_current = seg_current
        # a ladder of n capacitors lifts at most n + 1 times every source's level added up
        self.voltage_bound = (ncap + 1) * (self.pin_level.sum(axis=1) + sum(
            (np.abs(arr(r.voltage_V)) for r in rails), np.zeros(C)))

        # integration: BDF2 with variable steps, restarted with one backward-Euler step after
        # every edge (so the state at an edge is the capacitor voltages alone). The capacitor
        # current is cap * (alpha0 x[n+1] + alpha1 x[n] + alpha2 x[n-1]).
        ratio = np.ones(K)
        ratio[1:] = h[1:] / h[:-1]
        # backward Euler after an edge, and wherever the step grows too fast for BDF2 to be
        # zero-stable (ratio above 1 + sqrt 2; kept well below)
        first = np.r_[True, segment[1:] != segment[:-1]] | (ratio > MAX_BDF2_STEP_RATIO)
        alpha0 = np.where(first, 1.0, (1 + 2 * ratio) / (1 + ratio)) / h
        alpha1 = np.where(first, -1.0, -(1 + ratio)) / h
        alpha2 = np.where(first, 0.0, ratio ** 2 / (1 + ratio)) / h
        self.bdf2 = ~first
        self.step_ratio = ratio
        # per distinct alpha0: invert the linear part and reduce it to the diode ports
        a_unique, a_index = np.unique(np.round(alpha0 * self.period_s, 9), return_inverse=True)
        Ginv = np.linalg.inv(G[None] + GC[None] * (a_unique / self.period_s)[:, None, None, None])
        Ginv = Ginv[a_index]                                               # (K, C, n, n)
        DtC = np.einsum("ki,ck->cik", D, cap)                              # (C, n, ncap)
        Q1 = Ginv @ DtC[None] * -alpha1[:, None, None, None]               # (K, C, n, ncap)
        Q2 = Ginv @ DtC[None] * -alpha2[:, None, None, None]
        self.Q1, self.Q2 = Q1, Q2
        self.R = Ginv @ A.T                                                # (K, C, n, nd)
        self.P = np.einsum("kcij,kcj->kci", Ginv, seg_current[segment])    # (K, C, n)
        self.Z = A @ self.R                                                # (K, C, nd, nd)
        self.Z_abs = np.abs(self.Z)
        self.eye_nd = np.eye(nd)
        self.B1, self.B2 = A @ Q1, A @ Q2                                  # (K, C, nd, ncap)
        self.a = self.P @ A.T                                              # (K, C, nd)
        self.F1, self.F2 = D @ Q1, D @ Q2                                  # (K, C, ncap, ncap)
        self.H = D @ self.R                                                # (K, C, ncap, nd)
        self.e = self.P @ D.T                                              # (K, C, ncap)
        # the same maps stacked, junctions' rows first: one product per step gives both
        # the open-circuit junction voltages and the capacitors' next state
        self.BF1 = np.concatenate([self.B1, self.F1], axis=2)              # (K, C, nd+ncap, ncap)
        self.BF2 = np.concatenate([self.B2, self.F2], axis=2)
        self.ae = np.concatenate([self.a, self.e], axis=2)                 # (K, C, nd+ncap)
        # the first period's (self.first_high): its own source terms where they differ
        if (self.first_high != self.segment_high).any():
            self.P_first = np.einsum("kcij,kcj->kci", Ginv, injected(self.first_high)[segment])
            self.ae_first = np.concatenate([self.P_first @ A.T, self.P_first @ D.T], axis=2)
        else:
            self.P_first, self.ae_first = self.P, self.ae
        self.steps = K

    _PER_CORNER = ("Is", "nvt", "vcrit", "inv_nvt", "Is_over_nvt", "pin_G", "pin_level", "cap", "seg_current",
                   "voltage_bound")
    _PER_STEP = ("Q1", "Q2", "R", "P", "Z", "Z_abs", "B1", "B2", "a", "F1", "F2", "H", "e",
                 "BF1", "BF2", "ae", "P_first", "ae_first")

    def subset(self, idx: np.ndarray) -> "_Compiled":
        """The same network at the corners `idx` only."""
        other = object.__new__(_Compiled)
        other.__dict__.update(self.__dict__)
        for name in self._PER_CORNER:
            value = getattr(self, name)
            setattr(other, name, value[:, idx] if name == "seg_current" else value[idx])
        for name in self._PER_STEP:
            setattr(other, name, getattr(self, name)[:, idx])
        other.corners = len(idx)
        return other

    # -----------------------------------------------------------------------------------

    def diode_current(self, vj):
        """Junction current and conductance (SPICE's GMIN in parallel), exponent clipped."""
        e = np.exp(np.minimum(vj * self.inv_nvt, 100.0))
        return (self.Is * (e - 1.0) + GMIN_JUNCTION_S * vj,
                self.Is_over_nvt * e + GMIN_JUNCTION_S)

    def _limit(self, vnew, vold):
        """SPICE3's pnjlim: a forward junction moves by at most a logarithm per iteration."""
        nvt = self.nvt
        big = (vnew > self.vcrit) & (np.abs(vnew - vold) > 2.0 * nvt)
        if not big.any():
            return vnew
        arg = 1.0 + (vnew - vold) / nvt
        from_forward = np.where(arg > 0, vold + nvt * np.log(np.maximum(arg, 1e-300)), self.vcrit)
        from_reverse = nvt * np.log(np.maximum(vnew / nvt, 1e-300))
        return np.where(big, np.where(vold > 0, from_forward, from_reverse), vnew)

    def _junctions(self, Z, Z_abs, voc, vj):
        """One step's junction voltages: Newton on vj + Z i(vj) = voc from the guess vj.

        Every corner takes the same iterations (the batch stops together), so that corners
        which tie in the physics keep tying to the last bit and a worst corner stays the
        first of its equals. The batch stops when every residual is below
        NEWTON_RESIDUAL_V or below the round-off its own terms carry (see _round_off), or
        when the largest update is below NEWTON_STEP_V. Without the round-off test a junction
        feeding a node held only by GMIN_NODE_S (where Z is some 1e9 ohm) shows a residual of
        pure rounding above NEWTON_RESIDUAL_V and kept the batch iterating to
        MAX_NEWTON_ITERATIONS. Returns vj and the currents and conductances at it."""
        i, g = self.diode_current(vj)
        if not self.nd:
            return vj, i, g
        for _ in range(MAX_NEWTON_ITERATIONS):
            residual = vj + np.einsum("cij,cj->ci", Z, i) - voc
            size = np.abs(residual)
            if size.max() < NEWTON_RESIDUAL_V:
                break
            if (size < np.maximum(self._round_off(Z_abs, vj, i, g), NEWTON_RESIDUAL_V)).all():
                break
            w = np.linalg.solve(Z + self.eye_nd * (1.0 / g)[:, None, :], -residual[..., None])[..., 0]
            new = self._limit(vj + w / g, vj)
            change = np.abs(new - vj).max()
            vj = new
            i, g = self.diode_current(vj)
            if change < NEWTON_STEP_V:
                break
        return vj, i, g

    def _round_off(self, Z_abs, vj, i, g):
        """The size of the rounding error in vj + Z i(vj) - voc, per corner and junction:
        a few units of round-off (ROUND_OFF_ULPS) of each term of Z i, where each current
        carries the error exp() makes of its argument vj/nVt and of vj's own last digit.
        A residual below it is as small as double precision can show it."""
        spread = np.abs(i) * (1.0 + np.abs(vj) * self.inv_nvt) + g * np.abs(vj)
        return ROUND_OFF_ULPS * np.finfo(float).eps * np.einsum("cij,cj->ci", Z_abs, spread)

    def run_period(self, x, vj, sensitivity: bool, guesses=None, load: int | None = None,
                   first: bool = False):
        """One period from capacitor voltages x (C, ncap); junction guess vj (C, nd);
        `first`: the first period from rest (first_high).

        `guesses`, if given, is (junction voltages per step (K, C, nd), corner mask (C,)):
        where the mask holds, Newton starts each step there, else from the previous step. Returns a dict: x and vj at the end, per
        step the capacitor voltages at the step's start `xs` (K, C, ncap), the diode currents
        `currents` (K, C, nd) and junction voltages `vjs`; with `sensitivity`, also the
        monodromy matrix `Phi` (C, ncap, ncap), the gradient `dq` (C, ncap) of the diode
        `load`'s charge over the period with respect to the starting x, and `dvj_dx0`
        (K, C, nd, ncap), each step's junction voltages' gradient (a predictor).
        """
        K, C, nd, ncap = self.steps, self.corners, self.nd, self.ncap
        xs = np.empty((K, C, ncap))
        currents = np.empty((K, C, nd))
        vjs = np.empty((K, C, nd))
        if sensitivity:
            Phi = np.broadcast_to(np.eye(ncap), (C, ncap, ncap))
            dq = np.zeros((C, ncap))
            dvj_dx0 = np.empty((K, C, nd, ncap))
        eye = np.eye(nd)
        x_old, Phi_old = x, Phi if sensitivity else None
        ae = self.ae_first if first else self.ae
        for k in range(K):
            xs[k] = x
            Z = self.Z[k]
            bdf2 = self.bdf2[k]
            linear = ae[k] + np.einsum("cij,cj->ci", self.BF1[k], x)
            if bdf2:
                linear += np.einsum("cij,cj->ci", self.BF2[k], x_old)
            voc = linear[:, :nd]
            if bdf2 and self.bdf2[k - 1]:      # inside a phase: extrapolate the junctions
                vj = vj + np.minimum((vj - vjs[k - 2]) * self.step_ratio[k], self.nvt)
            if guesses is not None:
                vj = np.where(guesses[1][:, None], guesses[0][k], vj)
            vj, i, g = self._junctions(Z, self.Z_abs[k], voc, vj)
            currents[k] = i
            vjs[k] = vj
            x_next = linear[:, nd:] - np.einsum("cij,cj->ci", self.H[k], i)
            if sensitivity:
                # (I + Z g) d vj = d voc  <=>  S (g d vj) = d voc, all with respect to x0
                d_linear = self.BF1[k] @ Phi
                if bdf2:
                    d_linear += self.BF2[k] @ Phi_old
                dvoc, dx = d_linear[:, :nd], d_linear[:, nd:]
                g_dvj = np.linalg.solve(Z + eye * (1.0 / g)[:, None, :], dvoc)  # (C, nd, ncap)
                if load is not None:
                    dq += self.quadrature[k] * g_dvj[:, load, :]
                dvj_dx0[k] = g_dvj / g[..., None]
                Phi_old, Phi = Phi, dx - self.H[k] @ g_dvj
            x_old, x = x, x_next
        result = {"x": x, "vj": vj, "xs": xs, "currents": currents, "vjs": vjs}
        if sensitivity:
            result["Phi"], result["dq"], result["dvj_dx0"] = Phi, dq, dvj_dx0
        return result

    def node_voltages(self, xs, currents, first: bool = False):
        """Node voltages at each step's end (K, C, n) from the recorded states and currents
        (`first`: of the first period from rest)."""
        xs_old = np.concatenate([xs[:1], xs[:-1]], 0)     # unused (Q2 = 0) after an edge
        return ((self.P_first if first else self.P) + np.einsum("kcij,kcj->kci", self.Q1, xs)
                + np.einsum("kcij,kcj->kci", self.Q2, xs_old)
                - np.einsum("kcij,kcj->kci", self.R, currents))

    def step_charges(self, current):
        """The charge each step carries (K, C) of a current given at the step ends (K, C)."""
        charge = current * self.charge_end[:, None]
        charge[1:] += current[:-1] * self.charge_start[1:, None]
        return charge

    def pin_currents(self, V, first: bool = False):
        """Current out of each pin at each step's end (K, C, P) (`first`: in the first period
        from rest)."""
        high = (self.first_high if first else self.segment_high)[self.step_segment]   # (K, P)
        level = np.where(high[:, None, :], self.pin_level[None], 0.0)
        return self.pin_G[None] * (level - V[:, :, self.pin_node])


def _padded(V):
    """Node voltages with ground appended as the last column (index -1)."""
    return np.concatenate([V, np.zeros(V.shape[:-1] + (1,))], axis=-1)


def simulate_periodic(network: PumpNetwork, temperature_K, output_node: str, load_diode: str | None,
                      visible_current_A, tolerance_V: float = 1e-4, *,
                      steps_per_phase: int = 10, grading: float = 1.0, max_periods: int = 30,
                      surge_periods: int = 3, simulated_startup_periods: int = 60,
                      max_startup_periods: int = 2000, steady_only: bool = False,
                      start_x=None) -> PumpResult:
    """The pump's periodic steady state and start-up at every corner (see the module doc).

    `temperature_K` and every element value may be (C,) arrays; `visible_current_A` a float
    or (C,) array. `load_diode` names the LED (None: no load diode; its figures are nan).
    `steps_per_phase` time steps follow each edge, graded by `grading` (0: even).

    Start-up: the first `surge_periods` periods from rest are simulated in full at every
    corner (the surge); corners that the steady state lights but that are not yet lit go on
    in full up to `simulated_startup_periods` periods (set it to `surge_periods` for speed).
    Beyond that, and for `cycles_to_settle`, the period map linearised at the steady state
    carries the start-up on, up to `max_startup_periods` periods.

    `start_x` (C, ncap), capacitor voltages: where the shooting starts (else where the
    start-up periods end). `steady_only`: the steady state alone (the shooting starts from
    `start_x`, or zeros); the surge, the time to visible and the cycles to settle are NaN
    and the start-up waveforms empty. Either way the steady state is the same to within
    `tolerance_V`: only where its search starts differs.
    """
    sys = _Compiled(network, temperature_K, steps_per_phase, grading)
    if load_diode is not None and load_diode not in sys.diode_names:
        raise ValueError(f"no diode named {load_diode!r}")
    if output_node not in sys.index and output_node != GROUND:
        raise ValueError(f"node {output_node!r} is not in the network")
    if surge_periods < 1 and not steady_only:
        raise ValueError("surge_periods must be at least 1")
    C, T, K = sys.corners, sys.period_s, sys.steps
    load = sys.diode_names.index(load_diode) if load_diode is not None else None
    out = sys.index.get(output_node, -1)
    visible = np.broadcast_to(np.asarray(visible_current_A, dtype=float), (C,))
    if load is None:
        visible = np.full(C, np.inf)

    def load_of(currents):
        """The load diode's current per step (K, C); zero when there is no load diode."""
        return currents[:, :, load] if load is not None else np.zeros(currents.shape[:2])
    pin_names = [p.name for p in network.pins]

    # start-up from rest, in full: the surge and the first one-period averages of the LED
    x = np.zeros((C, sys.ncap))
    vj = np.zeros((C, sys.nd))
    start_V, start_pin = [], []
    charge_prev = np.zeros((C, K))       # cumulative LED charge at each step end, last period
    charge_total = np.zeros(C)
    visible_at = np.full(C, np.inf)
    period_average = np.zeros(C)
    if steady_only:
        surge_periods = 0
    for p in range(surge_periods):
        run = sys.run_period(x, vj, sensitivity=False, first=p == 0)
        V = sys.node_voltages(run["xs"], run["currents"], first=p == 0)
        start_V.append(V)
        start_pin.append(sys.pin_currents(V, first=p == 0))
        charge = charge_total[:, None] + np.cumsum(sys.step_charges(load_of(run["currents"])).T, 1)
        window = (charge - charge_prev) / T          # average over the last period (0 before)
        hit = (window >= visible[:, None]) & ~np.isfinite(visible_at)[:, None]
        found = hit.any(axis=1)
        visible_at[found] = p * T + sys.step_end_s[np.argmax(hit, axis=1)[found]]
        period_average = window[:, -1]
        charge_prev, charge_total = charge, charge[:, -1]
        x, vj = run["x"], run["vj"]
    x_rest, vj_rest = x.copy(), vj.copy()
    if steady_only:
        start_V = [np.zeros((0, C, len(sys.node_names)))]
        start_pin = [np.zeros((0, C, len(network.pins)))]
    startup_V = np.concatenate(start_V, 0)                                  # (K*p, C, n)
    startup_pin = np.concatenate(start_pin, 0)
    startup_t = (np.arange(surge_periods)[:, None] * T + sys.step_end_s[None]).ravel()

    # shooting: Newton on P(x) = x with the exact monodromy matrix
    periods = surge_periods
    if start_x is not None:
        x = np.array(np.broadcast_to(np.asarray(start_x, dtype=float), (C, sys.ncap)))
    eye = np.eye(sys.ncap)
    guesses = None
    settled = np.zeros(C, dtype=bool)
    best_err = np.full(C, np.inf)
    x_base, step_base = x.copy(), np.zeros_like(x)
    for _ in range(max_periods):
        run = sys.run_period(x, vj, sensitivity=True, guesses=guesses, load=load)
        periods += 1
        residual = run["x"] - x
        err = np.abs(residual).max(axis=1)
        try:
            step = np.linalg.solve(run["Phi"] - eye, -residual[..., None])[..., 0]
        except np.linalg.LinAlgError:
            step = residual.copy()
        bad = ~np.isfinite(step).all(axis=1)
        step[bad] = residual[bad]
        # settled: one period repeats to within tolerance_V, and the Newton step (the state's
        # distance from the periodic one) is within it too. Where the period map has a slow
        # mode (a reservoir that a barely lit LED drains), a period repeats to a tenth of a
        # millivolt while the state is still tens of millivolts short: measured against
        # ngspice run for 8000 periods, 43 mV at a doubler's output
        settled = (err < tolerance_V) & (np.abs(step).max(axis=1) < tolerance_V)
        if settled.all():
            break
        # a Newton update that made the mismatch much worse is halved instead (backtracking)
        worse = (err > 2.0 * best_err) & ~settled
        step = np.clip(x + step, -sys.voltage_bound[:, None], sys.voltage_bound[:, None]) - x
        step[settled] = 0.0
        step_base[worse] *= 0.5
        x_next = np.where(worse[:, None], x_base + step_base, x + step)
        keep = ~worse
        x_base[keep], step_base[keep], best_err[keep] = x[keep], step[keep], err[keep]
        # predict each step's junctions from the last period where the update is small
        change = x_next - x
        predictable = np.abs(change).max(axis=1) < PREDICTOR_STEP_V
        guesses = (run["vjs"] + np.einsum("kcij,cj->kci", run["dvj_dx0"], change), predictable)
        vj = run["vj"]
        x = x_next

    xs, cur = run["xs"], run["currents"]
    V = sys.node_voltages(xs, cur)                                          # (K, C, n)
    Vp = _padded(V)
    pin_i = sys.pin_currents(V)                                             # (K, C, P)
    v_out = Vp[:, :, out]
    weights = sys.quadrature[:, None] / T
    high = sys.segment_high[sys.step_segment]                               # (K, P)
    pin_high, pin_low, surge = {}, {}, {}
    for k, name in enumerate(pin_names):
        # (a pin held high or low has no other phase: its peak there is 0 A)
        pin_high[name] = np.where(high[:, k, None], pin_i[:, :, k], -np.inf).max(axis=0) \
            if high[:, k].any() else np.zeros(C)
        pin_low[name] = np.where(~high[:, k, None], -pin_i[:, :, k], -np.inf).max(axis=0) \
            if (~high[:, k]).any() else np.zeros(C)
        surge[name] = (np.abs(startup_pin[:, :, k]).max(axis=0) if not steady_only
                       else np.full(C, np.nan))
    reverse = {name: (Vp[:, :, sys.diode_cathode[k]] - Vp[:, :, sys.diode_anode[k]]).max(axis=0)
               for k, name in enumerate(sys.diode_names)}
    # every diode's figures; the load's are its diode's (the same arrays)
    diode_average = {name: (cur[:, :, k] * weights).sum(axis=0) for k, name in enumerate(sys.diode_names)}
    diode_peak = {name: cur[:, :, k].max(axis=0) for k, name in enumerate(sys.diode_names)}
    diode_wave = {name: np.concatenate([cur[-1:, :, k], cur[:, :, k]], 0).T
                  for k, name in enumerate(sys.diode_names)}
    load_average = diode_average[load_diode] if load is not None else np.zeros(C)

    Phi, dq = run["Phi"], run["dq"]
    steady = dict(period_s=T, peak_V=v_out.max(axis=0), average_V=(v_out * weights).sum(axis=0),
                  ripple_V=v_out.max(axis=0) - v_out.min(axis=0),
                  load_average_A=load_average if load is not None else np.full(C, np.nan),
                  load_peak_A=diode_peak[load_diode] if load is not None else np.full(C, np.nan),
                  pin_high_peak_A=pin_high, pin_low_peak_A=pin_low,
                  diode_reverse_max_V=reverse, startup_surge_A=surge, settled=settled,
                  steady_x=x, diode_average_A=diode_average, diode_peak_A=diode_peak,
                  diode_current_A=diode_wave)
    names = sys.node_names
    time_axis = np.concatenate([[0.0], sys.step_end_s])
    wave = {name: np.concatenate([V[-1:, :, i], V[:, :, i]], 0).T for i, name in enumerate(names)}
    steady.update(
        waveform_time_s=time_axis, waveform_V=wave,
        load_current_A=(diode_wave[load_diode] if load is not None
                        else np.zeros((C, len(sys.step_end_s) + 1))),
        pin_current_A={name: np.concatenate([pin_i[-1:, :, k], pin_i[:, :, k]], 0).T
                       for k, name in enumerate(pin_names)},
        startup_time_s=startup_t,
        startup_V={name: startup_V[:, :, i].T for i, name in enumerate(names)},
        startup_pin_current_A={name: startup_pin[:, :, k].T for k, name in enumerate(pin_names)})
    if steady_only:
        return PumpResult(time_to_visible_s=np.full(C, np.nan), cycles_to_settle=np.full(C, np.nan),
                          periods_simulated=periods, **steady)
    pending = ~np.isfinite(visible_at) & (load_average >= visible)

    # the start-up in full, for the corners the steady state lights but that are not yet lit
    need = np.flatnonzero(pending)
    simulated_to = surge_periods
    if need.size and simulated_startup_periods > surge_periods:
        sub = sys.subset(need)
        xn, vjn = x_rest[need], vj_rest[need]
        q_prev, q_total, todo = charge_prev[need], charge_total[need], np.ones(need.size, bool)
        for p in range(surge_periods, simulated_startup_periods):
            part = sub.run_period(xn, vjn, sensitivity=False)
            periods += 1
            q = q_total[:, None] + np.cumsum(sys.step_charges(load_of(part["currents"])).T, 1)
            window = (q - q_prev) / T
            hit = (window >= visible[need][:, None]) & todo[:, None]
            found = hit.any(axis=1)
            visible_at[need[found]] = p * T + sys.step_end_s[np.argmax(hit, axis=1)[found]]
            todo &= ~found
            q_prev, q_total, xn, vjn = q, q[:, -1], part["x"], part["vj"]
            if not todo.any():
                break
        simulated_to = p + 1
        pending[need] = todo
        x_late, late_average = x_rest.copy(), period_average.copy()
        x_late[need], late_average[need] = xn, window[:, -1]
    else:
        x_late, late_average = x_rest, period_average

    # beyond: the period map linearised at the steady state,
    # d(k+1) = Phi d(k), one-period LED average = steady average + dq . d(k) / T
    def extrapolate(d, last, start, pending, want_cycles):
        cycles = np.full(C, np.inf)
        cycles[np.abs(d).max(axis=1) < tolerance_V] = start
        for p in range(start, max_startup_periods):
            if not (pending.any() or (want_cycles and (~np.isfinite(cycles)).any())):
                break
            average = load_average + np.einsum("cj,cj->c", dq, d) / T
            crossed = pending & (average >= visible)
            if crossed.any():
                rise = np.where(average > last, average - last, 1.0)
                share = np.clip((visible - last) / rise, 0.0, 1.0)
                visible_at[crossed] = (p + share[crossed]) * T
                pending = pending & ~crossed
            last = average
            d = np.einsum("cij,cj->ci", Phi, d)
            cycles[~np.isfinite(cycles) & (np.abs(d).max(axis=1) < tolerance_V)] = p + 1
        if want_cycles and (~np.isfinite(cycles)).any():   # past the horizon: slowest mode
            rho = np.abs(np.linalg.eigvals(Phi)).max(axis=1)
            far = ~np.isfinite(cycles) & (rho < 1.0)
            with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
                extra = np.ceil(np.log(tolerance_V / np.abs(d).max(axis=1)) / np.log(rho))
            cycles[far] = max_startup_periods + extra[far]
        return cycles

    cycles = extrapolate(x_rest - x, period_average, surge_periods,
                         np.zeros(C, bool) if simulated_to > surge_periods else pending, True)
    if simulated_to > surge_periods and pending.any():
        extrapolate(x_late - x, late_average, simulated_to, pending, False)
    time_to_visible = np.maximum(visible_at - sys.first_edge_s, 0.0)
    return PumpResult(time_to_visible_s=time_to_visible, cycles_to_settle=cycles,
                      periods_simulated=periods, **steady)
