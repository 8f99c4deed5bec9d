"""The design context: supplies, pins, LEDs, ambient and tolerances a netlist is checked against.

Where it comes from (the contract's order; `find_config` returns the files that apply,
weakest first):

1. `--config FILE`, if given; else
2. `drc.toml` in the netlist's folder or the nearest folder above it; else
3. `[tool.drc]` in the nearest `pyproject.toml` above it that has a `[tool.drc]` table.
   A pyproject.toml without one does not count and the search goes on above it, so a
   Python sub-package inside a hardware repository does not hide the repository's settings.
4. On top of whichever of those applies, `STEM.toml` beside `STEM.cir` (same stem; also
   `.sp`, `.net`, `.spice`) applies to that netlist alone and wins. It is an overlay, key by
   key within each table: `[supply.VBAT] range` in the netlist's own file replaces the
   general file's `range` and keeps its `package_current`. Giving `range` drops an inherited
   `battery` and `cells` (and the other way round); giving `source` drops an inherited `net`
   (and the other way round). Labels match without regard to case.

Any of these files named `pyproject.toml` is read for its `[tool.drc]` table only.

Tables and keys of our own, beyond the contract's:

    [supply.X] package_current = "100 mA"   # the most that rail's package may deliver
    [pin.X]    clamp_above_supply = "0.3 V" # the pin's clamp conducts above supply + this
               clamp_current = "5 mA"       # the most the clamp may take
    [rule."led-headroom"]                   # per-rule settings: severity, enabled, and any
    severity = "warning"                    #   other key, kept raw for the rule to read
    enabled = false
    [house_rules] folders = ["checks"]      # folders of house rules, relative to the file
    [limits]                                # input limits
    max_elements = 1000000
    max_file_bytes = "16 MiB"               # or a whole number of bytes
    include_folders = ["lib"]               # where .include / .lib files may be found
    house_rule_time = "10 s"                # each house rule's time limit

Every quantity comes back as an SI float (temperatures in °C, shares as ratios). Every
default the context fills in is listed in `Context.assumptions` in plain words.
Input limits are not listed there: they bound the input, not the design.
"""

from __future__ import annotations

import difflib
import re
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Iterable

from drc import profiles
from drc.errors import InputError, InputErrors, Location
from drc.quantities import parse_quantity, read_toml
from drc.units import format_si

NETLIST_SUFFIXES = (".cir", ".sp", ".net", ".spice")

# Defaults that are not in the built-in profiles, each with why.
DEFAULT_TEMPERATURE_C = (-20.0, 60.0)    # common practice for battery-powered consumer products
SPICE_NOMINAL_TEMPERATURE_C = 27.0       # SPICE's TNOM (the contract: the default nominal)
DEFAULT_RESISTOR_TOLERANCE = 0.05        # common practice: E24 film resistors
DEFAULT_CAPACITOR_TOLERANCE = 0.20       # common practice: general-purpose ceramics
DEFAULT_MAX_ELEMENTS = 1_000_000
DEFAULT_MAX_FILE_BYTES = 16 * 1024 * 1024
DEFAULT_HOUSE_RULE_SECONDS = 10.0

DRIVES = ("high", "low", "toggle", "input")
PHASES = ("normal", "inverted")
SEVERITIES = ("error", "warning", "note")

# The schema: table -> key -> kind (a parse_quantity kind, or one of ours in <>).
_SUPPLY = {"source": "<name>", "net": "<name>", "range": "<voltage range>",
           "nominal": "voltage", "battery": "<battery>", "cells": "<count>",
           "package_current": "current"}
_PIN = {"source": "<name>", "net": "<name>", "supply": "<name>",
        "output_resistance": "resistance", "max_current": "current", "drive": "<drive>",
        "frequency": "frequency", "duty": "fraction", "phase": "<phase>",
        "clamp_above_supply": "voltage", "clamp_current": "current"}
_LED = {"element": "<name>", "model": "<name>", "colour": "<colour>",
        "visible_current": "current", "max_current": "current", "max_reverse": "voltage"}
_AMBIENT = {"temperature": "<temperature range>", "nominal": "temperature"}
_TOLERANCE = {"resistor": "fraction", "capacitor": "fraction"}
_LIMITS = {"max_elements": "<count>", "max_file_bytes": "<bytes>",
           "include_folders": "<folders>", "house_rule_time": "time"}
_HOUSE_RULES = {"folders": "<folders>"}
_RULE_KNOWN = {"severity", "enabled"}

