"""From the flat design and its context to what the rules read: the circuit graph, supplies,
port pins, LEDs, their branches, and each branch's operating point at every corner.

    design = analyse(flat, context)
    design.branches[0].current_A["D1"]      # average current at each corner, a numpy array

Everything here is SI floats and numpy arrays over the corners (`design.corners`).
"""

from __future__ import annotations

import itertools
import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from drc import profiles
from drc.context import Context, PinSpec, SupplySpec
from drc.design import GROUND, Element, FlatDesign
from drc.diode import ZERO_CELSIUS_K, DiodeParams, voltage_at_current
from drc.errors import InputError, InputErrors, Location
from drc.memo import Canon, Memo, value_key
from drc.solve import led_model_from_forward_voltages, solve_string
from drc.units import format_si

STRING_SOLUTIONS = Memo()
NETWORK_SOLUTIONS = Memo()
PUMP_SOLUTIONS = Memo()
LED_THRESHOLD_V = 1.4          # a diode dropping at least this at 1 mA is an LED
INFRARED_LOOKALIKE_V = 1.0     # below the LED threshold but above silicon: perhaps infrared
SERIES_KINDS = frozenset("RLD")


# ---------------------------------------------------------------------------- corners


_SERIALS = itertools.count(1)


@dataclass(frozen=True)
class Corners:
    """Every combination of each supply's range ends and nominal, the temperature range's
    ends and nominal, and the resistor and capacitor tolerance ends. Index `nominal` is the
    all-nominal corner."""

    supply_V: dict[str, np.ndarray]
    temperature_C: np.ndarray
    resistor_factor: np.ndarray
    capacitor_factor: np.ndarray
    nominal: int

    @property
    def count(self) -> int:
        return int(self.temperature_C.shape[0])

    @property
    def serial(self) -> int:
        """A number no other corner set in this process has (a cache key)."""
        found = self.__dict__.get("_serial")
        if found is None:
            found = self.__dict__["_serial"] = next(_SERIALS)
        return found

    @property
    def shown(self) -> list[str]:
        """The supplies a corner names: those that vary (all of them when none does and
        there are few)."""
        cached = self.__dict__.get("_shown")
        if cached is None:
            # many rails share one array (make_corners: one per fixed value): judge each
            # distinct array once
            varies: dict[int, bool] = {}
            cached = []
            for k, v in self.supply_V.items():
                found = varies.get(id(v))
                if found is None:
                    found = varies[id(v)] = bool(v.size and v.min() != v.max())
                if found:
                    cached.append(k)
            if not cached and len(self.supply_V) <= 8:
                cached = list(self.supply_V)
            self.__dict__["_shown"] = cached
        return cached

    @property
    def temperature_K(self) -> np.ndarray:
        cached = self.__dict__.get("_kelvin")
        if cached is None:
            cached = self.__dict__["_kelvin"] = self.temperature_C + ZERO_CELSIUS_K
        return cached

    def reduce(self, supplies, capacitors: bool = False) -> tuple[np.ndarray, np.ndarray]:
        """(sel, inverse): representative corner indices for the distinct combinations of the
        named supplies, temperature, resistor (and capacitor) tolerance; and for every corner,
        which of them stands for it. A circuit on one rail is solved on its own corners only."""
        cache = self.__dict__.setdefault("_reduced", {})
        key = (tuple(label for label in supplies if label in self.shown), capacitors)
        if key in cache:
            return cache[key]
        columns = [self.supply_V[label] for label in key[0]]
        columns += [self.temperature_C, self.resistor_factor]
        if capacitors:
            columns.append(self.capacitor_factor)
        table = np.stack(columns, axis=1)
        _, sel, inverse = np.unique(table, axis=0, return_index=True, return_inverse=True)
        cache[key] = (sel, inverse.reshape(-1))
        return cache[key]

    def subset(self, sel: np.ndarray) -> "Corners":
        """The corners at `sel` (nominal: the one nearest the all-nominal corner); only the
        supplies that vary are carried (the circuit solved on them reads its own arrays)."""
        nominal = int(np.flatnonzero(sel == self.nominal)[0]) if np.any(sel == self.nominal) else 0
        return Corners({k: self.supply_V[k][sel] for k in self.shown}, self.temperature_C[sel],
                       self.resistor_factor[sel], self.capacitor_factor[sel], nominal)

    def describe(self, i: int) -> dict:
        """The corner as the report gives it."""
        out: dict[str, Any] = {"supply_V": {k: round(float(self.supply_V[k][i]), 6) for k in self.shown},
                               "temperature_C": round(float(self.temperature_C[i]), 6)}
        rf = float(self.resistor_factor[i])
        if rf != 1.0:
            out["resistor_tolerance"] = f"{(rf - 1) * 100:+g} %"
        cf = float(self.capacitor_factor[i])
        if cf != 1.0:
            out["capacitor_tolerance"] = f"{(cf - 1) * 100:+g} %"
        return out

    def words(self, i: int) -> str:
        """The corner in words: "VBAT 2.00 V, -20 °C, resistors -5 %"."""
        parts = [f"{k} {float(self.supply_V[k][i]):.2f} V" for k in self.shown]
        parts.append(f"{float(self.temperature_C[i]):g} °C")
        rf = float(self.resistor_factor[i])
        if rf != 1.0:
            parts.append(f"resistors {(rf - 1) * 100:+g} %")
        return ", ".join(parts)


def _three(low: float, nominal: float, high: float) -> list[float]:
    out = []
    for v in (low, nominal, high):
        if not any(abs(v - w) < 1e-12 for w in out):
            out.append(v)
    return out


MAX_INDEPENDENT_SUPPLIES = 3


def make_corners(supplies: dict[str, "Supply"], context: Context, with_capacitors: bool,
                 assumptions: "_Assumptions | None" = None) -> Corners:
    """Fixed supplies take one value; up to MAX_INDEPENDENT_SUPPLIES ranged ones vary
    independently; beyond that, all ranged supplies move together (low, nominal, high)."""
    ranged = [s for s in supplies.values() if s.low_V != s.high_V]
    together = len(ranged) > MAX_INDEPENDENT_SUPPLIES
    if together and assumptions is not None:
        assumptions.add(f"{len(ranged)} supplies with a range: checked moving together "
                        "(all low, all nominal, all high), not in every combination")
    axes, nominal_index, columns = [], [], []
    if together:
        axes.append([0, 1, 2])
        nominal_index.append(1)
        columns.append("together")
    else:
        for s in ranged:
            values = _three(s.low_V, s.nominal_V, s.high_V)
            axes.append(values)
            nominal_index.append(min(range(len(values)), key=lambda k: abs(values[k] - s.nominal_V)))
            columns.append(s.label)
    t_lo, t_hi = context.temperature_C
    t_nom = context.nominal_temperature_C
    temps = _three(t_lo, t_nom, t_hi)
    axes.append(temps)
    nominal_index.append(min(range(len(temps)), key=lambda k: abs(temps[k] - t_nom)))
    rt = context.resistor_tolerance
    rfs = _three(1 - rt, 1.0, 1 + rt)
    axes.append(rfs)
    nominal_index.append(rfs.index(1.0))
    ct = context.capacitor_tolerance if with_capacitors else 0.0
    cfs = _three(1 - ct, 1.0, 1 + ct)
    axes.append(cfs)
    nominal_index.append(cfs.index(1.0))
    grid = np.array(list(itertools.product(*axes)), dtype=float).reshape(-1, len(axes))
    shape = [len(a) for a in axes]
    nominal = int(np.ravel_multi_index(nominal_index, shape))
    count = grid.shape[0]
    supply_V = {}
    k = len(columns)
    fixed: dict = {}     # (volts, its sign) -> one read-only array for every rail at that value
    for s in supplies.values():
        if s.low_V == s.high_V:
            # a board may hold thousands of fixed sources at a few values (every DC source
            # with no [supply] table is a rail): one array each would cost more than the rest
            same = (s.nominal_V, math.copysign(1.0, s.nominal_V))
            found = fixed.get(same)
            if found is None:
                found = fixed[same] = np.full(count, s.nominal_V)
                found.setflags(write=False)
            supply_V[s.label] = found
        elif together:
            supply_V[s.label] = np.choose(grid[:, 0].astype(int), [s.low_V, s.nominal_V, s.high_V]).astype(float)
        else:
            supply_V[s.label] = grid[:, columns.index(s.label)].copy()
    return Corners(supply_V=supply_V, temperature_C=grid[:, k].copy(),
                   resistor_factor=grid[:, k + 1].copy(), capacitor_factor=grid[:, k + 2].copy(),
                   nominal=nominal)


# ---------------------------------------------------------------------------- parts


@dataclass
class Supply:
    """A rail: a DC source to ground, or a net the config names."""

    label: str
    net: str
    source: str | None              # the voltage source's name, if one sets it
    low_V: float
    nominal_V: float
    high_V: float
    battery: str | None
    configured: bool
    location: Location
    package_current_A: float | None = None
    voltage_V: np.ndarray = field(default_factory=lambda: np.zeros(0))   # at every corner

    @property
    def lithium(self) -> bool:
        return self.battery is not None and self.battery.lower() in ("lithium-coin", "li-ion", "lifepo4")


@dataclass
class Pin:
    """A port pin: a source that models it, or a net a black-box part drives."""

    label: str
    net: str
    source: str | None
    supply: str | None              # the label of the rail that powers it
    output_resistance_ohm: float
    max_current_A: float
    drive: str                      # "high", "low", "toggle", "input"
    frequency_Hz: float | None
    duty: float                     # share of the period spent high
    start_s: float                  # when, within the period, the high phase begins
    configured: bool
    location: Location
    clamp_above_supply_V: float = 0.3
    clamp_current_A: float = 0.005
    high_V: np.ndarray = field(default_factory=lambda: np.zeros(0))       # at every corner
    # low until its first rising edge, from rest (a PULSE whose first level is its low one):
    # a high phase that wraps round the period's end is not there at the very start
    rest_low: bool = False

    @property
    def period_s(self) -> float | None:
        return 1.0 / self.frequency_Hz if self.frequency_Hz else None

    def high_share_with(self, other: "Pin", other_high: bool) -> float:
        """Share of time this pin is high while `other` is high (other_high) or low."""
        mine = self._high_mask()
        theirs = other._high_mask(self)
        if mine is None or theirs is None:
            a = self.duty if self.drive == "toggle" else (1.0 if self.drive == "high" else 0.0)
            b = other.duty if other.drive == "toggle" else (1.0 if other.drive == "high" else 0.0)
            return a * (b if other_high else 1 - b)
        return float(np.mean(mine & (theirs if other_high else ~theirs)))

    def _high_mask(self, reference: "Pin | None" = None):
        samples = 2048
        if self.drive != "toggle":
            return np.full(samples, self.drive == "high")
        ref = reference if reference is not None and reference.drive == "toggle" else self
        if ref.frequency_Hz != self.frequency_Hz:
            return None
        t = (np.arange(samples) + 0.5) / samples / self.frequency_Hz
        return ((t - self.start_s) % (1.0 / self.frequency_Hz)) < self.duty / self.frequency_Hz


