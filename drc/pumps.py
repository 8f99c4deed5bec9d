"""Charge pumps: recognised in the circuit graph from capacitors with one plate on a
toggling pin, classified (doubler, dickson, bootstrap), and solved with the periodic model
(drc.pumpmodel) at every corner, with the LED they feed as the load.

    pumps = find_pumps(region_elements, pins, supplies)      # topology only
    solution = solve_pump_region(...)                       # model results per corner
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from drc.design import GROUND, Element
from drc.memo import Canon, Memo, value_key
from drc.pumpmodel import DiodeBranch, PinDrive, PumpNetwork, RailDrive, simulate_periodic

WIRE_OHM = 1e-3


@dataclass
class Pump:
    """One pump: its pumping capacitors in ladder order, its diodes, its output net."""

    id: str                          # the first pumping capacitor's name
    topology: str                    # "doubler", "dickson", "bootstrap"
    stages: int
    capacitors: list[Element]        # the pumping capacitors, first stage first
    charge_diode: Element | None     # into the first pumped node
    transfer_diodes: list[Element]   # pumped node to pumped node, the last to the output
    reservoir: Element | None        # a capacitor from the output to ground
    output_net: str
    pins: list[str]                  # labels of the pins that lift it
    charge_from: str | None          # the rail's or pin's label the charge diode draws from
    elements: list[Element] = field(default_factory=list)
    # pin label -> the resistor through which that pin lifts a pumping capacitor, if any
    pin_resistors: dict[str, Element] = field(default_factory=dict)
    region: "PumpRegion | None" = None
    notes: list[str] = field(default_factory=list)

    @property
    def result(self):
        return self.region.result if self.region is not None else None


@dataclass
class PumpRegion:
    """The circuit one simulation covers: the pumps, the LED they feed and what joins them."""

    nets: list[str]
    elements: list[Element]
    pins: list          # analysis.Pin
    rails: list         # analysis.Supply
    leds: list          # analysis.Led
    pumps: list[Pump] = field(default_factory=list)
    result: object = None           # pumpmodel.PumpResult (first LED as the load)
    note: str | None = None
    signature: object = None        # the same for identical cells (drc.memo)


def classify(region_elements: list[Element], pin_nets: dict, rail_nets: dict,
             toggling: set | None = None, pin_labels: set | None = None,
             leds: set | None = None, through: dict | None = None) -> list[Pump]:
    """The pumps among a region's elements: chains of pumping capacitors joined by diodes.

    pin_nets maps a net to the pin on it, and also a plate net behind one series resistor
    from a toggling pin to that pin (such nets are in `toggling` too); `through` maps such
    a plate net to that resistor."""
    if toggling is None:
        toggling = {n for n, p in pin_nets.items() if p.drive == "toggle"}
    if pin_labels is None:
        pin_labels = {p.label for p in pin_nets.values()}
    caps = [e for e in region_elements if e.kind == "C" and len(e.nodes) == 2]
    # the LED is the load, never a charge or transfer diode
    diodes = [e for e in region_elements if e.kind == "D" and e.key not in (leds or ())]
    pumped: dict[str, Element] = {}
    for c in caps:
        a, b = c.nodes
        if a in toggling and b not in toggling and b != GROUND:
            pumped[b] = c
        elif b in toggling and a not in toggling and a != GROUND:
            pumped[a] = c

    def lifting_pin(c: Element) -> str:
        net = c.nodes[0] if c.nodes[0] in toggling else c.nodes[1]
        return pin_nets[net].label

    # the diodes as a directed graph, anode to cathode: a ladder is a path through it. Each
    # net's diodes out (and in) are grouped by the net at their other end, the groups in
    # order of first appearance (the order a networkx MultiDiGraph gives its edges in).
    out_of: dict[str, dict[str, list[Element]]] = {}
    into: dict[str, dict[str, list[Element]]] = {}
    for d in diodes:
        anode, cathode = d.nodes[0], d.nodes[1]
        if anode != cathode:
            out_of.setdefault(anode, {}).setdefault(cathode, []).append(d)
            into.setdefault(cathode, {}).setdefault(anode, []).append(d)

    def transfer_from(net):
        return [d for group in out_of.get(net, {}).values() for d in group]

    def charge_into(net):
        return [d for group in into.get(net, {}).values() for d in group]

    # a chain starts at a pumped node that no transfer diode from another pumped node feeds
    fed_from_pumped = {v for u in pumped for v in out_of.get(u, ())}
    pumps = []
    for start, cap in pumped.items():
        if start in fed_from_pumped:
            continue
        chain = [cap]
        transfers = []
        net = start
        while True:
            out = [d for d in transfer_from(net)]
            if not out:
                break
            d = out[0]
            transfers.append(d)
            net = d.nodes[1]
            if net in pumped and pumped[net] not in chain:
                chain.append(pumped[net])
                continue
            break
        charge = [d for d in charge_into(start) if d not in transfers]
        charge_diode = charge[0] if charge else None
        charge_from = None
        if charge_diode is not None:
            src = charge_diode.nodes[0]
            part = rail_nets.get(src) or pin_nets.get(src)
            charge_from = part.label if part is not None else None
        output = transfers[-1].nodes[1] if transfers else start
        # a reservoir: from the output to ground, or to a rail (the same to the pump's ripple)
        reservoir = next((c for c in caps if output in c.nodes and c.nodes[0] != c.nodes[1]
                          and all(n == output or n == GROUND or n in rail_nets for n in c.nodes)
                          and all(c is not x for x in chain)), None)
        if len(chain) >= 2:
            topology = "dickson"
        elif charge_diode is not None and transfers:
            topology = "doubler"
        else:
            topology = "bootstrap"
        pins = []
        pin_resistors = {}
        for c in chain:
            label = lifting_pin(c)
            if label not in pins:
                pins.append(label)
            plate = c.nodes[0] if c.nodes[0] in toggling else c.nodes[1]
            if through and plate in through:      # lifted through a series resistor
                pin_resistors[label] = through[plate]
        if charge_from is not None and charge_from not in pins and charge_from in pin_labels:
            pins.append(charge_from)
        elements = ([charge_diode] if charge_diode else []) + [x for pair in zip(chain, transfers + [None] * len(chain))
                                                                for x in pair if x is not None]
        for d in transfers[len(chain):]:
            elements.append(d)
        if reservoir is not None:
            elements.append(reservoir)
        elements.extend(r for r in pin_resistors.values() if r not in elements)
        pumps.append(Pump(id=cap.name, topology=topology, stages=len(chain), capacitors=chain,
                          charge_diode=charge_diode, transfer_diodes=transfers, reservoir=reservoir,
                          output_net=output, pins=pins, charge_from=charge_from, elements=elements,
                          pin_resistors=pin_resistors))
    return pumps


def network_of(region: PumpRegion, corners, diode_params, series_ohm: dict[str, float] | None = None,
               capacitor_scale: dict[str, float] | None = None,
               diode_override: dict[str, object] | None = None,
               frequency_scale: float = 1.0, sel=None) -> PumpNetwork:
    """The pump region as the periodic model's network, at every corner.

    series_ohm adds resistance in series with named pins (for fixes); capacitor_scale scales
    named capacitors; diode_override replaces named diodes' parameters.
    """
    pick = (lambda a: np.asarray(a)[sel]) if sel is not None else (lambda a: a)
    series_ohm = series_ohm or {}
    capacitor_scale = capacitor_scale or {}
    diode_override = diode_override or {}
    nodes = set(region.nets)
    pins, rails = [], []
    clock = next((p.frequency_Hz for p in region.pins if p.drive == "toggle"), None)
    for pin in region.pins:
        r = pin.output_resistance_ohm + series_ohm.get(pin.label, 0.0)
        nodes.add(pin.net)
        if pin.drive == "toggle":
            pins.append(PinDrive(pin.label, pin.net, pick(pin.high_V), r,
                                 pin.frequency_Hz * frequency_scale, duty=pin.duty, inverted=False,
                                 delay_s=pin.start_s / frequency_scale, rest_low=pin.rest_low))
        elif pin.drive in ("high", "low") and clock:
            # a pin held high or low: a pin of the model that never toggles, so that its
            # current (steady, and its surge from rest) is the model's too
            pins.append(PinDrive(pin.label, pin.net, pick(pin.high_V), r, clock * frequency_scale,
                                 duty=1.0 if pin.drive == "high" else 0.0))
        elif pin.drive != "input":                  # an input drives nothing
            level = pick(pin.high_V) if pin.drive == "high" else np.zeros(corners.count)
            rails.append(RailDrive(pin.label, pin.net, level, r))
    for rail in region.rails:
        nodes.add(rail.net)
        rails.append(RailDrive(rail.label, rail.net, pick(rail.voltage_V), 0.0))
    resistors, capacitors, diodes = [], [], []
    for e in region.elements:
        a, b = e.nodes
        if e.kind == "R":      # a 0 ohm link is a wire
            resistors.append((a, b, max(e.value or 0.0, WIRE_OHM) * corners.resistor_factor))
        elif e.kind in "LV":
            resistors.append((a, b, WIRE_OHM))
        elif e.kind == "C":
            capacitors.append((a, b, (e.value or 0.0) * corners.capacitor_factor
                               * capacitor_scale.get(e.key, 1.0)))
        elif e.kind == "D":
            diodes.append(DiodeBranch(e.name, a, b, diode_override.get(e.key) or diode_params(e)))
    nodes.discard(GROUND)
    return PumpNetwork(nodes=sorted(nodes), pins=pins, rails=rails, resistors=resistors,
                       capacitors=capacitors, diodes=diodes)


SOLUTIONS = Memo(limit=1024)


def expand_result(result, inverse):
    """A result on reduced corners, its per-corner figures spread back over every corner.
    Waveforms (corner x time) and the steady state's capacitor voltages stay on the reduced
    corners: `corner_index[i]` is the row that stands for corner i."""
    import copy
    import dataclasses
    out = copy.copy(result)
    for f in dataclasses.fields(result):
        value = getattr(result, f.name)
        if isinstance(value, np.ndarray) and value.ndim == 1 and f.name not in (
                "startup_time_s", "waveform_time_s"):
            setattr(out, f.name, value[inverse])
        elif isinstance(value, dict) and f.name in ("pin_high_peak_A", "pin_low_peak_A",
                                                     "diode_reverse_max_V", "startup_surge_A",
                                                     "diode_average_A", "diode_peak_A"):
            setattr(out, f.name, {k: v[inverse] for k, v in value.items()})
    out.corner_index = inverse
    return out


def solve_on_own_corners(region: PumpRegion, corners, diode_params, steady: bool = False,
                         warm: bool = False, **changes):
    """The periodic model on the corners of the region's own rails only, its per-corner
    figures spread back over every corner (the start-up in its quick, linearised form).

    warm: the search for the steady state starts from the region's own solved steady state
    (a re-run with a change). steady: the steady state alone (warm too); the start-up
    figures are NaN."""
    labels = {r.label for r in region.rails} | {p.supply for p in region.pins if p.supply}
    sel, inverse = corners.reduce(sorted(labels), capacitors=True)
    result = simulate(region, corners.subset(sel), diode_params, fast=True, sel=sel,
                      start_x=steady_start(region, sel) if steady or warm else None,
                      steady_only=steady, **changes)
    return expand_result(result, inverse)


def steady_start(region: PumpRegion, sel) -> np.ndarray | None:
    """The capacitor voltages at the start of the region's solved steady period, at the
    corners `sel`; None where the region has no result yet (the model then starts where it
    always does)."""
    result = region.result
    if result is None or getattr(result, "steady_x", None) is None:
        return None
    rows = getattr(result, "corner_index", None)
    return result.steady_x[rows[sel] if rows is not None else sel]


def simulate(region: PumpRegion, corners, diode_params, fast: bool = False,
             start_x=None, steady_only: bool = False, **changes):
    """Run the periodic model on a region; the first LED is the load. Identical pump cells
    (the same parts, values and drive under other names) are simulated once.

    start_x, capacitor voltages at each of `corners` (say, the steady state before a
    change), is where the search for the steady state starts; steady_only skips the
    start-up, whose figures are then NaN (see drc.pumpmodel.simulate_periodic)."""
    network = network_of(region, corners, diode_params, **changes)
    load = region.leds[0]
    output = region.pumps[0].output_net if region.pumps else load.element.nodes[0]
    options = {"simulated_startup_periods": 3} if fast else {}
    started = None if start_x is None else value_key(np.asarray(start_x, float))
    if started is not None or steady_only:
        options.update(start_x=start_x, steady_only=steady_only)
    key, canon = _signature(network, corners, output, load,
                            (fast, steady_only, started) if started is not None or steady_only else fast)
    if start_x is None and (not changes or set(changes) == {"sel"}):
        region.signature = key        # identical cells share it: fixes are worked out once
    known = SOLUTIONS.get(key)
    if known is not None:
        return _renamed(known, network, canon)
    result = simulate_periodic(network, corners.temperature_K, output, load.element.name,
                               load.visible_current_A, **options)
    SOLUTIONS.put(key, (result, network, canon))
    return result


def _signature(network: PumpNetwork, corners, output: str, load, fast: bool):
    canon = Canon()
    pins = tuple((canon(p.node), value_key(p.high_V), value_key(p.output_resistance_ohm),
                  p.frequency_Hz, p.duty, p.inverted, p.delay_s, p.rest_low) for p in network.pins)
    rails = tuple((canon(r.node), value_key(r.voltage_V), value_key(r.output_resistance_ohm))
                  for r in network.rails)
    resistors = tuple((canon(a), canon(b), value_key(v)) for a, b, v in network.resistors)
    capacitors = tuple((canon(a), canon(b), value_key(v)) for a, b, v in network.capacitors)
    diodes = tuple((canon(d.anode), canon(d.cathode), d.params, d.name == load.element.name)
                   for d in network.diodes)
    nodes = tuple(sorted(str(canon(n)) for n in network.nodes))
    key = (pins, rails, resistors, capacitors, diodes, nodes, canon(output),
           value_key(corners.temperature_K), float(load.visible_current_A), fast)
    return key, canon


def _renamed(known, network: PumpNetwork, canon: Canon):
    """A cached result under this network's own pin, diode and node names."""
    result, original, old_canon = known
    pin_map = {a.name: b.name for a, b in zip(original.pins, network.pins)}
    diode_map = {a.name: b.name for a, b in zip(original.diodes, network.diodes)}
    node_map = {old: canon.order[k] for old, k in old_canon.names.items() if k < len(canon.order)}
    return _with_names(result, pin_map, diode_map, node_map)