LABELLED = {"supply": _SUPPLY, "pin": _PIN, "led": _LED, "rule": None}
PLAIN = {"ambient": _AMBIENT, "tolerance": _TOLERANCE, "limits": _LIMITS,
         "house_rules": _HOUSE_RULES}
TABLES = tuple(LABELLED) + tuple(PLAIN)

# When an overlay gives a key of one side, the base's keys of the other side are dropped.
_EXCLUSIVE = {"supply": [({"range"}, {"battery", "cells"}), ({"source"}, {"net"})],
              "pin": [({"source"}, {"net"})]}

_BYTE_UNITS = {"b": 1, "kb": 1000, "kib": 1024, "mb": 1000 ** 2, "mib": 1024 ** 2,
               "gb": 1000 ** 3, "gib": 1024 ** 3}

KeyPath = tuple[str, ...]


# ---------------------------------------------------------------------------- the results

@dataclass(frozen=True, slots=True)
class SupplySpec:
    """A rail: which source or net it is, and the voltages it takes over its life.

    `low_V`/`high_V` are None when the config gives neither `range` nor `battery`: the
    analysis then uses the source's DC value. `nominal_V` is the config's own `nominal`
    or None; `nominal_at` applies the contract's default for it.
    """

    label: str
    source: str | None
    net: str | None
    low_V: float | None
    high_V: float | None
    nominal_V: float | None
    battery: str | None
    cells: int | None
    package_current_A: float | None
    location: Location

    def nominal_at(self, dc_V: float | None) -> tuple[float | None, str | None]:
        """The nominal voltage, given the source's DC value (None if none), and the
        assumption made to get it (None if the config gave it).

        Order: the config's `nominal`; the source's DC value (if inside the range);
        the battery's nominal times cells; the middle of the range.
        """
        if self.nominal_V is not None:
            return self.nominal_V, None
        if self.low_V is None or self.high_V is None:
            if dc_V is None:
                return None, None
            return dc_V, (f"{self.label}: no nominal, range or battery: the source's DC "
                          f"value {dc_V:g} V is its only voltage")
        if dc_V is not None and self.low_V <= dc_V <= self.high_V:
            return dc_V, f"{self.label}: no nominal: the source's DC value {dc_V:g} V"
        outside = (f"the source's DC value {dc_V:g} V lies outside the range; "
                   if dc_V is not None else "")
        if self.battery is not None:
            value = profiles.battery(self.battery).nominal_V * (self.cells or 1)
            return value, (f"{self.label}: no nominal: {outside}{self.battery} nominal "
                           f"{value:g} V ({self.cells or 1} cell(s)) assumed")
        value = (self.low_V + self.high_V) / 2
        return value, f"{self.label}: no nominal: {outside}the middle of the range, {value:g} V"


@dataclass(frozen=True, slots=True)
class PinSpec:
    """A port pin: a voltage source that models it, or a net a black-box part drives.

    For a pin named by `source`, `drive`, `frequency_Hz`, `duty` and `phase` are None:
    the source's own waveform gives them.
    """

    label: str
    source: str | None
    net: str | None
    supply: str | None
    output_resistance_ohm: float
    max_current_A: float
    drive: str | None              # "high", "low", "toggle", "input"
    frequency_Hz: float | None     # toggle only
    duty: float | None             # share of the period spent high, 0..1; toggle only
    phase: str | None              # "normal" or "inverted"; toggle only
    location: Location
    clamp_above_supply_V: float = 0.3
    clamp_current_A: float = 0.005


@dataclass(frozen=True, slots=True)
class LedSpec:
    """An LED's identity and ratings. With no `colour`, the ratings not given are None and
    the analysis fills them from the colour it infers (and lists that)."""

    label: str
    element: str | None
    model: str | None
    colour: str | None
    visible_current_A: float | None
    max_current_A: float | None
    max_reverse_V: float | None
    location: Location


@dataclass(frozen=True, slots=True)
class Limits:
    """Bounds on the input, so that a huge or hostile netlist fails cleanly."""

    max_elements: int = DEFAULT_MAX_ELEMENTS
    max_file_bytes: int = DEFAULT_MAX_FILE_BYTES
    include_folders: tuple[Path, ...] = ()
    house_rule_seconds: float = DEFAULT_HOUSE_RULE_SECONDS