@dataclass
class Led:
    element: Element
    colour: str
    params: DiodeParams
    visible_current_A: float
    max_current_A: float
    max_reverse_V: float
    eye_safety: bool
    model_from: str                 # "netlist" or "default"
    # the element's name, kept as a field: the rules and the report read it some ten times
    # per LED, and a property call costs more than the lookup
    name: str = field(init=False, repr=False, compare=False)

    def __post_init__(self) -> None:
        self.name = self.element.name


@dataclass
class Phase:
    """One part of the drive's period: its share, and the drive voltage and the resistance
    outside the branch's own resistors (pins' output resistance) at every corner."""

    share: float
    drive_V: np.ndarray
    extra_resistance_ohm: float
    words: str                      # "PA6 high", "PB1 low", "always"
    pin_states: dict = field(default_factory=dict)   # for a network: pin label -> high?
    drive_key: bytes = b""          # the drive's values, for sharing solutions (drc.memo)


@dataclass
class Branch:
    """An LED string: from its drive end through resistors and diodes to its return."""

    id: str
    leds: list[Led]
    stages: list[list[Element]]     # diodes in series order; each stage's diodes in parallel
    elements: list[Element]         # every element of the path, drive end first
    resistors: list[Element]
    nets: list[str]
    anode_net: str
    cathode_net: str
    drive: str                      # "rail", "pin", "pump", "unknown"
    source: str | None              # the supply's or pin's label (or pump id)
    supply: Supply | None = None
    pin: Pin | None = None          # a pin at the anode end (sourcing)
    sink_pin: Pin | None = None     # a pin at the cathode end (sinking)
    reversed: bool = False          # the string points from its return toward its drive
    note: str | None = None
    phases: list[Phase] = field(default_factory=list)
    series_resistance_ohm: np.ndarray | None = None
    current_A: dict[str, np.ndarray] = field(default_factory=dict)        # average, per LED
    peak_current_A: dict[str, np.ndarray] = field(default_factory=dict)   # brightest phase
    forward_V: dict[str, np.ndarray] = field(default_factory=dict)        # in that phase
    reverse_V: dict[str, np.ndarray] = field(default_factory=dict)        # greatest, any phase
    pin_current_A: dict[str, np.ndarray] = field(default_factory=dict)    # per pin label, peak
    lit_phase: int = 0
    network: "Any" = None           # a region that is not a plain string: solved as a network
    pump_region: "Any" = None       # drc.pumps.PumpRegion for a pump-fed LED
    network_pins: list = field(default_factory=list)
    network_rails: list = field(default_factory=list)
    # what else its pins' nets drive, solved with it (a plain string before them: its
    # `resistors` stay the string's own, in series with its LEDs, and `string_alone` is
    # (its stages, its phases) as a string, for fixes; see drc.advice)
    pin_loads: list = field(default_factory=list)
    string_alone: tuple | None = None

    @property
    def led(self) -> Led:
        return self.leds[0]

    def toggling_pins(self) -> list:
        """The toggling pins that drive it (its pin, its sink pin, its network's pins), each
        once, in that order."""
        out: list = []
        for p in (self.pin, self.sink_pin, *self.network_pins):
            if p is not None and p.drive == "toggle" and all(p is not q for q in out):
                out.append(p)
        return out

    @property
    def unlimited(self) -> bool:
        return not self.resistors

    def on_drive(self) -> tuple[np.ndarray, np.ndarray]:
        """Drive voltage and total resistance in the lit phase (for fixes and messages)."""
        phase = self.phases[self.lit_phase]
        return phase.drive_V, self.series_resistance_ohm + phase.extra_resistance_ohm


@dataclass
class Design:
    """The analysed design, read-only, as every rule receives it."""

    path: str
    title: str
    flat: FlatDesign
    context: Context
    terminals: dict[str, list[tuple[Element, int]]]
    supplies: dict[str, Supply]
    pins: dict[str, Pin]
    leds: dict[str, Led]
    branches: list[Branch]
    corners: Corners
    assumptions: list[str]
    pumps: list = field(default_factory=list)

    @property
    def graph(self):
        """The circuit as a networkx MultiGraph (see drc.api), built on first use: the
        analysis itself walks `terminals`, and most checks never ask for the graph, so a
        board does not pay for it (nor for importing networkx) unless a rule does."""
        found = self.__dict__.get("_graph")
        if found is None:
            found = self.__dict__["_graph"] = circuit_graph(self.flat)
        return found

    @property
    def elements(self) -> list[Element]:
        return self.flat.elements

    @property
    def nets(self) -> list[str]:
        return self.flat.nets

    @property
    def models(self):
        return self.flat.models

    @property
    def value_notes(self):
        return self.flat.value_notes

    def element(self, name: str) -> Element | None:
        return self.flat.element(name)

    def connections(self, net: str) -> list[tuple[Element, int]]:
        """(element, terminal index) for every terminal on the net."""
        return self.terminals.get(net, [])

    def supply_of_net(self, net: str) -> Supply | None:
        return next((s for s in self.supplies.values() if s.net == net), None)

    def pin_of_net(self, net: str) -> Pin | None:
        return next((p for p in self.pins.values() if p.net == net), None)


# ---------------------------------------------------------------------------- analysis


class _Assumptions:
    """Assumptions in plain words; the same words for many parts are said once."""

    def __init__(self):
        self.by_text: dict[str, list[str]] = {}
        self.plain: list[str] = []

    def add(self, text: str, part: str | None = None):
        if part is None:
            if text not in self.plain:
                self.plain.append(text)
            return
        self.by_text.setdefault(text, []).append(part)

    def lines(self) -> list[str]:
        out = list(self.plain)
        for text, parts in self.by_text.items():
            if len(parts) > 4:
                names = ", ".join(parts[:3]) + f" and {len(parts) - 3} more"
            else:
                names = ", ".join(parts)
            out.append(f"{names}: {text}")
        return out


def _closest(word: str, choices) -> str:
    import difflib
    close = difflib.get_close_matches(word.lower(), [c.lower() for c in choices], n=1)
    return f"; did you mean '{close[0]}'?" if close else ""


def _resolve_target(flat: FlatDesign, spec, kind: str) -> tuple[Element | None, str | None]:
    """The voltage source or net a [supply]/[pin] table names (source=, net=, else its label)."""
    if spec.source is not None:
        e = flat.element(spec.source)
        if e is None or e.kind != "V":
            raise InputError(spec.location, f"[{kind}.{spec.label}] source '{spec.source}' is not a "
                             f"voltage source in {flat.path}{_closest(spec.source, [x.name for x in flat.elements if x.kind == 'V'])}")
        return e, None
    if spec.net is not None:
        net = spec.net.lower()
        if net not in flat.nets:
            raise InputError(spec.location, f"[{kind}.{spec.label}] net '{spec.net}' is not in "
                             f"{flat.path}{_closest(net, flat.nets)}")
        return None, net
    e = flat.element(spec.label)
    if e is not None and e.kind == "V":
        return e, None
    if spec.label.lower() in flat.nets:
        return None, spec.label.lower()
    raise InputError(spec.location, f"[{kind}.{spec.label}] names no voltage source or net "
                     f"'{spec.label}' in {flat.path} (give source = or net =)"
                     f"{_closest(spec.label, [x.name for x in flat.elements if x.kind == 'V'] + flat.nets)}")


def _source_net(e: Element) -> tuple[str | None, float]:
    """For a source with one side on ground: its other net and the sign of its voltage there."""
    a, b = e.nodes
    if b == GROUND and a != GROUND:
        return a, 1.0
    if a == GROUND and b != GROUND:
        return b, -1.0
    return None, 1.0


def analyse(flat: FlatDesign, context: Context) -> Design:
    """The analysed design: parts found, branches traced and solved at every corner."""
    assumptions = _Assumptions()
    errors: list[InputError] = []
    terminals = _terminals(flat)

    supplies: dict[str, Supply] = {}
    claimed: set[str] = set()
    pin_sources = set()
    for spec in context.pins.values():
        try:
            e, _ = _resolve_target(flat, spec, "pin")
        except InputError as error:
            errors.append(error)
            continue
        if e is not None:
            pin_sources.add(e.key)

    supply_nets: set[str] = set()
    for spec in context.supplies.values():
        try:
            supplies[spec.label] = _configured_supply(flat, spec, assumptions)
            supply_nets.add(supplies[spec.label].net)
        except InputError as error:
            errors.append(error)
            continue
        if supplies[spec.label].source:
            claimed.add(supplies[spec.label].source.lower())
    for e in flat.elements:
        if e.kind != "V" or e.key in claimed or e.key in pin_sources:
            continue
        if e.source is not None and e.source.waveform is not None:
            continue
        net, sign = _source_net(e)
        if net is None or e.value is None or e.value == 0:
            continue
        v = sign * e.value
        if net in supply_nets:
            continue
        supply_nets.add(net)
        supplies[e.name] = Supply(e.name, net, e.name, v, v, v, None, False, e.location)
        assumptions.add(f"no [supply] table, checked at its DC value {v:g} V only", e.name)

    pins: dict[str, Pin] = {}
    for spec in context.pins.values():
        try:
            pin = _configured_pin(flat, spec, supplies, assumptions)
        except InputError as error:
            errors.append(error)
            continue
        pins[spec.label] = pin
    pin_source_keys = {p.source.lower() for p in pins.values() if p.source}
    configured_supplies = [s for s in supplies.values() if s.configured] or list(supplies.values())
    for e in flat.elements:
        if e.kind != "V" or e.key in pin_sources or e.key in claimed:
            continue
        if e.source is None or e.source.waveform is None or e.source.waveform.kind != "pulse":
            continue
        if e.key in pin_source_keys:
            continue
        pin = _pulse_pin(e, None, supplies, assumptions, configured_supplies)
        if pin is not None:
            pins[e.name] = pin
    if errors:
        raise InputErrors(errors)

    corners = make_corners(supplies, context, with_capacitors=True, assumptions=assumptions)
    if flat.temperatures_C:         # a simulation's .temp: drc's corners come from [ambient]
        low, high = context.temperature_C
        outside = [t for t in flat.temperatures_C if not low <= t <= high]
        assumptions.add(
            f"the netlist's .temp ({', '.join(f'{t:g} °C' for t in flat.temperatures_C)}) is a "
            f"simulator's setting: drc's corners span {low:g} °C to {high:g} °C ([ambient] temperature)"
            + (f", which leaves out {', '.join(f'{t:g} °C' for t in outside)}: widen it to cover "
               "what the product will see" if outside else ""))
    for s in supplies.values():
        s.voltage_V = corners.supply_V[s.label]
    for p in pins.values():
        if p.supply is not None and p.supply in supplies:
            p.high_V = supplies[p.supply].voltage_V
        else:
            p.high_V = np.full(corners.count, p.high_V if np.ndim(p.high_V) == 0 else float(p.high_V[0])) \
                if np.size(p.high_V) else np.zeros(corners.count)

    leds = _find_leds(flat, context, assumptions)
    loads, unsolved = _pin_loads(terminals, pins, supplies, leds)
    for label, names in unsolved.items():
        assumptions.add(f"pin {label} also drives {', '.join(names)}, which drc does not solve there: "
                        "taken as drawing no current from the pin")
    branches = _trace_branches(flat, terminals, supplies, pins, leds, corners, loads)
    for b in branches:
        if b.pump_region is not None or not b.phases:
            continue
        toggles = [p for p in b.toggling_pins() if p.frequency_Hz]
        if len({p.frequency_Hz for p in toggles}) > 1:
            assumptions.add("pins " + ", ".join(f"{p.label} ({p.frequency_Hz:g} Hz)" for p in toggles)
                            + " toggle at different frequencies in one circuit: the share of time "
                            "in each of their states taken as the product of their duties, as if "
                            "they were independent")
    design = Design(path=flat.path, title=flat.title, flat=flat, context=context,
                    terminals=terminals, supplies=supplies, pins=pins, leds=leds,
                    branches=branches, corners=corners, assumptions=[])
    # the plain strings together (solve_strings batches their distinct solves); then the rest
    solve_strings([b for b in branches if b.phases and b.network is None and b.pump_region is None],
                  corners, flat)
    for b in branches:
        if b.pump_region is not None:
            if b.note is None:
                _solve_pump_branch(b, corners, flat)
            design.pumps.extend(b.pump_region.pumps)
        elif b.network is not None:
            solve_branch(b, corners, flat)
    design.assumptions = list(context.assumptions) + assumptions.lines()
    return design