def result_for_twin(result, region: PumpRegion, twin: PumpRegion, nets, twin_nets):
    """`result`, solved for `region`, under the names of `twin`: a region of the same parts,
    values and drive in the same order, whose nets `twin_nets` stand where `nets` stand."""
    pin_map = {a.label: b.label for a, b in zip(region.pins, twin.pins)}
    diode_map = {a.name: b.name for a, b in zip(
        [e for e in region.elements if e.kind == "D"], [e for e in twin.elements if e.kind == "D"])}
    return _with_names(result, pin_map, diode_map, dict(zip(nets, twin_nets)))


def _with_names(result, pin_map, diode_map, node_map):
    """A shallow copy of a result with its per-pin, per-diode and per-node tables renamed
    (the arrays are shared: results are read-only)."""
    import copy
    out = copy.copy(result)
    for field_name in ("pin_high_peak_A", "pin_low_peak_A", "startup_surge_A", "pin_current_A",
                       "startup_pin_current_A"):
        setattr(out, field_name, {pin_map.get(k, k): v for k, v in getattr(result, field_name).items()})
    for field_name in ("diode_reverse_max_V", "diode_average_A", "diode_peak_A", "diode_current_A"):
        setattr(out, field_name, {diode_map.get(k, k): v for k, v in getattr(result, field_name).items()})
    for field_name in ("waveform_V", "startup_V"):
        setattr(out, field_name, {node_map.get(k, k): v for k, v in getattr(result, field_name).items()})
    return out