@dataclass(frozen=True)
class Context:
    """The design context of one netlist, in SI floats, with every default it assumed."""

    files: list[str]
    supplies: dict[str, SupplySpec]
    pins: dict[str, PinSpec]
    leds: dict[str, LedSpec]
    temperature_C: tuple[float, float]
    nominal_temperature_C: float
    resistor_tolerance: float
    capacitor_tolerance: float
    rules: dict[str, dict[str, Any]]
    rule_folders: list[Path]
    limits: Limits
    assumptions: list[str]
    key_locations: dict[KeyPath, Location] = field(default_factory=dict, repr=False,
                                                   compare=False)

    def location_of(self, *path: str) -> Location | None:
        """Where a key was set, e.g. location_of("rule", "flicker", "band"); else its table's."""
        key = tuple(path)
        while key:
            if key in self.key_locations:
                return self.key_locations[key]
            key = key[:-1]
        return None

    def supply(self, name: str) -> SupplySpec | None:
        """The supply whose label, source or net is `name` (any case)."""
        return _find(self.supplies.values(), name, ("label", "source", "net"))

    def pin(self, name: str) -> PinSpec | None:
        """The pin whose label, source or net is `name` (any case)."""
        return _find(self.pins.values(), name, ("label", "source", "net"))

    def led(self, element: str, model: str | None = None) -> LedSpec | None:
        """The [led] table for an element path: by `element`, else label, else model."""
        found = _find(self.leds.values(), element, ("element",))
        found = found or _find([s for s in self.leds.values() if s.element is None],
                               element, ("label",))
        if found is None and model is not None:
            found = _find([s for s in self.leds.values() if s.element is None], model,
                          ("model", "label"))
        return found


def _find(specs: Iterable[Any], name: str, fields: tuple[str, ...]) -> Any:
    wanted = name.lower()
    for field_name in fields:
        for spec in specs:
            value = getattr(spec, field_name)
            if value is not None and value.lower() == wanted:
                return spec
    return None


# ---------------------------------------------------------------------------- discovery

def _nearest(folder: Path, name: str, accept=lambda path: True) -> Path | None:
    for candidate_folder in (folder, *folder.parents):
        candidate = candidate_folder / name
        if candidate.is_file() and accept(candidate):
            return candidate
    return None


def _has_tool_drc(path: Path) -> bool:
    data, _ = read_toml(path)
    tool = data.get("tool")
    return isinstance(tool, dict) and "drc" in tool


def find_config(netlist: Path, explicit: Path | None = None) -> list[Path]:
    """The config files that apply to `netlist`, weakest first (see the module's doc).

    A broken pyproject.toml met on the way up is an InputError (it might hold [tool.drc]).
    """
    netlist = Path(netlist)
    folder = netlist.absolute().parent
    found: list[Path] = []
    if explicit is not None:
        found.append(Path(explicit))
    else:
        general = _nearest(folder, "drc.toml")
        if general is None:
            general = _nearest(folder, "pyproject.toml", _has_tool_drc)
        if general is not None:
            found.append(general)
    own = netlist.absolute().with_suffix(".toml")
    if netlist.suffix.lower() in NETLIST_SUFFIXES and own.is_file():
        if not any(_same_file(own, path) for path in found):
            found.append(own)
    return found


def _same_file(a: Path, b: Path) -> bool:
    try:
        return a.resolve() == b.resolve()
    except OSError:
        return False


def _display(path: Path) -> str:
    """A path as the report shows it: relative to the working folder when below it."""
    try:
        relative = Path(path).absolute().relative_to(Path.cwd())
        return str(relative)
    except ValueError:
        return str(path)


# ---------------------------------------------------------------------------- reading files

class _Errors:
    def __init__(self) -> None:
        self.items: list[InputError] = []

    def add(self, location: Location, message: str) -> None:
        self.items.append(InputError(location, message))


def _suggest(word: str, choices: Iterable[str]) -> str:
    close = difflib.get_close_matches(word.lower(), list(choices), n=1, cutoff=0.6)
    return f"; did you mean {close[0]!r}?" if close else ""


def _header(path: KeyPath) -> str:
    parts = [p if re.fullmatch(r"[A-Za-z0-9_-]+", p) else f'"{p}"' for p in path]
    return "[" + ".".join(parts) + "]"