def _terminals(flat: FlatDesign) -> dict[str, list[tuple[Element, int]]]:
    """Net -> [(element, terminal index)] for every terminal, nets in order of first use."""
    terminals: dict[str, list[tuple[Element, int]]] = {}
    for e in flat.elements:
        for k, n in enumerate(e.nodes):
            found = terminals.get(n)
            if found is None:
                terminals[n] = [(e, k)]
            else:
                found.append((e, k))
    return terminals


def circuit_graph(flat: FlatDesign):
    """The circuit as a networkx MultiGraph: nets are nodes, a two-terminal element is an
    edge (key: its lower-case name, data "element"), a part with more terminals is a node
    ("part", key) with an edge to each of its nets."""
    import networkx as nx
    graph = nx.MultiGraph()
    graph.add_nodes_from(flat.nets)
    for e in flat.elements:
        if len(e.nodes) == 2:
            graph.add_edge(e.nodes[0], e.nodes[1], key=e.key, element=e)
        elif e.nodes:
            graph.add_node(("part", e.key), element=e)
            for n in e.nodes:
                graph.add_edge(("part", e.key), n, key=e.key, element=e)
    return graph


def _configured_supply(flat: FlatDesign, spec: SupplySpec, assumptions: _Assumptions) -> Supply:
    e, net = _resolve_target(flat, spec, "supply")
    dc = None
    source = None
    if e is not None:
        net, sign = _source_net(e)
        if net is None:
            raise InputError(spec.location, f"[supply.{spec.label}] source '{e.name}' has no side on ground")
        dc = sign * e.value if e.value is not None else None
        source = e.name
    nominal, why = spec.nominal_at(dc)
    if why:
        assumptions.add(why)
    low, high = spec.low_V, spec.high_V
    if low is None or high is None:
        if nominal is None:
            raise InputError(spec.location, f"[supply.{spec.label}] gives no range, battery or "
                             "nominal, and its net has no DC source: give range = [\"low V\", \"high V\"]")
        low = high = nominal
    return Supply(spec.label, net, source, low, nominal, high, spec.battery, True, spec.location,
                  spec.package_current_A)


SLOW_EDGE_SHARE = 0.01   # a PULSE's rise and fall together above this share of its period
                         # are said to be taken as steps (see _pulse_pin)


def _pulse_timing(e: Element) -> tuple[float, float, float, float, float, float, float]:
    """(high level, low level, frequency, duty, start, rise, fall) of a PULSE source:
    v1 v2 td tr tf pw per."""
    args = list(e.source.waveform.args) + [0.0] * 7
    v1, v2, td, tr, tf, pw, per = args[:7]
    if per <= 0:
        raise InputError(e.location, f"{e.name}: PULSE has no period; a toggling pin needs one")
    if v2 >= v1:
        high, low = v2, v1
        start = td + tr / 2
        # high from the middle of its rising edge to the middle of its falling one; a high
        # phase that runs past the period's end wraps round (in the steady state the pin is
        # high that long in every period, whatever its delay). From rest a PULSE holds its
        # first level until its delay, so at the very start the wrapped part is not there:
        # Pin.rest_low, which the pump model's start-up follows
        width = pw + (tr + tf) / 2
    else:
        high, low = v1, v2
        start = td + tr + pw + tf / 2
        width = per - pw - (tr + tf) / 2
    return high, low, 1.0 / per, min(max(width / per, 0.0), 1.0), start % per, tr, tf


def _level_matches(supply: Supply, level_V: float) -> bool:
    """A PULSE's high level is its supply's where it is within 5 % of the nominal."""
    return abs(supply.nominal_V - level_V) <= 0.05 * max(level_V, 1e-9)


def _pulse_pin(e: Element, spec: PinSpec | None, supplies: dict[str, Supply],
               assumptions: _Assumptions, candidates: list | None = None) -> Pin | None:
    net, sign = _source_net(e)
    if net is None:
        return None
    high, low, frequency, duty, start, rise, fall = _pulse_timing(e)
    if rise + fall > SLOW_EDGE_SHARE / frequency:
        # measured: 200 us edges on a 1 ms period (40 % of it) put a pin-driven red LED's
        # average 34 % above ngspice's .tran
        assumptions.add(f"PULSE edges of {format_si(rise, 's')} up and {format_si(fall, 's')} "
                        f"down, {100 * (rise + fall) * frequency:.0f} % of the period, taken as "
                        "steps at their middles: the current of an LED they drive is not "
                        "followed along the edges", e.name)
    if low != 0:
        assumptions.add(f"PULSE low level {low:g} V taken as 0 V: a port pin drives low to ground",
                        e.name)
    profile = profiles.pin_default()
    supply = spec.supply if spec is not None else None
    if supply is None:
        if len(supplies) == 1:
            only = next(iter(supplies.values()))
            supply = only.label
            differs = not _level_matches(only, high)
            assumptions.add(f"a PULSE source with no [pin] table: a toggling port pin powered by "
                            f"{supply}"
                            + (f", the only supply (its PULSE level {high:g} V is not {supply}'s "
                               f"{only.nominal_V:g} V: the pin is taken at {supply}'s)" if differs else "")
                            + f", built-in pin profile ({profile.output_resistance_ohm:g} Ω, "
                            f"{profile.max_current_A * 1e3:g} mA; from memory)", e.name)
        else:
            match = [s.label for s in (candidates if candidates is not None else supplies.values())
                     if _level_matches(s, high)]
            supply = match[0] if len(match) == 1 else None
            assumptions.add("a PULSE source with no [pin] table: a toggling port pin "
                            + (f"powered by {supply} (its level matches)" if supply else
                               f"with its PULSE level {high:g} V as its supply")
                            + f", built-in pin profile ({profile.output_resistance_ohm:g} Ω, "
                            f"{profile.max_current_A * 1e3:g} mA; from memory)", e.name)
    pin = Pin(label=spec.label if spec else e.name, net=net, source=e.name, supply=supply,
              output_resistance_ohm=spec.output_resistance_ohm if spec else profile.output_resistance_ohm,
              max_current_A=spec.max_current_A if spec else profile.max_current_A,
              drive="toggle", frequency_Hz=frequency, duty=duty, start_s=start,
              configured=spec is not None, location=spec.location if spec else e.location,
              clamp_above_supply_V=spec.clamp_above_supply_V if spec else profile.clamp_above_supply_V,
              clamp_current_A=spec.clamp_current_A if spec else profile.clamp_current_A)
    pin.high_V = np.array(high)
    args = list(e.source.waveform.args) + [0.0, 0.0]
    pin.rest_low = args[1] >= args[0]          # its first level (v1) is its low one
    return pin


def _configured_pin(flat: FlatDesign, spec: PinSpec, supplies: dict[str, Supply],
                    assumptions: _Assumptions) -> Pin:
    e, net = _resolve_target(flat, spec, "pin")
    if spec.supply is not None and spec.supply not in supplies:
        match = [s for s in supplies.values() if s.label.lower() == spec.supply.lower()
                 or (s.source or "").lower() == spec.supply.lower() or s.net == spec.supply.lower()]
        if not match:
            raise InputError(spec.location, f"[pin.{spec.label}] supply '{spec.supply}' is no supply"
                             f"{_closest(spec.supply, list(supplies))}")
        spec_supply = match[0].label
    else:
        spec_supply = spec.supply
    if e is not None:
        if e.source is not None and e.source.waveform is not None and e.source.waveform.kind == "pulse":
            pin = _pulse_pin(e, spec, supplies, assumptions)
            if pin is None:
                raise InputError(spec.location, f"[pin.{spec.label}] source '{e.name}' has no side on ground")
            pin.supply = spec_supply or pin.supply
            return pin
        net, sign = _source_net(e)
        if net is None:
            raise InputError(spec.location, f"[pin.{spec.label}] source '{e.name}' has no side on ground")
        level = sign * (e.value or 0.0)
        drive = "high" if level > 0 else "low"
        pin = Pin(spec.label, net, e.name, spec_supply, spec.output_resistance_ohm, spec.max_current_A,
                  drive, None, 1.0 if drive == "high" else 0.0, 0.0, True, spec.location,
                  spec.clamp_above_supply_V, spec.clamp_current_A)
        pin.high_V = np.array(level if level > 0 else 0.0)
        if spec_supply is None and drive == "high":
            assumptions.add(f"[pin.{spec.label}]: no supply named; its source's {level:g} V is its high level")
        return pin
    drive = spec.drive or "high"
    if spec_supply is None:
        if len(supplies) == 1:
            spec_supply = next(iter(supplies))
            assumptions.add(f"[pin.{spec.label}]: no supply named; powered by {spec_supply}, the only rail")
        elif drive != "input":
            raise InputError(spec.location, f"[pin.{spec.label}] drives net '{net}' but names no supply "
                             f"(supply = one of {', '.join(supplies) or 'none'})")
    duty = spec.duty if spec.duty is not None else (0.5 if drive == "toggle" else
                                                   (1.0 if drive == "high" else 0.0))
    start = 0.0
    if drive == "toggle" and spec.phase == "inverted" and spec.frequency_Hz:
        start = 0.5 / spec.frequency_Hz
    pin = Pin(spec.label, net, None, spec_supply, spec.output_resistance_ohm, spec.max_current_A,
              drive, spec.frequency_Hz, duty, start, True, spec.location,
              spec.clamp_above_supply_V, spec.clamp_current_A)
    pin.high_V = np.array(0.0)
    return pin


