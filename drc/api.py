"""The public rule API (version 1): what a rule module imports, for built-in and house rules.

A rule is a module with a docstring (its long help, printed by `drc explain ID`: what it
finds, why it matters, how it is computed, an example, the fix, the sources), a
`RULE = Rule(...)` and a function `check(design, settings)` (or `check(design)`, when it
has no settings) that yields findings:

    '''What it finds: an indicator resistor below the house minimum.'''
    from drc.api import Rule, Setting, finding, format_quantity

    RULE = Rule(id="house-min-resistor", severity="warning",
                summary="indicator resistors of at least 100 ohm",
                settings={"least": Setting(100.0, unit="ohm")})

    def check(design, settings):
        for branch in design.branches:
            for r in branch.resistors:
                if r.value < settings["least"]:
                    yield finding(r, f"{r.name} is {format_quantity(r.value, 'ohm')}")

A rule module imports nothing of drc but this module (numpy and the standard library are
fine). The built-in rules in drc.rules follow the same law (tests/test_rule_api.py).

Registering a rule: `Rule(id, severity, summary, sources=(), settings={}, help="")`.
  id        lower-case words joined by "-"; unique among every rule loaded (status 2 if not)
  severity  the default: "error", "warning" or "note"; the config may change it
  summary   one line, for `drc rules` and SARIF's shortDescription
  help      the long help; empty: the module's docstring (the usual way)
  sources   the published sources the rule rests on, one string each
  settings  name -> default, or name -> Setting(default, unit=..., choices=..., help=...)

Settings (the config's `[rule."ID"]` table; `severity` and `enabled` are the runner's):
  A setting declared `Setting(100.0, unit="ohm")` is given in the config as a quantity,
  `least = "220 ohm"`, and reaches `check` as the SI float 220.0. Units: "V", "A", "ohm",
  "F", "Hz", "s", "degC" (°C, as the report gives temperatures), "%" (a share: "50 %" is
  0.5), "V/K". A plain default (`{"share": 0.1}`) takes a value of its own type from the
  config (a float takes any number). Unknown rule ids, unknown settings and wrong types are
  status-2 errors at the key's `file:line:col`, with the closest name suggested.

Units: every number a rule reads or writes is an SI float in base units (volts, amperes,
ohms, farads, henries, seconds, hertz; temperatures in degrees Celsius, as the report gives
them, with `corners.temperature_K` for the diode law); settings arrive as SI floats too.
`format_quantity(0.0005, "A")` gives "500 µA" for messages; the report's own formatting.

Findings: `finding(at, message, elements=(), nets=(), corner=None, values={}, fix="",
caution="", severity=None)`. `at` is an element (the finding sits at its card) or a
`Location(path, line, column)`; `elements` defaults to `[at.name]`; `corner` is
`corner(design, i)` for the corner index `i` it happened at; `values` are SI floats whose
keys end in their unit (`current_A`); `severity` None takes the rule's (after the config).

The design a rule receives (read-only: change nothing in it; every rule sees the same one):
see the `Design` protocol below for its attributes, and `Element`, `Branch`, `Led`, `Pin`,
`Supply`, `Pump`, `PumpResult` and `Corners` for theirs. Arrays "at every corner" are numpy
arrays of length `design.corners.count`, one value per corner, index `corners.nominal`
the all-nominal corner; `worst_low(a)`/`worst_high(a)` give the index of the worst one.

Isolation: a house rule (from a folder or a pack) that fails to import, raises, yields
something other than a Finding, or runs past `[limits] house_rule_time` (default 10 s)
becomes one `house-rule-failed` finding naming its file and line; its own findings of that
run are dropped and every other rule still runs. Built-in rules are not isolated: a fault
in one is drc's own (exit status 3).

Versioning: API_VERSION is 1. Names may be added in a minor release; a name is removed or
its meaning changed only with a new API_VERSION. A rule that needs a newer API can say so:
`assert drc.api.API_VERSION >= 1`.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Iterable, Mapping, Protocol

from drc.errors import Location
from drc.units import format_si

API_VERSION = 1
SEVERITIES = ("error", "warning", "note")

# A Setting's unit -> the kind drc.quantities.parse_quantity reads it as.
SETTING_UNITS = {"V": "voltage", "A": "current", "ohm": "resistance", "F": "capacitance",
                 "Hz": "frequency", "s": "time", "degC": "temperature", "%": "fraction",
                 "V/K": "voltage_per_temperature"}

__all__ = ["API_VERSION", "SEVERITIES", "SETTING_UNITS", "Rule", "Setting", "Finding",
           "finding", "format_quantity", "Location", "Design", "worst_low", "worst_high",
           "corner", "corner_words", "branch_cautions", "needed_voltage",
           "series_resistor_advice", "format_resistance", "GROUND", "rerun_pump",
           "rerun_pump_variants", "schottky_params", "flicker_of_branch", "flicker", "preferred",
           "diode_params_of", "forward_voltage", "saturation_current_at", "is_preferred",
           "nearest_preferred", "is_schottky"]

_ADVICE = ("worst_low", "worst_high", "corner", "corner_words", "branch_cautions",
           "needed_voltage", "series_resistor_advice", "rerun_pump", "rerun_pump_variants",
           "schottky_params", "flicker_of_branch", "diode_params_of", "forward_voltage",
           "saturation_current_at", "is_preferred", "nearest_preferred", "is_schottky")


_FORMATTED: dict = {}      # (value, unit, digits) -> text, for format_quantity


def format_quantity(value: float, unit: str, digits: int = 3) -> str:
    """A float in SI base units as text with an engineering prefix, as the report writes it
    (drc.units.format_si): format_quantity(0.0005, "A") gives "500 µA".

    A board of repeated cells names the same few values in thousands of findings, so each
    distinct (value, unit, digits) is formatted once. Only plain non-zero floats are kept:
    0.0 and -0.0 are one key but print differently, and a float subclass might print
    otherwise."""
    if type(value) is not float or value == 0.0 or type(digits) is not int:
        return format_si(value, unit, digits)
    key = (value, unit, digits)
    text = _FORMATTED.get(key)
    if text is None:
        text = format_si(value, unit, digits)
        if len(_FORMATTED) < 65536:
            _FORMATTED[key] = text
    return text


def __getattr__(name):
    # the analysis helpers load numpy and the solver: only when a rule asks for them
    if name in _ADVICE:
        from drc import advice
        return getattr(advice, name)
    if name == "format_resistance":
        from drc.preferred import format_resistance
        return format_resistance
    if name in ("flicker", "preferred"):
        # whole modules, kept for the built-in rules that use them (flicker, pin-overcurrent)
        import importlib
        return importlib.import_module(f"drc.{name}")
    if name == "GROUND":
        from drc.design import GROUND
        return GROUND
    raise AttributeError(f"module 'drc.api' has no attribute {name!r}")


@dataclass(frozen=True)
class Setting:
    """A rule's setting: its default (an SI float when `unit` is given), the unit the config
    writes it in (a key of SETTING_UNITS), the values it may take, and a line of help."""

    default: Any
    unit: str | None = None
    choices: tuple = ()
    help: str = ""

    def __post_init__(self):
        if self.unit is not None and self.unit not in SETTING_UNITS:
            raise ValueError(f"Setting unit {self.unit!r}: one of {', '.join(SETTING_UNITS)}")
        if self.unit is not None and not isinstance(self.default, (int, float)):
            raise ValueError(f"Setting with unit {self.unit!r} wants a number as its default")


_RESERVED_SETTINGS = ("severity", "enabled")


def _is_rule_id(text: str) -> bool:
    words = text.split("-")
    return bool(text) and all(w and w.isascii() and w.replace("_", "").isalnum() and w == w.lower()
                              for w in words)


@dataclass(frozen=True)
class Rule:
    """A rule's identity: its id (lower-case words joined by '-'), default severity, a
    one-line summary, the published sources it rests on, its settings with defaults, and
    its long help (empty: the module's docstring)."""

    id: str
    severity: str
    summary: str
    sources: tuple[str, ...] = ()
    settings: Mapping[str, Any] = field(default_factory=dict)
    help: str = ""

    def __post_init__(self):
        if not isinstance(self.id, str) or not _is_rule_id(self.id):
            raise ValueError(f"rule id {self.id!r}: lower-case words joined by '-', e.g. 'house-min-resistor'")
        if self.severity not in SEVERITIES:
            raise ValueError(f"rule {self.id}: severity must be one of {', '.join(SEVERITIES)}")
        if isinstance(self.sources, str):
            object.__setattr__(self, "sources", (self.sources,))
        for name in self.settings:
            if name in _RESERVED_SETTINGS:
                raise ValueError(f"rule {self.id}: {name!r} is the runner's, not a setting")

    def setting(self, name: str) -> Setting:
        """The declared setting `name`, a plain default made a Setting."""
        value = self.settings[name]
        return value if isinstance(value, Setting) else Setting(value)

    def defaults(self) -> dict[str, Any]:
        """Every setting at its default."""
        return {name: self.setting(name).default for name in self.settings}


@dataclass
class Finding:
    """One violation, located at an element's card (or any location)."""

    message: str
    location: Location
    elements: list[str] = field(default_factory=list)
    nets: list[str] = field(default_factory=list)
    corner: dict | None = None
    values: dict[str, float] = field(default_factory=dict)
    fix: str = ""
    caution: str = ""
    severity: str | None = None        # None: the rule's severity (after the config's say)
    rule: str = ""                     # filled in by the runner


def finding(at, message: str, *, elements: Iterable[str] = (), nets: Iterable[str] = (),
            corner: dict | None = None, values: Mapping[str, float] | None = None,
            fix: str = "", caution: str = "", severity: str | None = None) -> Finding:
    """A finding at `at`: an element (its card's location) or a Location."""
    location = at if isinstance(at, Location) else at.location
    names = list(elements)
    if not names and not isinstance(at, Location):
        names = [at.name]
    return Finding(message=message, location=location, elements=names, nets=list(nets),
                   corner=corner, values=dict(values or {}), fix=fix, caution=caution,
                   severity=severity)


class Design(Protocol):
    """What `check` receives (drc.analysis.Design satisfies it). Read-only.

    path, title        the netlist as given on the command line; its title line
    elements           every Element, flattened (names are paths: "X2.Dled"); see below
    element(name)      the Element of that name (any case), or None
    nets               every net name (lower-case; "0" is ground: GROUND)
    models             .model cards by lower-case name: Model(name, key, type, params, location)
    connections(net)   [(Element, terminal index)] on a net
    graph              networkx.MultiGraph: nets are nodes, each two-terminal element an edge
                       (key: its lower-case name; data "element"); a part with more
                       terminals is a node ("part", key) with an edge to each of its nets
    supplies           label -> Supply(label, net, source, low_V, nominal_V, high_V, battery,
                       lithium, package_current_A, voltage_V at every corner, location)
    pins               label -> Pin(label, net, source, supply (a supply label),
                       output_resistance_ohm, max_current_A, drive "high"|"low"|"toggle"|
                       "input", frequency_Hz, duty, clamp_above_supply_V, clamp_current_A,
                       high_V at every corner, rest_low (low until its first rising edge,
                       from rest), location)
    supply_of_net(net), pin_of_net(net)   the Supply or Pin on a net, or None
    leds               element name -> Led(element, name, colour, params (SPICE diode
                       parameters), visible_current_A, max_current_A, max_reverse_V, eye_safety)
    branches           every LED branch: Branch(id, leds, elements (drive end first),
                       resistors, nets, drive "rail"|"pin"|"pump"|"unknown", source (label),
                       supply, pin, sink_pin, unlimited, note; and per LED name, arrays at
                       every corner: current_A (average over the drive's period),
                       peak_current_A (brightest phase), forward_V, reverse_V; pin_current_A
                       per pin label; phases: [Phase(share, drive_V, words)]; pin_loads:
                       what else its pins' nets drive, solved with it (resistors to ground
                       or a rail), else [])
    pumps              every charge pump: Pump(id, topology "doubler"|"dickson"|"bootstrap",
                       stages, capacitors, charge_diode, transfer_diodes, reservoir,
                       output_net, pins (labels), charge_from, elements, pin_resistors
                       (pin label -> the resistor it lifts a capacitor through), region,
                       result); the pumps of one region (its LEDs, .leds; its pumps, .pumps)
                       share one result. result: PumpResult or None, arrays at every corner:
                       peak_V, average_V, ripple_V, load_average_A, load_peak_A (the
                       region's first LED), time_to_visible_s; per pin label:
                       pin_high_peak_A, pin_low_peak_A, startup_surge_A; per diode name
                       (every LED among them): diode_average_A, diode_peak_A,
                       diode_reverse_max_V; waveform_V per net (one steady period)
    corners            Corners: count, nominal (index), supply_V (label -> array),
                       temperature_C, temperature_K, resistor_factor, capacitor_factor
                       (arrays); describe(i) (the report's corner dict), words(i)
    assumptions        the defaults assumed, in words
    context            the design context (its `rules` table is the runner's; read settings
                       from `check`'s second argument instead)

    Element: name, key (lower-case), kind ("R", "C", "L", "D", "V", "I", "X", ...), nodes
    (net names), value (R ohm, C F, L H; None if not given), value_text (as typed), model
    (a key of `models`), params, source (V/I: dc and waveform), location (its card).
    """

    path: str
    title: str
    graph: Any
    supplies: Mapping[str, Any]
    pins: Mapping[str, Any]
    leds: Mapping[str, Any]
    branches: list
    pumps: list
    corners: Any
    assumptions: list[str]

    @property
    def elements(self) -> list: ...

    @property
    def nets(self) -> list[str]: ...

    @property
    def models(self) -> Mapping[str, Any]: ...

    def element(self, name: str) -> Any: ...

    def connections(self, net: str) -> list: ...

    def supply_of_net(self, net: str) -> Any: ...

    def pin_of_net(self, net: str) -> Any: ...