def _read_one(path: Path, errors: _Errors) -> tuple[dict[str, Any], dict[KeyPath, Location]]:
    """One config file: its data (the [tool.drc] part of a pyproject) and each key's place."""
    shown = _display(path)
    data, locator = read_toml(path, shown)
    prefix: KeyPath = ()
    if path.name == "pyproject.toml":
        prefix = ("tool", "drc")
        tool = data.get("tool", {})
        data = tool.get("drc", {}) if isinstance(tool, dict) else {}
        if not isinstance(data, dict):
            errors.add(locator.at(prefix), "[tool.drc] must be a table")
            data = {}
    where: dict[KeyPath, Location] = {}

    def walk(value: Any, key_path: KeyPath) -> None:
        where[key_path] = locator.at(prefix + key_path)
        if isinstance(value, dict) and len(key_path) < 3:
            for key, item in value.items():
                walk(item, key_path + (key,))

    for key, value in data.items():
        walk(value, (key,))
    # Labels compare without regard to case: two spellings of one label in a file clash.
    for group in LABELLED:
        table = data.get(group)
        if isinstance(table, dict):
            seen: dict[str, str] = {}
            for label in table:
                if label.lower() in seen:
                    errors.add(where[(group, label)],
                               f"{_header((group, label))} repeats "
                               f"{_header((group, seen[label.lower()]))}: labels compare "
                               f"without regard to case")
                else:
                    seen[label.lower()] = label
    return data, where


def _merge(base: dict[str, Any], base_where: dict[KeyPath, Location],
           overlay: dict[str, Any], overlay_where: dict[KeyPath, Location]) -> None:
    """Lay `overlay` over `base` in place, key by key within each table (module doc)."""
    for group, value in overlay.items():
        if group in LABELLED and isinstance(value, dict) and isinstance(base.get(group), dict):
            labels = {label.lower(): label for label in base[group]}
            for label, table in value.items():
                target = labels.get(label.lower(), label)
                old = base[group].get(target)
                if isinstance(table, dict) and isinstance(old, dict):
                    for drop_if, drop in _EXCLUSIVE.get(group, []):
                        for given, dropped in ((drop_if, drop), (drop, drop_if)):
                            if given & set(table) and not dropped & set(table):
                                for key in dropped:
                                    old.pop(key, None)
                    old.update(table)
                    base_where[(group, target)] = overlay_where[(group, label)]
                    for key in table:
                        _copy_where(overlay_where, (group, label, key), base_where,
                                    (group, target, key))
                else:
                    base[group][target] = table
                    _copy_where(overlay_where, (group, label), base_where, (group, target))
        elif group in PLAIN and isinstance(value, dict) and isinstance(base.get(group), dict):
            base[group].update(value)
            for key in value:
                _copy_where(overlay_where, (group, key), base_where, (group, key))
        else:
            base[group] = value
            _copy_where(overlay_where, (group,), base_where, (group,))


def _copy_where(source: dict[KeyPath, Location], prefix: KeyPath,
                target: dict[KeyPath, Location], new_prefix: KeyPath) -> None:
    for key, location in source.items():
        if key[:len(prefix)] == prefix:
            target[new_prefix + key[len(prefix):]] = location


# ---------------------------------------------------------------------------- validation