def _find_leds(flat: FlatDesign, context: Context, assumptions: _Assumptions) -> dict[str, Led]:
    """Every diode that is an LED, with its colour, model and ratings. Diodes of one model,
    area and [led] table are judged alike, so each such kind is judged once and its words
    are said for each diode of that kind."""
    leds: dict[str, Led] = {}
    nominal_K = context.nominal_temperature_C + ZERO_CELSIUS_K
    spec_of = _led_spec_finder(context)
    judged: dict = {}
    for e in flat.elements:
        if e.kind != "D":
            continue
        model = flat.models.get(e.model) if e.model else None
        spec = spec_of(e.name, model.name if model else None)
        kind = (e.model, e.value, id(spec))
        found = judged.get(kind)
        if found is None:
            found = judged[kind] = _judge_diode(flat, e, model, spec, nominal_K)
        words, ratings = found
        for text in words:
            assumptions.add(text, e.name)
        if ratings is not None:
            leds[e.key] = Led(e, *ratings)
    return leds


def _led_spec_finder(context: Context):
    """context.led(name, model), with the answer for the names that no [led] table names
    (by element or label) found once per model: for those it depends on the model alone."""
    specs = list(context.leds.values())
    named = {s.element.lower() for s in specs if s.element is not None}
    named |= {s.label.lower() for s in specs if s.element is None and s.label is not None}
    by_model: dict = {}

    def find(name: str, model: str | None):
        if name.lower() in named:
            return context.led(name, model)
        if model not in by_model:
            by_model[model] = context.led(name, model)
        return by_model[model]
    return find


def _judge_diode(flat: FlatDesign, e: Element, model, spec, nominal_K: float):
    """(the assumption words for a diode, its Led fields after the element, or None when it
    is a plain diode)."""
    words: list[str] = []
    params = diode_params(flat, e)
    usable = model is not None and any(k in model.params for k in ("is", "n", "rs"))
    vf = float(voltage_at_current(params, 1e-3, nominal_K))
    if spec is None and not (usable and vf >= LED_THRESHOLD_V):
        if usable and INFRARED_LOOKALIKE_V <= vf < LED_THRESHOLD_V:
            words.append(f"drops {vf:.2f} V at 1 mA: taken as a plain diode; if it is an "
                         "infrared LED, name it in an [led] table")
        return words, None
    colour = spec.colour if spec is not None else None
    if colour is None:
        if usable:
            colour = profiles.infer_colour(vf)
            words.append(f"colour taken as {colour} from its forward voltage {vf:.2f} V at 1 mA")
        else:
            colour = "red"
            words.append("named as an LED but with no usable .model and no colour: taken as red")
    profile = profiles.led(colour)
    model_from = "netlist"
    if not usable:
        params = led_model_from_forward_voltages(profile.vf_1mA_V, profile.vf_20mA_V,
                                                 profile.tempco_V_per_K)
        model_from = "default"
        words.append(f"no usable .model: the built-in {colour} LED ({profile.vf_1mA_V:g} V at "
                     f"1 mA, {profile.vf_20mA_V:g} V at 20 mA; from memory)")
    visible = spec.visible_current_A if spec and spec.visible_current_A is not None else None
    maximum = spec.max_current_A if spec and spec.max_current_A is not None else None
    reverse = spec.max_reverse_V if spec and spec.max_reverse_V is not None else None
    missing = [w for w, v in (("visible", visible), ("max", maximum), ("reverse", reverse)) if v is None]
    if missing:
        words.append(f"{colour} LED ratings from the built-in profile: "
                     f"visible {profile.visible_current_A * 1e3:g} mA, max "
                     f"{profile.max_current_A * 1e3:g} mA, reverse {profile.max_reverse_V:g} V "
                     "(common practice)")
    return words, (colour, params,
                   visible if visible is not None else profile.visible_current_A,
                   maximum if maximum is not None else profile.max_current_A,
                   reverse if reverse is not None else profile.max_reverse_V,
                   profile.eye_safety, model_from)


def _is_wire(e: Element) -> bool:
    """A zero-volt source in series is an ammeter: a wire for the analysis."""
    return e.kind == "V" and (e.value or 0.0) == 0.0 and (e.source is None or e.source.waveform is None)


# A string whose two walks both end at a rail, a pin or ground is taken as it is, without
# working out the region around it (the same answer: tests/test_speed_trace.py turns this
# off to check).
_STRING_SHORTCUT = True


def _pin_loads(terminals, pins: dict, supplies: dict, leds: dict) -> tuple[dict, dict]:
    """What else a port pin's net drives besides its LED branches, for the pin's level and
    its current: ({pin net: [elements]}, {pin label: [names]}). The first holds the parts
    that hang off the pin net through nets of their own and reach only ground and rails,
    all resistors or 0 V sources (and, on a pin that does not toggle, inductors, shorts at
    DC, and capacitors, open at DC): the branches on the pin are solved with them, as one
    network, or a pump's model takes them in. The second names what drc cannot solve there
    (a diode, a source, a black-box part on a pin that is a source, a capacitor or inductor
    on a toggling pin, a path to another pin): taken as drawing no current, and said so."""
    rail_nets = {s.net for s in supplies.values()}
    pin_nets = {p.net: p for p in pins.values()}
    stops = rail_nets | set(pin_nets) | {GROUND}
    loads: dict[str, list[Element]] = {}
    unsolved: dict[str, list[str]] = {}
    for net, pin in pin_nets.items():
        driver = pin.source.lower() if pin.source else None
        seen: set[str] = set()
        for e, _ in terminals.get(net, ()):
            if e.key in seen or e.key == driver or e.key in leds or (driver is None and e.kind == "X"):
                continue
            if len(e.nodes) == 2 and any(x.key in leds for n in e.nodes if n not in stops
                                         for x, _ in terminals.get(n, ())):
                continue                       # the series part of an LED's branch (most are)
            # the part's circuit beyond the pin net, short of ground, rails and pins
            found = {e.key: e}
            _spread(found, [n for n in e.nodes if n not in stops],
                    lambda n: (x for x, _ in terminals.get(n, ())), stops)
            seen.update(found)
            parts = list(found.values())
            if any(x.key in leds for x in parts):
                continue                       # an LED's branch: traced from the LED
            touched = {n for x in parts for n in x.nodes}
            other_pins = [n for n in touched if n in pin_nets and n != net]
            toggles = pin.drive == "toggle"
            solvable = not other_pins and all(
                len(x.nodes) == 2 and (x.kind == "R" or _is_wire(x) or (x.kind in "LC" and not toggles))
                for x in parts)
            if solvable:
                loads.setdefault(net, []).extend(x for x in parts if x.kind != "C")
            else:
                unsolved.setdefault(pin.label, []).extend(x.name for x in parts)
    return {n: xs for n, xs in loads.items() if xs}, unsolved


def _with_pin_loads(branches: list[Branch], loads: dict, rail_nets, pin_nets, corners, stops) -> None:
    """Each branch on a pin that drives more than its LEDs (_pin_loads) takes those parts
    into its circuit and is solved as a network; branches sharing the pin are then merged
    (_merge_shared_pins), so each load is counted once. A pin that lifts a pump gives its
    load to the pump's model (_pump_branch) alone."""
    pumping = {p.net for b in branches if b.pump_region is not None for p in b.pump_region.pins}
    for b in branches:
        if b.pump_region is not None or not b.phases:
            continue
        extra = [x for n in b.nets if n in loads and n not in pumping for x in loads[n]]
        if not extra:
            continue
        have = {x.key for x in b.elements}
        b.pin_loads = [x for x in extra if x.key not in have]
        was_string = b.network is None
        b.elements = b.elements + b.pin_loads
        if not was_string:
            b.resistors = [x for x in b.elements if x.kind == "R"]
        elif not b.reversed:
            b.string_alone = (b.stages, b.phases)
        b.nets = sorted({n for x in b.elements for n in x.nodes})
        b.stages, b.phases, b.pin, b.sink_pin, b.supply, b.reversed = [], [], None, None, None, False
        b.drive, b.source = "unknown", None
        b.network = _NetworkRegion([n for n in b.nets if n not in stops],
                                   [x for x in b.elements if x.kind != "C"])
        _classify_network(b, rail_nets, pin_nets, corners)