class _Reader:
    """Reads one merged table's values, recording errors instead of stopping at the first."""

    def __init__(self, table: dict[str, Any], path: KeyPath, where: dict[KeyPath, Location],
                 errors: _Errors, fallback: Location):
        self.table = table
        self.path = path
        self.where = where
        self.errors = errors
        self.fallback = fallback

    def at(self, key: str | None = None) -> Location:
        path = self.path + ((key,) if key else ())
        while path:
            if path in self.where:
                return self.where[path]
            path = path[:-1]
        return self.fallback

    def fail(self, key: str | None, message: str) -> None:
        self.errors.add(self.at(key), f"{_header(self.path)} {message}")

    def _within(self, error: InputError) -> InputError:
        return InputError(error.location, f"{_header(self.path)} {error.message}")

    def check_keys(self, allowed: Iterable[str]) -> None:
        allowed = list(allowed)
        for key in self.table:
            if key not in allowed:
                self.errors.add(self.at(key), f"unknown key {key!r} in {_header(self.path)}"
                                              f"{_suggest(key, allowed)}")

    def quantity(self, key: str, kind: str, positive: bool = False,
                 nonnegative: bool = False) -> float | None:
        if key not in self.table:
            return None
        try:
            value = parse_quantity(self.table[key], kind, self.at(key), key)
        except InputError as error:
            self.errors.items.append(self._within(error))
            return None
        if positive and not value > 0:
            self.fail(key, f"{key} must be above zero, got {self.table[key]!r}")
            return None
        if nonnegative and value < 0:
            self.fail(key, f"{key} must not be negative, got {self.table[key]!r}")
            return None
        return value

    def name(self, key: str) -> str | None:
        if key not in self.table:
            return None
        value = self.table[key]
        if not isinstance(value, str) or not value.strip():
            self.fail(key, f'{key} wants a name as a string, e.g. {key} = "V1"')
            return None
        return value.strip()

    def choice(self, key: str, choices: Iterable[str]) -> str | None:
        value = self.name(key)
        if value is None:
            return None
        choices = list(choices)
        if value.lower() not in choices:
            self.fail(key, f"{key} = {value!r} is not one of {', '.join(choices)}"
                           f"{_suggest(value, choices)}")
            return None
        return value.lower()

    def voltage_range(self, key: str, kind: str) -> tuple[float, float] | None:
        if key not in self.table:
            return None
        value = self.table[key]
        example = '["2.0 V", "3.2 V"]' if kind == "voltage" else '["-20 degC", "60 degC"]'
        if not isinstance(value, list) or len(value) != 2:
            self.fail(key, f"{key} wants a list of two values, low and high, e.g. "
                           f"{key} = {example}")
            return None
        ends = []
        for item in value:
            try:
                ends.append(parse_quantity(item, kind, self.at(key), key))
            except InputError as error:
                self.errors.items.append(self._within(error))
        if len(ends) != 2:
            return None
        if ends[0] > ends[1]:
            self.fail(key, f"{key} runs from {value[0]!r} down to {value[1]!r}: "
                           f"write the low end first")
            return None
        return ends[0], ends[1]

    def folders(self, key: str) -> list[Path]:
        if key not in self.table:
            return []
        value = self.table[key]
        if isinstance(value, str):
            value = [value]
        if not isinstance(value, list) or not all(isinstance(v, str) for v in value):
            self.fail(key, f'{key} wants a list of folder names, e.g. {key} = ["checks"]')
            return []
        base = Path(self.at(key).path).absolute().parent
        return [Path(v) if Path(v).is_absolute() else base / v for v in value]

    def count(self, key: str, least: int) -> int | None:
        if key not in self.table:
            return None
        value = self.table[key]
        if isinstance(value, bool) or not isinstance(value, int):
            self.fail(key, f"{key} wants a whole number, e.g. {key} = {max(least, 1)}")
            return None
        if value < least:
            self.fail(key, f"{key} must be at least {least}, got {value}")
            return None
        return value


def _byte_count(reader: _Reader, key: str) -> int | None:
    if key not in reader.table:
        return None
    value = reader.table[key]
    if isinstance(value, int) and not isinstance(value, bool):
        return reader.count(key, 1)
    match = re.fullmatch(r"\s*(\d+(?:\.\d+)?)\s*([A-Za-z]+)\s*", value) \
        if isinstance(value, str) else None
    if match is None or match.group(2).lower() not in _BYTE_UNITS:
        reader.fail(key, f'{key} wants a size, e.g. {key} = "16 MiB" or a number of bytes')
        return None
    size = int(float(match.group(1)) * _BYTE_UNITS[match.group(2).lower()])
    if size < 1:
        reader.fail(key, f"{key} must be at least one byte")
        return None
    return size


def _g(value: float) -> str:
    return f"{value:g}"


def _read_supply(label: str, reader: _Reader, assumptions: list[str]) -> SupplySpec:
    reader.check_keys(_SUPPLY)
    source, net = reader.name("source"), reader.name("net")
    if source and net:
        reader.fail("net", "give source or net, not both")
    low = high = None
    span = reader.voltage_range("range", "voltage")
    battery = None
    cells = None
    if "battery" in reader.table and "range" in reader.table:
        reader.fail("battery", "give range or battery, not both")
    if "cells" in reader.table and "battery" not in reader.table:
        reader.fail("cells", "cells applies only with battery")
    cells_given = reader.count("cells", 1)
    if "battery" in reader.table:
        name = reader.name("battery")
        if name is not None:
            try:
                profile = profiles.battery(name)
            except KeyError:
                reader.fail("battery", f"unknown battery {name!r}"
                                       f"{_suggest(name, profiles.battery_names())} (built in: "
                                       f"{', '.join(profiles.battery_names())})")
            else:
                battery = profile.name
                cells = cells_given
                if cells is None and "cells" not in reader.table:
                    cells = 1
                    assumptions.append(f"{label}: no cells given: 1 cell of {battery} assumed")
                if cells is not None:
                    low, high = profile.low_V * cells, profile.high_V * cells
                    assumptions.append(
                        f"{label}: {battery} x {cells}: {_g(low)} V to {_g(high)} V "
                        f"({profile.provenance})")
    elif span is not None:
        low, high = span
    nominal = reader.quantity("nominal", "voltage")
    if nominal is not None and low is not None and high is not None \
            and not low <= nominal <= high:
        reader.fail("nominal", f"nominal {_g(nominal)} V lies outside the range "
                               f"{_g(low)} V to {_g(high)} V")
    package = reader.quantity("package_current", "current", positive=True)
    return SupplySpec(label, source, net, low, high, nominal, battery, cells, package,
                      reader.at())


def _read_pin(label: str, reader: _Reader, assumptions: list[str]) -> PinSpec:
    reader.check_keys(_PIN)
    default = profiles.pin_default()
    source, net = reader.name("source"), reader.name("net")
    if source and net:
        reader.fail("net", "give source or net, not both")
    supply = reader.name("supply")

    defaulted: list[str] = []

    def rated(key: str, kind: str, fallback: float, unit: str) -> float:
        value = reader.quantity(key, kind, nonnegative=(kind != "current"),
                                positive=(kind == "current"))
        if value is None and key not in reader.table:
            defaulted.append(f"{key} {format_si(fallback, unit)}")
            return fallback
        return value if value is not None else fallback

    resistance = rated("output_resistance", "resistance", default.output_resistance_ohm, "Ω")
    max_current = rated("max_current", "current", default.max_current_A, "A")
    clamp_margin = rated("clamp_above_supply", "voltage", default.clamp_above_supply_V, "V")
    clamp_current = rated("clamp_current", "current", default.clamp_current_A, "A")
    if defaulted:
        # one line per pin: the defaults it took, all from the built-in profile
        assumptions.append(f"pin {label}: {', '.join(defaulted)} assumed "
                           f"(built-in pin profile, from memory)")

    drive = frequency = duty = phase = None
    timing = [k for k in ("drive", "frequency", "duty", "phase") if k in reader.table]
    if source is not None:
        for key in timing:
            reader.fail(key, f"{key} is for net pins: the source {source!r} gives its own "
                             f"drive and timing; remove {key!r}")
    else:
        drive = reader.choice("drive", DRIVES)
        if drive is None and "drive" not in reader.table and net is not None:
            drive = "high"
            assumptions.append(f"pin {label}: no drive: 'high' (steadily on) assumed")
        frequency = reader.quantity("frequency", "frequency", positive=True)
        duty = reader.quantity("duty", "fraction")
        if duty is not None and not 0.0 <= duty <= 1.0:
            reader.fail("duty", f"duty must lie within 0 % to 100 %, got {reader.table['duty']!r}")
            duty = None
        phase = reader.choice("phase", PHASES)
        if drive == "toggle":
            if "frequency" not in reader.table:
                reader.fail("drive", 'drive = "toggle" needs frequency, e.g. frequency = "2 kHz"')
            if "duty" not in reader.table:
                duty = 0.5
                assumptions.append(f"pin {label}: no duty: 50 % assumed")
            if "phase" not in reader.table:
                phase = "normal"
                assumptions.append(f"pin {label}: no phase: 'normal' assumed")
        elif drive is not None:
            ignored = [k for k in ("frequency", "duty", "phase") if k in reader.table]
            if ignored:
                assumptions.append(f"pin {label}: drive is {drive!r}: "
                                   f"{', '.join(ignored)} ignored")
            frequency = duty = phase = None
    return PinSpec(label, source, net, supply, resistance, max_current, drive, frequency,
                   duty, phase, reader.at(), clamp_margin, clamp_current)


def _read_led(label: str, reader: _Reader, assumptions: list[str]) -> LedSpec:
    reader.check_keys(_LED)
    element, model = reader.name("element"), reader.name("model")
    colour = None
    if "colour" in reader.table:
        colour = reader.choice("colour", profiles.colours())
    profile = profiles.led(colour) if colour is not None else None
    values: dict[str, float | None] = {}
    for key, kind, attribute, unit in (
            ("visible_current", "current", "visible_current_A", "A"),
            ("max_current", "current", "max_current_A", "A"),
            ("max_reverse", "voltage", "max_reverse_V", "V")):
        value = reader.quantity(key, kind, positive=True)
        if value is None and key not in reader.table and profile is not None:
            value = getattr(profile, attribute)
            assumptions.append(f"LED {label}: no {key}: {format_si(value, unit)} assumed "
                               f"(built-in {colour} LED profile, common practice)")
        values[key] = value
    visible, most = values["visible_current"], values["max_current"]
    if visible is not None and most is not None and visible > most:
        reader.fail("visible_current", "visible_current is above max_current")
    return LedSpec(label, element, model, colour, visible, most, values["max_reverse"],
                   reader.at())