def _trace_branches(flat, terminals, supplies, pins, leds, corners, loads=None) -> list[Branch]:
    rail_nets = {s.net: s for s in supplies.values()}
    pin_nets = {p.net: p for p in pins.values()}
    stops = set(rail_nets) | set(pin_nets) | {GROUND}
    toggling = {n for n, p in pin_nets.items() if p.drive == "toggle"}
    lifters = _lifted_through_resistors(toggling, terminals, stops, pin_nets)
    toggling |= set(lifters)
    # net -> the pin lifting it; plate net -> the resistor it is lifted through
    lifting = {**pin_nets, **{n: pin for n, (pin, _) in lifters.items()}} if lifters else pin_nets
    through = {n: resistor for n, (_, resistor) in lifters.items()}
    pin_labels = {p.label for p in pin_nets.values()}
    seen: set[str] = set()
    branches = []
    plans: dict = {}        # (anode end, cathode end) -> how _classify drove the first string

    def other(e: Element, net: str) -> str:
        return e.nodes[1] if e.nodes[0] == net else e.nodes[0]

    by_ends: dict[tuple[str, str], list[Element]] = {}
    for led in leds.values():
        by_ends.setdefault(tuple(led.element.nodes), []).append(led.element)

    def parallel_group(led_el: Element, net_a: str, net_k: str) -> list[Element]:
        return [led_el] + [e for e in by_ends.get((net_a, net_k), ()) if e is not led_el and e.key not in seen]

    def walk(net: str, came: set[str]):
        """From a net outward through series elements; returns (end net, path, stages)."""
        path, stages = [], []
        while net not in stops:
            # the one terminal on the net not yet walked (none or several: the walk ends)
            e = None
            for x, _ in terminals.get(net, ()):
                if x.key not in came:
                    if e is not None:
                        e = None
                        break
                    e = x
            if e is None:
                break
            if len(e.nodes) != 2 or not (e.kind in SERIES_KINDS or _is_wire(e)):
                break
            came.add(e.key)
            path.append(e)
            if e.kind == "D":
                stages.append([e])
            net = other(e, net)
        return net, path, stages

    def region(start: Element):
        """The nets reachable from an LED through R, L, D, C and wires, short of rails, pins
        and ground; the elements on them; and what, if anything, makes it unsolvable here."""
        nets, elements, problem = set(), {start.key: start}, None
        todo = [n for n in start.nodes if n not in stops]
        nets.update(todo)
        while todo:
            net = todo.pop()
            for e, _ in terminals.get(net, []):
                if e.key in elements:
                    continue
                elements[e.key] = e
                if e.kind in "RLDC" and len(e.nodes) == 2 or _is_wire(e):
                    for n in e.nodes:
                        if n not in stops and n not in nets:
                            nets.add(n)
                            todo.append(n)
                elif problem is None:
                    waveform = e.source.waveform.kind.upper() if (
                        e.kind in "VI" and e.source is not None and e.source.waveform is not None) else None
                    if waveform is not None:
                        # a source with a waveform drc does not drive a branch with (PWL, SIN, ...)
                        problem = (f"{start.name}'s circuit reaches {e.name}, a {waveform} source, which "
                                   "drc solves neither as a rail nor as a pin: give it a [supply] "
                                   "table with its range, or make it DC or PULSE")
                    else:
                        what = ("a black-box part" if e.kind == "X" else
                                f"{'an' if e.kind in 'AEFHILMNORSX' else 'a'} {e.kind} element")
                        problem = f"{start.name}'s circuit reaches {what}, {e.name}, which drc cannot solve"
        return nets, list(elements.values()), problem

    for key, led in leds.items():
        if key in seen:
            continue
        e = led.element
        a, k = e.nodes
        group = parallel_group(e, a, k)
        came = {g.key for g in group}
        anode_end, up_path, up_stages = walk(a, set(came))
        came2 = came | {x.key for x in up_path}
        cathode_end, down_path, down_stages = walk(k, came2)
        path = list(reversed(up_path)) + group + down_path
        stages = list(reversed(up_stages)) + [group] + down_stages
        if (_STRING_SHORTCUT and anode_end in stops and cathode_end in stops
                and (len(group) == 1 or a not in stops or k not in stops)):
            # both walks reached a rail, a pin or ground through nets of exactly two
            # terminals each (a walk ends at any other net), so the region around the LED
            # is the string itself: no capacitor, no other part, nothing unsolvable. (LEDs
            # side by side straight across two stops are no string: the region of one of
            # them, which stops at those nets, holds it alone.)
            is_string = True
        else:
            r_nets, r_elements, problem = region(e)
            dc_elements = [x for x in r_elements if x.kind != "C"]
            pumped = [x for x in r_elements if x.kind == "C" and (x.nodes[0] in toggling or x.nodes[1] in toggling)]
            is_string = problem is None and not pumped and {x.key for x in dc_elements} == {x.key for x in path}
        region_leds = [leds[x.key] for x in r_elements if x.key in leds] if not is_string else \
            [leds[d.key] for st in stages for d in st if d.key in leds]
        seen.update(l.element.key for l in region_leds)
        if is_string:
            string_elements, string_nets = path, sorted({n for x in path for n in x.nodes})
        else:
            string_elements = [x for x in r_elements]
            string_nets = sorted(r_nets | {n for x in r_elements for n in x.nodes if n in stops})
        branch = Branch(id=e.name, leds=region_leds, stages=stages if is_string else [],
                        elements=string_elements, resistors=[x for x in string_elements if x.kind == "R"],
                        nets=string_nets, anode_net=anode_end, cathode_net=cathode_end,
                        drive="unknown", source=None)
        if is_string:
            if any(x.kind == "L" for x in path):
                branch.note = _string_inductance_fails(branch, pin_nets)
            if branch.note is None:
                _classify_alike(branch, rail_nets, pin_nets, corners, plans)
            if branch.drive == "unknown" and branch.note is None:
                branch.note = (f"{e.name}'s string runs from net {anode_end} to net {cathode_end}; "
                               "neither end is a rail, a port pin or ground")
        elif pumped and problem is None:
            _pump_branch(branch, r_nets, r_elements, region_leds, pin_nets, rail_nets, toggling,
                         pin_labels, lifting, through, loads)
        elif problem:
            branch.note = problem
        else:
            branch.network = _NetworkRegion(sorted(r_nets), dc_elements)
            _classify_network(branch, rail_nets, pin_nets, corners)
        branches.append(branch)
    if loads:
        _with_pin_loads(branches, loads, rail_nets, pin_nets, corners, stops)
    return _merge_shared_pins(branches, rail_nets, pin_nets, corners, stops)


def _merge_shared_pins(branches, rail_nets, pin_nets, corners, stops) -> list[Branch]:
    """Strings on one pin share its output resistance: they are solved together, as one
    network, so each sees the pin's level after the others' current."""
    # a union-find over the branches that share a pin (most share none: they stay out of
    # it, and a branch not in `parent` is its own root)
    parent: dict[int, int] = {}
    shared: set[int] = set()

    def find(x):
        while parent.get(x, x) != x:
            up = parent[x]
            parent[x] = parent.get(up, up)
            x = parent[x]
        return x

    owner: dict[str, int] = {}
    for b in branches:
        if b.pump_region is not None or not b.phases:
            continue
        for p in [p for p in (b.pin, b.sink_pin) if p is not None] + list(b.network_pins):
            if p.output_resistance_ohm <= 0:
                continue
            if p.label in owner:
                first = owner[p.label]
                shared.update((id(b), first))
                parent[find(id(b))] = find(first)
            else:
                owner[p.label] = id(b)
    if not shared:
        return list(branches)
    groups: dict[int, list[Branch]] = {}
    for b in branches:
        if id(b) in shared:
            groups.setdefault(find(id(b)), []).append(b)
    out = []
    for b in branches:
        group = groups[find(id(b))] if id(b) in shared else None
        if group is None or len(group) == 1:
            out.append(b)
            continue
        if b is not group[0]:
            continue
        elements, seen = [], set()
        for g in group:
            for x in g.elements:
                if x.key not in seen:
                    seen.add(x.key)
                    elements.append(x)
        nets = sorted({n for x in elements for n in x.nodes})
        merged = Branch(id=group[0].id, leds=[l for g in group for l in g.leds], stages=[],
                        elements=elements, resistors=[x for x in elements if x.kind == "R"],
                        nets=nets, anode_net=group[0].anode_net, cathode_net=group[0].cathode_net,
                        drive="unknown", source=None)
        merged.network = _NetworkRegion([n for n in nets if n not in stops],
                                        [x for x in elements if x.kind != "C"])
        _classify_network(merged, rail_nets, pin_nets, corners)
        out.append(merged)
    return out


def _lifted_through_resistors(toggling: set[str], terminals, stops, pin_nets) -> dict:
    """Nets that a toggling pin lifts through one series resistor: the net's only other
    terminals are capacitors, so it is a pumping capacitor's plate behind a resistor that
    limits the pin's current (what pin-overcurrent's fix adds). Each such net maps to its
    pin, which a pump there is lifted by, and the resistor; the model solves the resistor
    in the network."""
    lifted = {}
    for net in toggling:
        for e, _ in terminals.get(net, ()):
            if e.kind != "R" or len(e.nodes) != 2:
                continue
            plate = e.nodes[1] if e.nodes[0] == net else e.nodes[0]
            if plate in stops or plate in lifted:
                continue
            others = [x for x, _ in terminals.get(plate, ()) if x.key != e.key]
            if others and all(x.kind == "C" and len(x.nodes) == 2 for x in others):
                lifted[plate] = (pin_nets[net], e)
    return lifted


def _pump_branch(branch, r_nets, r_elements, region_leds, pin_nets, rail_nets, toggling,
                 pin_labels, lifting, through, loads=None) -> None:
    from drc.pumps import PumpRegion, classify
    touched = sorted({n for x in r_elements for n in x.nodes})
    if loads:           # what else the region's pins drive (_pin_loads) loads them in the model
        have = {x.key for x in r_elements}
        extra = [x for n in touched if n in pin_nets and n in loads for x in loads[n] if x.key not in have]
        if extra:
            r_elements = r_elements + extra
            touched = sorted({n for x in r_elements for n in x.nodes})
    region_pins = [pin_nets[n] for n in touched if n in pin_nets]
    region_rails = [rail_nets[n] for n in touched if n in rail_nets]
    region = PumpRegion(sorted(r_nets), r_elements, region_pins, region_rails, region_leds)
    region.pumps = classify(r_elements, lifting, rail_nets, toggling, pin_labels, through=through,
                            leds={l.element.key for l in region_leds})
    for pump in region.pumps:
        pump.region = region
    branch.drive = "pump"
    branch.pump_region = region
    branch.source = region.pumps[0].id if region.pumps else None
    branch.elements = r_elements
    branch.resistors = [x for x in r_elements if x.kind == "R"]
    toggles = {p.frequency_Hz for p in region_pins if p.drive == "toggle"}
    if len(toggles) > 1:
        branch.note = (f"{branch.id}'s pump is lifted by pins at different frequencies "
                       f"({', '.join(f'{f:g} Hz' for f in sorted(toggles))}), which drc does not model")
    elif not region.pumps:
        branch.note = f"{branch.id} is fed through a capacitor from a toggling pin, in no pump drc recognises"


def _solve_pump_branch(b: Branch, corners: Corners, flat: FlatDesign) -> None:
    """The pump-fed LED's figures from the periodic model. A board repeats a few pump cells
    many times: a cell identical to one solved before (`_pump_key`) takes its result under
    its own names, as drc.pumps would give it, without building its network again."""
    from drc.pumps import result_for_twin, solve_on_own_corners
    region = b.pump_region
    key, nets = _pump_key(region, corners, flat)
    known = PUMP_SOLUTIONS.get(key)
    if known is None:
        try:
            result = solve_on_own_corners(region, corners, lambda e: diode_params(flat, e))
        except (ValueError, FloatingPointError, np.linalg.LinAlgError) as error:
            b.note = f"{b.id}: the pump model could not solve this circuit ({error})"
            return
        # each LED's forward voltage at its average current, in the order of region.leds
        forward = [voltage_at_current(led.params, np.maximum(result.diode_average_A[led.name], 1e-15),
                                      corners.temperature_K) for led in region.leds]
        PUMP_SOLUTIONS.put(key, (region, nets, result, forward))
    else:
        first, first_nets, first_result, forward = known
        result = result_for_twin(first_result, first, region, first_nets, nets)
        region.signature = first.signature
    region.result = result
    # every LED the pump feeds (the model solves them all; the first is its load)
    b.current_A = {led.name: result.diode_average_A[led.name] for led in region.leds}
    b.peak_current_A = {led.name: result.diode_peak_A[led.name] for led in region.leds}
    b.forward_V = {led.name: v for led, v in zip(region.leds, forward)}
    b.reverse_V = {led.name: np.maximum(result.diode_reverse_max_V.get(led.name, np.zeros(corners.count)), 0.0)
                   for led in region.leds}
    own_pins = {p.label for p in region.pins}
    b.pin_current_A = {label: np.maximum(result.pin_high_peak_A[label], result.pin_low_peak_A[label])
                       for label in result.pin_high_peak_A if label in own_pins}
    b.series_resistance_ohm = np.full(corners.count, sum(x.value or 0.0 for x in b.resistors)) * corners.resistor_factor


def _pump_key(region, corners: Corners, flat: FlatDesign):
    """(a key that two pump regions share only if the pump model sees them as one circuit
    under other names, the region's nets in the key's order). It holds every part in order
    with its value or diode parameters and its nets renamed by first appearance, the pins
    and rails in order with their drive and levels, the load and its ratings, the output
    net and the corner set; what drc.pumps builds the model network from."""
    canon = Canon()
    load = region.leds[0]
    leds = {led.element.key: led for led in region.leds}
    parts = []
    for x in region.elements:
        nodes = tuple(canon(n) for n in x.nodes)
        if x.kind == "D":
            led = leds.get(x.key)
            parts.append(("D", nodes, diode_params(flat, x), x.key == load.element.key,
                          led.params if led is not None else None))
        else:
            parts.append((x.kind, nodes, x.value))
    pins = tuple((canon(p.net), p.drive, p.supply, p.output_resistance_ohm, p.frequency_Hz, p.duty,
                  p.start_s, p.rest_low, value_key(p.high_V)) for p in region.pins)
    rails = tuple((canon(r.net), r.label, value_key(r.voltage_V)) for r in region.rails)
    nets = tuple(canon(n) for n in region.nets)
    output = canon(region.pumps[0].output_net if region.pumps else load.element.nodes[0])
    key = (tuple(parts), pins, rails, nets, output, float(load.visible_current_A), corners.serial)
    return key, list(canon.order)