def _read_rule(rule_id: str, reader: _Reader, known: list[str] | None) -> dict[str, Any]:
    if known is not None and rule_id.lower() not in known:
        reader.errors.add(reader.at(), f"unknown rule {rule_id!r} in {_header(reader.path)}"
                                       f"{_suggest(rule_id, known)}")
    settings = dict(reader.table)
    if "severity" in reader.table:
        severity = reader.choice("severity", SEVERITIES)
        if severity is not None:
            settings["severity"] = severity
    if "enabled" in reader.table and not isinstance(reader.table["enabled"], bool):
        reader.fail("enabled", "enabled wants true or false")
    return settings


def _guard_limits(limits: "Limits", reader: "_Reader", explicit, errors: "_Errors") -> None:
    """Limits bound untrusted input, so only the --config file (the checking side's own) may
    loosen them. A file found beside or above the netlist (drc.toml, STEM.toml, pyproject)
    comes with the netlist and may only tighten them: no more elements, bytes or time than
    the defaults, and include folders only inside the repository that holds it (the nearest
    folder above it with a `.git`: in CI, the checkout, so a pull request cannot point
    outside it). Outside any repository the files are the user's own and are taken as given."""
    def trusted(key: str) -> bool:
        if key not in reader.table:
            return True
        where = reader.at(key)
        return explicit is not None and where is not None and _same_file(Path(where.path), Path(explicit))

    def refuse(key: str, what: str) -> None:
        errors.add(reader.at(key), f"[limits] {key} {what}: a config found beside the netlist may "
                                   "only tighten the limits; loosen them with --config FILE")

    if not trusted("max_elements") and limits.max_elements > DEFAULT_MAX_ELEMENTS:
        refuse("max_elements", f"raises the limit above {DEFAULT_MAX_ELEMENTS}")
    if not trusted("max_file_bytes") and limits.max_file_bytes > DEFAULT_MAX_FILE_BYTES:
        refuse("max_file_bytes", f"raises the limit above {DEFAULT_MAX_FILE_BYTES} bytes")
    if not trusted("house_rule_time") and limits.house_rule_seconds > DEFAULT_HOUSE_RULE_SECONDS:
        refuse("house_rule_time", f"raises the limit above {DEFAULT_HOUSE_RULE_SECONDS:g} s")
    if not trusted("include_folders"):
        config = Path(reader.at("include_folders").path).absolute().resolve()
        home = next((p for p in config.parents if (p / ".git").exists()), None)
        for folder in limits.include_folders if home is not None else ():
            real = Path(folder).resolve()
            if real != home and home not in real.parents:
                refuse("include_folders", f"names {folder}, outside the repository at {home}")
                break


def load_context(netlist: Path, explicit: Path | None = None, *,
                 rule_ids: Iterable[str] | None = None) -> Context:
    """The design context for `netlist`; InputError/InputErrors for anything wrong in it.

    `rule_ids`, if given, are the rules that exist: a [rule.X] for any other is an error.
    """
    errors = _Errors()
    files = find_config(Path(netlist), Path(explicit) if explicit is not None else None)
    data: dict[str, Any] = {}
    where: dict[KeyPath, Location] = {}
    for path in files:
        one, one_where = _read_one(path, errors)
        _merge(data, where, one, one_where)
    shown = [_display(path) for path in files]
    fallback = Location(shown[-1], 1, 1) if shown else Location(str(netlist), 1, 1)
    assumptions: list[str] = []
    if not files:
        assumptions.append("no design context file (drc.toml, [tool.drc] in pyproject.toml, "
                           "or one named after the netlist): built-in defaults throughout")

    for group, value in data.items():
        if group not in TABLES:
            hint = (": [tool.drc] belongs in pyproject.toml; in drc.toml write the tables "
                    "without it" if group == "tool" else _suggest(group, TABLES))
            errors.add(where.get((group,), fallback), f"unknown table [{group}]{hint}")
        elif not isinstance(value, dict):
            errors.add(where.get((group,), fallback),
                       f"[{group}] must be a table" + (
                           f" of labelled tables like [{group}.NAME]" if group in LABELLED
                           else ""))

    def table(*path: str) -> dict[str, Any]:
        value: Any = data
        for key in path:
            value = value.get(key, {}) if isinstance(value, dict) else {}
        return value if isinstance(value, dict) else {}

    def labelled(group: str):
        for label, value in table(group).items():
            if not isinstance(value, dict):
                errors.add(where.get((group, label), fallback),
                           f"{_header((group, label))} must be a table of keys, not a value")
                continue
            yield label, _Reader(value, (group, label), where, errors, fallback)

    supplies = {label: _read_supply(label, r, assumptions) for label, r in labelled("supply")}
    pins = {label: _read_pin(label, r, assumptions) for label, r in labelled("pin")}
    leds = {label: _read_led(label, r, assumptions) for label, r in labelled("led")}
    known = sorted(i.lower() for i in rule_ids) if rule_ids is not None else None
    rules = {label.lower(): _read_rule(label, r, known) for label, r in labelled("rule")}

    ambient = _Reader(table("ambient"), ("ambient",), where, errors, fallback)
    ambient.check_keys(_AMBIENT)
    temperature = ambient.voltage_range("temperature", "temperature")
    if temperature is None:
        temperature = DEFAULT_TEMPERATURE_C
        if "temperature" not in ambient.table:
            assumptions.append(f"no [ambient] temperature: {_g(temperature[0])} °C to "
                               f"{_g(temperature[1])} °C assumed (common practice for "
                               f"battery-powered consumer products)")
    nominal_temperature = ambient.quantity("nominal", "temperature")
    if nominal_temperature is not None and not temperature[0] <= nominal_temperature \
            <= temperature[1]:
        ambient.fail("nominal", f"nominal {_g(nominal_temperature)} °C lies outside the "
                                f"temperature range")
    if nominal_temperature is None and "nominal" not in ambient.table:
        nominal_temperature = min(max(SPICE_NOMINAL_TEMPERATURE_C, temperature[0]),
                                  temperature[1])
        if nominal_temperature == SPICE_NOMINAL_TEMPERATURE_C:
            assumptions.append("no [ambient] nominal: 27 °C assumed (SPICE's nominal "
                               "temperature)")
        else:
            assumptions.append(f"no [ambient] nominal: SPICE's 27 °C lies outside the range, "
                               f"so {_g(nominal_temperature)} °C, its nearest end, assumed")
    if nominal_temperature is None:
        nominal_temperature = SPICE_NOMINAL_TEMPERATURE_C

    tolerance = _Reader(table("tolerance"), ("tolerance",), where, errors, fallback)
    tolerance.check_keys(_TOLERANCE)
    shares = {}
    for key, default, why in (
            ("resistor", DEFAULT_RESISTOR_TOLERANCE, "common practice: E24 film resistors"),
            ("capacitor", DEFAULT_CAPACITOR_TOLERANCE,
             "common practice: general-purpose ceramics")):
        value = tolerance.quantity(key, "fraction")
        if value is not None and not 0.0 <= value < 1.0:
            tolerance.fail(key, f"{key} tolerance must lie from 0 % up to below 100 %, got "
                                f"{tolerance.table[key]!r}")
            value = None
        if value is None:
            if key not in tolerance.table:
                assumptions.append(f"no [tolerance] {key}: ±{_g(default * 100)} % assumed "
                                   f"({why})")
            value = default
        shares[key] = value

    limits_reader = _Reader(table("limits"), ("limits",), where, errors, fallback)
    limits_reader.check_keys(_LIMITS)
    house_rule_seconds = limits_reader.quantity("house_rule_time", "time", positive=True)
    limits = Limits(
        max_elements=limits_reader.count("max_elements", 1) or DEFAULT_MAX_ELEMENTS,
        max_file_bytes=_byte_count(limits_reader, "max_file_bytes") or DEFAULT_MAX_FILE_BYTES,
        include_folders=tuple(limits_reader.folders("include_folders")),
        house_rule_seconds=house_rule_seconds or DEFAULT_HOUSE_RULE_SECONDS,
    )
    _guard_limits(limits, limits_reader, explicit, errors)
    house = _Reader(table("house_rules"), ("house_rules",), where, errors, fallback)
    house.check_keys(_HOUSE_RULES)
    rule_folders = house.folders("folders")

    if errors.items:
        if len(errors.items) == 1:
            raise errors.items[0]
        raise InputErrors(sorted(errors.items, key=_order))
    return Context(
        files=shown, supplies=supplies, pins=pins, leds=leds,
        temperature_C=(float(temperature[0]), float(temperature[1])),
        nominal_temperature_C=float(nominal_temperature),
        resistor_tolerance=shares["resistor"], capacitor_tolerance=shares["capacitor"],
        rules=rules, rule_folders=rule_folders, limits=limits, assumptions=assumptions,
        key_locations=dict(where),
    )


def _order(error: InputError) -> tuple[str, int, int]:
    location = error.location
    return (location.path, location.line, location.column) if location else ("", 0, 0)