@dataclass
class _NetworkRegion:
    nets: list[str]
    elements: list[Element]


def _dc_reach(b: Branch, stops) -> list[Element]:
    """The network's elements joined to its LEDs through nets that are not rails, pins or
    ground (`stops`): those the LEDs' steady currents can flow through, a capacitor being
    open. What lies beyond a capacitor alone changes no DC solution of the LEDs."""
    by_net: dict[str, list[Element]] = {}
    for x in b.network.elements:
        for n in x.nodes:
            by_net.setdefault(n, []).append(x)
    reached = {led.element.key: led.element for led in b.leds}
    _spread(reached, [n for led in b.leds for n in led.element.nodes if n not in stops],
            lambda n: by_net.get(n, ()), stops)
    return list(reached.values())


def _spread(found: dict, todo: list, elements_on, stops) -> None:
    """Grows `found` (key -> element) from the nets in `todo`, short of `stops`: every
    element on a reached net joins it, and its other nets are reached in turn."""
    nets = set(todo)
    while todo:
        for x in elements_on(todo.pop()):
            if x.key not in found:
                found[x.key] = x
                for n in x.nodes:
                    if n not in stops and n not in nets:
                        nets.add(n)
                        todo.append(n)


SETTLED_SHARE = 0.02     # a capacitor or inductor settles within a phase if its time constant
                         # (bounded from above) is this share of the phase at most. Measured
                         # against ngspice .tran: the phase-by-phase answer is then off by
                         # some 0.9 times the share for an RC filter before the LED, 0.7 times
                         # for an inductor in its string, so within the 2 % the analysis holds
                         # to (5 % once let an RC filter's LED through 3.2 % off)


def _phases_fail(b: Branch, rail_nets, pin_nets, region_pins) -> str | None:
    """Why a region's phases of its toggling pins cannot be solved one by one at DC, each
    capacitor open and each inductor a short, or None. Three ways:

    - the LEDs' steady circuit (_dc_reach) reaches no rail and no pin: what drives them
      comes through a capacitor from a toggling pin, which a DC solution (0 A) cannot see;
    - a capacitor does not settle early in the shortest phase, so it smooths the drive (an
      RC filter into an LED from a PWM pin gives the LED a steady, lower current, where
      phase-by-phase solutions give it the pin's full current in the high phase). Its time
      constant is bounded from above by the capacitor times the resistance its plates see
      with every diode open, the rails shorted to ground and each pin through its output
      resistance;
    - an inductor's current does not settle early in it: its time constant L / R is
      bounded from above with the least R it can see, every diode conducting (a short)."""
    toggling = [p for p in region_pins if p.drive == "toggle"]
    if not toggling:
        return None
    drives = set(rail_nets) | set(pin_nets)
    if not any(n in drives for x in _dc_reach(b, drives | {GROUND}) for n in x.nodes):
        capacitors = ", ".join(x.name for x in b.elements if x.kind == "C")
        return (f"{b.id} is fed from {', '.join(p.label for p in toggling)} only through "
                f"{capacitors}: drc models a capacitor-fed LED only as a pump, whose capacitor "
                "has a plate on a toggling pin, or behind one series resistor from it")
    toggling = [p for p in toggling if p.frequency_Hz]
    capacitors = [x for x in b.elements if x.kind == "C" and (x.value or 0.0) > 0]
    inductors = [x for x in b.elements if x.kind == "L" and len(x.nodes) == 2 and (x.value or 0.0) > 0]
    if not toggling or not (capacitors or inductors):
        return None
    phase = _shortest_phase(toggling)
    if phase <= 0:
        return None
    nets = sorted({n for x in b.elements for n in x.nodes} - {GROUND} - set(rail_nets))
    index = {n: i for i, n in enumerate(nets)}

    def port_of(x):
        port = np.zeros(len(nets))
        for n, sign in zip(x.nodes, (1.0, -1.0)):
            if n in index:
                port[index[n]] += sign
        return port

    if capacitors:
        G = _conductances(b.elements, index, pin_nets, diode_S=0.0)     # every diode open
        for cap in capacitors:
            port = port_of(cap)
            tau = cap.value * float(port @ np.linalg.solve(G, port))
            if tau > SETTLED_SHARE * phase:
                return _slow_words(cap.name, tau, toggling, phase)
    for coil in inductors:
        # its time constant L / R is greatest where R is least: every diode conducting (a
        # short), the resistance it sees with itself out of the circuit
        G = _conductances([x for x in b.elements if x is not coil], index, pin_nets, diode_S=1e3)
        port = port_of(coil)
        ohm = float(port @ np.linalg.solve(G, port))
        tau = coil.value / max(ohm, 1e-3)
        if tau > SETTLED_SHARE * phase:
            return _slow_words(coil.name, tau, toggling, phase)
    return None


def _shortest_phase(toggling) -> float:
    return min(min(p.duty, 1 - p.duty) / p.frequency_Hz for p in toggling)


def _slow_words(name: str, tau: float, toggling, phase: float) -> str:
    pins = ", ".join(p.label for p in toggling)
    return (f"{name}'s time constant, up to {format_si(tau, 's')}, is not short against "
            f"{pins}'s {format_si(phase, 's')} phase: it smooths the drive, which drc's "
            "phase-by-phase solution does not follow")


def _conductances(elements, index, pin_nets, diode_S: float) -> np.ndarray:
    """The nodal conductance matrix over `index`'s nets (rails and ground left out, that is,
    shorted to ground): resistors, inductors as shorts (1 kS), diodes as `diode_S`, each
    pin through its output resistance, and SPICE's GMIN so that no node floats."""
    G = np.eye(len(index)) * 1e-12
    for x in elements:
        if x.kind not in "RLD" or len(x.nodes) != 2:
            continue
        g = 1.0 / max(x.value or 0.0, 1e-3) if x.kind == "R" else (1e3 if x.kind == "L" else diode_S)
        if g == 0.0:
            continue
        a, c = (index.get(n) for n in x.nodes)
        for i, j in ((a, c), (c, a)):
            if i is not None:
                G[i, i] += g
                if j is not None:
                    G[i, j] -= g
    for n, pin in pin_nets.items():
        if n in index:
            G[index[n], index[n]] += 1.0 / max(pin.output_resistance_ohm, 1e-3)
    return G


def _string_inductance_fails(b: Branch, pin_nets) -> str | None:
    """For a plain string (one series path) with inductance, driven by a toggling pin: why
    its phases cannot be solved one by one at DC (as _phases_fail for networks), or None.
    Its time constant is at most the string's inductance over its resistors and pins'
    output resistances (the diodes' own resistance only shortens it)."""
    toggling = [pin_nets[n] for n in (b.anode_net, b.cathode_net)
                if n in pin_nets and pin_nets[n].drive == "toggle" and pin_nets[n].frequency_Hz]
    if not toggling:
        return None
    henry = sum(x.value or 0.0 for x in b.elements if x.kind == "L")
    ohm = sum(x.value or 0.0 for x in b.elements if x.kind == "R")
    ohm += sum(pin_nets[n].output_resistance_ohm for n in (b.anode_net, b.cathode_net) if n in pin_nets)
    phase = _shortest_phase(toggling)
    tau = henry / max(ohm, 1e-3)
    if phase <= 0 or tau <= SETTLED_SHARE * phase:
        return None
    names = ", ".join(x.name for x in b.elements if x.kind == "L")
    return _slow_words(names, tau, toggling, phase)


def _classify_network(b: Branch, rail_nets, pin_nets, corners: Corners) -> None:
    """Drive and phases of a region that is not a plain string."""
    touched = sorted({n for x in b.network.elements for n in x.nodes})
    rails = [rail_nets[n] for n in touched if n in rail_nets]
    region_pins = [pin_nets[n] for n in touched if n in pin_nets]
    if not rails and not region_pins:
        b.note = f"{b.id}'s circuit touches no rail and no port pin"
        return
    failing = _phases_fail(b, rail_nets, pin_nets, region_pins)
    if failing is not None:
        b.note = failing
        return
    if region_pins:
        b.drive, b.pin, b.source = "pin", region_pins[0], region_pins[0].label
    else:
        b.drive, b.source = "rail", max(rails, key=lambda s: s.nominal_V).label
    if rails:
        b.supply = max(rails, key=lambda s: s.nominal_V)
    b.network_pins = region_pins
    b.network_rails = rails
    states = list(itertools.product([True, False], repeat=len(region_pins)))
    # pins toggling at one frequency are high together as their timing says, not as their
    # duties multiplied would (three pins each high a third of the period, one after the
    # other, are never high together); the share of each state is measured on their
    # waveforms over one period (two toggling pins alone: high_share_with, below)
    toggles = [p for p in region_pins if p.drive == "toggle"]
    masks = None
    if (len(toggles) >= 2 and len({p.frequency_Hz for p in toggles}) == 1
            and not (len(region_pins) == 2 and len(toggles) == 2)):
        masks = [p._high_mask(toggles[0]) for p in region_pins]
    phases = []
    for state in states:
        share = 1.0
        for pin, high in zip(region_pins, state):
            if pin.drive == "toggle":
                share *= pin.duty if high else 1 - pin.duty
            elif pin.drive == "input":
                share *= 0.0
            else:
                share *= 1.0 if (pin.drive == "high") == high else 0.0
        if masks is not None and share > 0:     # (a static pin's wrong state, an input: 0)
            together = np.ones(len(masks[0]), dtype=bool)
            for mask, high in zip(masks, state):
                together &= mask if high else ~mask
            share = float(together.mean())
        if len(region_pins) == 2 and all(p.drive == "toggle" for p in region_pins):
            first, second = region_pins
            both = first.high_share_with(second, True)
            share = {(True, True): both, (True, False): first.duty - both,
                     (False, True): second.duty - both,
                     (False, False): 1 - first.duty - second.duty + both}[state]
        if share <= 1e-12:
            continue
        words = " and ".join(f"{p.label} {'high' if h else 'low'}" for p, h in zip(region_pins, state)) or "always"
        phases.append(Phase(share, np.zeros(corners.count), 0.0, words))
        phases[-1].pin_states = dict(zip([p.label for p in region_pins], state))
    b.phases = phases


def _end_voltage(net: str, rail_nets, pin_nets):
    if net == GROUND:
        return "ground", None
    if net in rail_nets:
        return "rail", rail_nets[net]
    if net in pin_nets:
        return "pin", pin_nets[net]
    return "other", None


_DRIVES: dict = {}      # one drive array per pair of ends: shared by the strings on them
_ZEROS: dict = {}


def _zeros(count: int) -> np.ndarray:
    found = _ZEROS.get(count)
    if found is None:
        found = _ZEROS[count] = np.zeros(count)
        found.setflags(write=False)
    return found


def _classify_alike(b: Branch, rail_nets, pin_nets, corners: Corners, plans: dict) -> None:
    """_classify, for strings between the same two nets done once: what it sets depends on
    the two end nets alone (and the corners), save the notes, which name the string; a
    pair of ends whose first string got a note is classified afresh for each string."""
    ends = (b.anode_net, b.cathode_net)
    plan = plans.get(ends)
    if plan is None:
        _classify(b, rail_nets, pin_nets, corners)
        plans[ends] = False if b.note is not None else (
            b.reversed, b.drive, b.source, b.supply, b.pin, b.sink_pin, tuple(b.phases))
        return
    if plan is False:
        _classify(b, rail_nets, pin_nets, corners)
        return
    # the Phase objects are shared (a design is read-only once analysed), each list is its own
    b.reversed, b.drive, b.source, b.supply, b.pin, b.sink_pin, phases = plan
    b.phases = list(phases)


def _classify(b: Branch, rail_nets, pin_nets, corners: Corners) -> None:
    """Drive, phases and orientation of a plain string from what its two end nets are."""
    count = corners.count
    zero = _zeros(count)
    a_kind, a_part = _end_voltage(b.anode_net, rail_nets, pin_nets)
    k_kind, k_part = _end_voltage(b.cathode_net, rail_nets, pin_nets)
    # the orientation: a string whose anode end sits at ground and cathode at a rail or pin
    # is reversed: it never conducts, and takes the rail's voltage in reverse
    if a_kind == "ground" and k_kind in ("rail", "pin"):
        b.reversed = True
        a_kind, a_part, k_kind, k_part = k_kind, k_part, a_kind, a_part
    if a_kind == "other" or k_kind == "other" or (a_kind == "ground" and k_kind == "ground"):
        if a_kind == "ground" and k_kind == "ground":
            b.note = f"{b.id}'s string has both ends on ground"
        return
    sign = -1.0 if b.reversed else 1.0

    def level(kind, part, high: bool):
        if kind == "ground":
            return zero
        if kind == "rail":
            return part.voltage_V
        return part.high_V if high else zero

    def resistance(kind, part):
        return part.output_resistance_ohm if kind == "pin" else 0.0

    a_states = [True, False] if a_kind == "pin" else [True]
    k_states = [True, False] if k_kind == "pin" else [True]
    phases = []
    for ah in a_states:
        for kh in k_states:
            share = _share(a_kind, a_part, ah, k_kind, k_part, kh)
            if share <= 0:
                continue
            la, lk = level(a_kind, a_part, ah), level(k_kind, k_part, kh)
            drive_key = (id(la), id(lk), sign)
            v = _DRIVES.get(drive_key)
            if v is None or v[0] is not la or v[1] is not lk:
                arr = sign * (la - lk)
                v = _DRIVES[drive_key] = (la, lk, arr, arr.tobytes())
            v, v_bytes = v[2], v[3]
            words = " and ".join(w for w in (
                f"{a_part.label} {'high' if ah else 'low'}" if a_kind == "pin" else "",
                f"{k_part.label} {'high' if kh else 'low'}" if k_kind == "pin" else "") if w) or "always"
            phases.append(Phase(share, v, resistance(a_kind, a_part) + resistance(k_kind, k_part), words,
                                drive_key=v_bytes))
    if not phases:
        b.note = f"{b.id}: its pins are never in a state that drives it"
        return
    b.phases = phases
    if a_kind == "pin":
        b.drive, b.pin, b.source = "pin", a_part, a_part.label
        if a_part.drive == "input":
            b.note = f"{b.id} hangs on pin {a_part.label}, configured as an input"
    elif k_kind == "pin":
        b.drive, b.sink_pin, b.source = "pin", k_part, k_part.label
    else:
        b.drive, b.supply, b.source = "rail", a_part, a_part.label
    if a_kind == "rail":
        b.supply = a_part
    if k_kind == "pin" and a_kind == "pin":
        b.sink_pin = k_part
    if k_kind == "rail" and a_kind != "rail":
        b.supply = k_part


def _share(a_kind, a_part, a_high, k_kind, k_part, k_high) -> float:
    def alone(pin: Pin, high: bool) -> float:
        if pin.drive == "toggle":
            return pin.duty if high else 1 - pin.duty
        if pin.drive == "input":
            return 0.0
        return 1.0 if (pin.drive == "high") == high else 0.0
    if a_kind == "pin" and k_kind == "pin":
        if a_part.drive == "input" or k_part.drive == "input":
            return 0.0
        share = a_part.high_share_with(k_part, k_high)
        return share if a_high else (alone(k_part, k_high) - share)
    if a_kind == "pin":
        return alone(a_part, a_high)
    if k_kind == "pin":
        return alone(k_part, k_high)
    return 1.0


_DIODE_PARAMS: dict = {}


def diode_params(flat: FlatDesign, e: Element) -> DiodeParams:
    """A diode element's SPICE parameters from its .model (SPICE defaults where none)."""
    model = flat.models.get(e.model) if e.model else None
    key = (id(model), e.value)
    found = _DIODE_PARAMS.get(key)
    if found is None or found[0] is not model:
        found = (model, DiodeParams.from_model(model.params if model else {}, e.value or 1.0))
        _DIODE_PARAMS[key] = found
    return found[1]


def solve_branch(b: Branch, corners: Corners, flat: FlatDesign) -> None:
    """Operating point of a branch in each phase of its drive, at every corner. Identical
    strings (the same diodes, resistance, drive and phases at the same corners) are solved
    once (STRING_SOLUTIONS)."""
    if not b.phases:
        return
    if b.network is not None:
        return _solve_network_branch(b, corners, flat)
    solve_strings([b], corners, flat)


def solve_strings(branches: list[Branch], corners: Corners, flat: FlatDesign) -> None:
    """solve_branch for many plain strings at once (those with phases and no network).

    A board repeats a few indicator cells thousands of times: each distinct string (its key:
    everything the solution depends on) is solved once, and the distinct strings of one set
    of diodes are solved together, every phase of every one of them in one solve_string call
    over their corners laid end to end. solve_string works element by element (each element
    iterates until it alone converges), so a string's numbers are those it would get solved
    on its own."""
    plans = []                  # (branch, its key's slot, its LEDs' parameters)
    slots: dict = {}            # key -> index into `known`
    known: list = []            # each distinct key's solution (None until solved)
    pending: dict = {}          # key -> (branch, stages, led_params): solved below
    resistances: dict = {}      # total ohm -> at every corner, shared (read-only)
    for b in branches:
        key, stages, led_params = _string_key(b, corners, flat, resistances)
        slot = slots.get(key)
        if slot is None:
            slot = slots[key] = len(known)
            known.append(STRING_SOLUTIONS.get(key))
            if known[slot] is None:
                pending[key] = (b, [list(st) for st in stages], led_params)
        plans.append((b, slot, led_params))
    if pending:
        for key, solution in _solve_distinct_strings(pending, corners).items():
            known[slots[key]] = solution
            STRING_SOLUTIONS.put(key, solution)
    for b, slot, led_params in plans:
        _take_string_solution(b, known[slot], led_params)


def _string_key(b: Branch, corners: Corners, flat: FlatDesign, resistances: dict):
    """(the key of a string's solution, its stages' diode parameters (a tuple of tuples), its
    LEDs' parameters by element key); sets the branch's series resistance at every corner.

    Strings of the same total resistance share one read-only array of it (`resistances`, by
    the total and its sign, for a -0.0): a board has a few values and thousands of strings,
    and an array over hundreds of corners for each would cost more than all the rest."""
    total = sum((x.value or 0.0) for x in b.resistors)
    shared_key = (total, math.copysign(1.0, total))
    shared = resistances.get(shared_key)
    if shared is None:
        # (the resistor factor is a float array over the corners, so this is one already)
        resistance = total * corners.resistor_factor
        resistance.setflags(write=False)
        shared = resistances[shared_key] = (resistance, float(resistance[corners.nominal]))
    b.series_resistance_ohm, nominal_ohm = shared
    led_params = {l.element.key: l.params for l in b.leds}
    stages = b.stages
    if len(stages) == 1 and len(stages[0]) == 1 and len(b.leds) == 1 \
            and stages[0][0] is b.leds[0].element:
        # the common string of one LED: the loop below, written out
        params = ((b.leds[0].params,),)
        marks = ((True,),)
    else:
        params = tuple(tuple(led_params[d.key] if d.key in led_params else diode_params(flat, d)
                             for d in st) for st in stages)
        marks = tuple(tuple(d.key in led_params for d in st) for st in stages)
    key = (params, nominal_ohm, corners.serial,
           tuple((ph.share, ph.drive_key or value_key(ph.drive_V), ph.extra_resistance_ohm)
                 for ph in b.phases),
           marks, b.reversed, b.pin is not None, b.sink_pin is not None)
    return key, params, led_params


def _solve_distinct_strings(pending: dict, corners: Corners) -> dict:
    """key -> (per LED (average, peak, forward, reverse) at every corner, the lit phase, the
    pins' peak current, the number of LEDs) for each pending string, each on its own rails'
    corners (Corners.reduce) and spread back to every corner."""
    t = corners.temperature_K
    jobs = []                   # (key, branch on its own corners, stages, led_params, inverse)
    batches: dict = {}          # the stages' diodes -> [(job, phase, drive V, resistance)]
    for key, (b, stages, led_params) in pending.items():
        labels = {b.supply.label} if b.supply is not None else set()
        labels |= {p.supply for p in (b.pin, b.sink_pin) if p is not None and p.supply}
        sel, inverse = corners.reduce(sorted(labels))
        small = Branch(b.id, b.leds, b.stages, b.elements, b.resistors, b.nets, b.anode_net,
                       b.cathode_net, b.drive, b.source, reversed=b.reversed,
                       phases=[Phase(ph.share, ph.drive_V[sel], ph.extra_resistance_ohm, ph.words)
                               for ph in b.phases])
        small.series_resistance_ohm = b.series_resistance_ohm[sel]
        job = len(jobs)
        jobs.append((key, small, corners.subset(sel), stages, led_params, inverse, t[sel],
                     [None] * len(b.phases)))
        batch = batches.setdefault(key[0], [])
        for index, phase in enumerate(small.phases):
            batch.append((job, index, phase.drive_V,
                          small.series_resistance_ohm + phase.extra_resistance_ohm))
    for items in batches.values():
        stages = jobs[items[0][0]][3]
        sol = _solve_merged(np.concatenate([v for _, _, v, _ in items]),
                            np.concatenate([r for _, _, _, r in items]),
                            stages, np.concatenate([jobs[job][6] for job, _, _, _ in items]))
        start = 0
        for job, index, v, _ in items:
            cut = slice(start, start + v.shape[0])
            start = cut.stop
            jobs[job][7][index] = (sol.current_A[cut],
                                   [[i[cut] for i in st] for st in sol.diode_current_A],
                                   [[f[cut] for f in st] for st in sol.forward_V])
    out = {}
    for key, small, sub, stages, led_params, inverse, _, solutions in jobs:
        per_led, lit, pin_total = _tally_string_phases(small, sub, solutions, led_params)
        count = sum(1 for st in small.stages for d in st if d.key in led_params)
        out[key] = ([tuple(v[inverse] for v in entry) for entry in per_led], lit,
                    pin_total[inverse], count)
    return out


def _take_string_solution(b: Branch, known, led_params) -> None:
    """A string's figures from its (shared) solution, under its own LEDs' names."""
    per_led, lit_phase, pin_total, count = known
    if count == 1:       # the common string of one LED (b.leds: the string's LEDs in order)
        name = b.leds[0].name
        current, peak, forward, reverse = per_led[0]
        b.current_A, b.peak_current_A = {name: current}, {name: peak}
        b.forward_V, b.reverse_V = {name: forward}, {name: reverse}
    else:
        names = [d.name for st in b.stages for d in st if d.key in led_params]
        b.current_A = {n: v[0] for n, v in zip(names, per_led)}
        b.peak_current_A = {n: v[1] for n, v in zip(names, per_led)}
        b.forward_V = {n: v[2] for n, v in zip(names, per_led)}
        b.reverse_V = {n: v[3] for n, v in zip(names, per_led)}
    b.lit_phase = lit_phase
    b.pin_current_A = {p.label: pin_total for p in (b.pin, b.sink_pin) if p is not None}


class _LedTally:
    """Per LED over the phases of its drive: the share-weighted average current, the peak,
    the forward voltage in the brightest phase, and the greatest reverse voltage."""

    def __init__(self, names, count: int):
        self.average = {n: np.zeros(count) for n in names}
        self.peak = {n: np.zeros(count) for n in names}
        self.forward = {n: np.zeros(count) for n in names}
        self.reverse = {n: np.zeros(count) for n in names}

    def add(self, name: str, share: float, current, forward_V, reverse_V) -> None:
        i = np.maximum(current, 0.0)
        self.average[name] += share * i
        self.forward[name] = np.where(i > self.peak[name], forward_V, self.forward[name])
        self.peak[name] = np.maximum(self.peak[name], i)
        self.reverse[name] = np.maximum(self.reverse[name], reverse_V)


def _solve_merged(drive_V, resistance, stages, t):
    """solve_string, with identical diodes in parallel taken as one of k times the area
    (exact: they share the stage's voltage and split its current evenly)."""
    from types import SimpleNamespace
    merged, counts = [], []
    for stage in stages:
        if len(stage) > 1 and all(d == stage[0] for d in stage):
            k = len(stage)
            d = stage[0]
            merged.append([DiodeParams(IS=d.IS * k, N=d.N, RS=d.RS / k, XTI=d.XTI, EG=d.EG,
                                       TNOM_C=d.TNOM_C, BV=d.BV, IBV=d.IBV * k)])
            counts.append(k)
        else:
            merged.append(stage)
            counts.append(0)
    if not any(counts):
        return solve_string(drive_V, resistance, stages, t)
    sol = solve_string(drive_V, resistance, merged, t)
    currents, forward = [], []
    for k, stage, i_list, v_list in zip(counts, stages, sol.diode_current_A, sol.forward_V):
        if k:
            currents.append([i_list[0] / k] * k)
            forward.append([v_list[0]] * k)
        else:
            currents.append(i_list)
            forward.append(v_list)
    return SimpleNamespace(current_A=sol.current_A, stage_V=sol.stage_V, diode_current_A=currents,
                           forward_V=forward)


def _tally_string_phases(b: Branch, corners: Corners, solutions, led_params):
    """Per LED (in string order): (average, peak, forward, reverse); the lit phase; the
    string's peak current (what its pins carry). solutions: per phase of b, the string's
    (current, diode currents, forward voltages) as _solve_merged gives them."""
    tally = _LedTally([l.name for l in b.leds], corners.count)
    pin_total = np.zeros(corners.count)
    lit_phase = 0
    best_share_current = -1.0
    for index, (phase, (current, diode_current, forward_V)) in enumerate(zip(b.phases, solutions)):
        total = np.maximum(current, 0.0)
        for si, st in enumerate(b.stages):
            for di, d in enumerate(st):
                if d.key not in led_params:
                    continue
                tally.add(d.name, phase.share, diode_current[si][di], forward_V[si][di],
                          -np.minimum(phase.drive_V, 0.0))
        nominal_current = float(total[corners.nominal])
        if nominal_current > best_share_current:
            best_share_current = nominal_current
            lit_phase = index
        pin_total = np.maximum(pin_total, total)
    if b.reversed:
        for name in tally.average:
            tally.average[name][:] = 0.0
            tally.peak[name][:] = 0.0
    names = [d.name for st in b.stages for d in st if d.key in led_params]
    return ([(tally.average[n], tally.peak[n], tally.forward[n], tally.reverse[n]) for n in names],
            lit_phase, pin_total)


def _network_key(b: Branch, corners: Corners, flat: FlatDesign):
    canon = Canon()
    led_keys = {l.element.key for l in b.leds}
    parts = []
    for x in b.network.elements:
        nodes = tuple(canon(n) for n in x.nodes)
        if x.kind == "D":
            params = next(l.params for l in b.leds if l.element.key == x.key) if x.key in led_keys \
                else diode_params(flat, x)
            parts.append(("D", nodes, params, x.key in led_keys))
        elif x.kind == "V":
            parts.append(("W", nodes))
        else:
            parts.append((x.kind, nodes, x.value))
    region = tuple(canon(n) for n in b.network.nets)
    pins = tuple((canon(p.net), value_key(p.high_V), p.output_resistance_ohm) for p in b.network_pins)
    rails = tuple((canon(r.net), value_key(r.voltage_V)) for r in b.network_rails)
    phases = tuple((ph.share, tuple(ph.pin_states.get(p.label, True) for p in b.network_pins))
                   for ph in b.phases)
    key = (tuple(parts), region, pins, rails, phases, value_key(corners.temperature_K),
           value_key(corners.resistor_factor))
    return key


def _solve_network_branch(b: Branch, corners: Corners, flat: FlatDesign) -> None:
    key = _network_key(b, corners, flat)
    names = [x.name for x in b.network.elements if x.kind == "D" and x.key in {l.element.key for l in b.leds}]
    known = NETWORK_SOLUTIONS.get(key)
    if known is not None:
        per_led, lit_phase, pin_peaks, note = known
        b.current_A = {n: v[0] for n, v in zip(names, per_led)}
        b.peak_current_A = {n: v[1] for n, v in zip(names, per_led)}
        b.forward_V = {n: v[2] for n, v in zip(names, per_led)}
        b.reverse_V = {n: v[3] for n, v in zip(names, per_led)}
        b.lit_phase = lit_phase
        b.pin_current_A = {p.label: v for p, v in zip(b.network_pins, pin_peaks)}
        if note:
            b.note, b.phases = note, []
        b.series_resistance_ohm = np.full(corners.count, sum((x.value or 0.0) for x in b.resistors)) * corners.resistor_factor
        return
    _solve_network_phases(b, corners, flat)
    NETWORK_SOLUTIONS.put(key, ([(b.current_A.get(n), b.peak_current_A.get(n), b.forward_V.get(n),
                                  b.reverse_V.get(n)) for n in names], b.lit_phase,
                                [b.pin_current_A.get(p.label) for p in b.network_pins],
                                b.note if not b.phases else None))


def _solve_network_phases(b: Branch, corners: Corners, flat: FlatDesign) -> None:
    t = corners.temperature_K
    count = corners.count
    region = b.network
    led_keys = {l.element.key: l for l in b.leds}
    resistors, diodes, names = [], [], []
    for x in region.elements:
        if x.kind == "R":
            resistors.append((x.nodes[0], x.nodes[1], (x.value or 0.0) * corners.resistor_factor))
        elif x.kind == "L" or _is_wire(x):
            resistors.append((x.nodes[0], x.nodes[1], 1e-6))
        elif x.kind == "D":
            params = led_keys[x.key].params if x.key in led_keys else diode_params(flat, x)
            diodes.append((x.nodes[0], x.nodes[1], params))
            names.append(x)
    b.series_resistance_ohm = np.full(count, sum((x.value or 0.0) for x in b.resistors)) * corners.resistor_factor
    tally = _LedTally([l.name for l in b.leds], count)
    pin_peak: dict[str, np.ndarray] = {}
    touched = {n for x in region.elements for n in x.nodes}
    best = -1.0
    from drc.network import NetworkError, solve_network
    pin_nets = [p.net for p in b.network_pins]
    links = [(p.net + "#source", p.net, np.full(count, max(p.output_resistance_ohm, 1e-3)))
             for p in b.network_pins]
    for index, phase in enumerate(b.phases):
        held = {GROUND: (0.0, 0.0)}
        for pin in b.network_pins:
            high = phase.pin_states.get(pin.label, True)
            held[pin.net + "#source"] = (pin.high_V if high else np.zeros(count), 0.0)
        for net in touched:
            if net in held or net in region.nets or net in pin_nets:
                continue
            rail = next((s for s in b.network_rails if s.net == net), None)
            if rail is None:
                b.note = f"{b.id}: its circuit touches net {net}, held by a second rail"
                b.phases = []
                return
            held[net] = (rail.voltage_V, 0.0)
        try:
            volts, currents = solve_network(region.nets + pin_nets, held, resistors + links, diodes, t)
        except NetworkError as error:
            b.note = f"{b.id}: {error}"
            b.phases = []
            return

        def v_of(net):
            if net in volts:
                return volts[net]
            return np.broadcast_to(np.asarray(held[net][0], dtype=float), (count,)) if net in held else np.zeros(count)

        for x, i in zip(names, currents):
            if x.key not in led_keys:
                continue
            vf = v_of(x.nodes[0]) - v_of(x.nodes[1])
            tally.add(x.name, phase.share, i, vf, -np.minimum(vf, 0.0))
        total = sum(np.maximum(i, 0.0) for x, i in zip(names, currents) if x.key in led_keys)
        if float(np.asarray(total)[corners.nominal]) > best:
            best = float(np.asarray(total)[corners.nominal])
            b.lit_phase = index
        for pin, (src, net, ohm) in zip(b.network_pins, links):
            drawn = np.abs(v_of(src) - v_of(net)) / ohm
            pin_peak[pin.label] = np.maximum(pin_peak.get(pin.label, np.zeros(count)), drawn)
    b.current_A, b.peak_current_A = tally.average, tally.peak
    b.forward_V, b.reverse_V = tally.forward, tally.reverse
    b.pin_current_A = pin_peak


def low_nominal_high(values: np.ndarray, nominal: int) -> dict[str, float]:
    """The contract's {low, nominal, high} of a per-corner array."""
    return {"low": float(values.min()), "nominal": float(values[nominal]),
            "high": float(values.max())}
