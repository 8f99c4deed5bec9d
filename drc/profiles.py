"""The built-in profiles: battery chemistries per cell, the default port pin, LED colours.

The numbers live in `profiles.toml` beside this module, each entry with its provenance;
this module reads that file once (see `load`) and hands out frozen dataclasses in SI floats.

    >>> battery("alkaline").low_V
    0.9
    >>> infer_colour(1.82)
    'red'
"""

from __future__ import annotations

import difflib
import functools
import math
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from drc.errors import InputError, InputErrors
from drc.quantities import TomlLocations, parse_quantity, read_toml

PROFILES_FILE = Path(__file__).with_name("profiles.toml")

DEFAULT_PIN = "cmos"

# Colours that share a forward voltage are told apart by this order: the first wins.
# Green, blue and white share 2.6 V at 1 mA: "white" is returned, because white is the
# commonest indicator of the three and it carries the eye-safety caution, so a guess never
# drops a caution. Amber and yellow share 1.9 V and every other figure: "amber" is returned.
TIE_ORDER = ("white", "blue", "green", "amber", "yellow", "red", "infrared")


@dataclass(frozen=True, slots=True)
class BatteryProfile:
    """One cell of a chemistry: its end-of-life, fresh and label voltages."""

    name: str
    low_V: float
    high_V: float
    nominal_V: float
    provenance: str


@dataclass(frozen=True, slots=True)
class PinProfile:
    """A port pin's defaults: drive strength, ratings and its clamp diode to the supply."""

    name: str
    output_resistance_ohm: float
    max_current_A: float
    clamp_above_supply_V: float    # the clamp conducts above supply + this
    clamp_current_A: float         # the most current the clamp may take
    package_current_A: float       # the most the whole package may source or sink
    provenance: str


@dataclass(frozen=True, slots=True)
class LedProfile:
    """An LED colour's typical figures, used where the netlist and the config say nothing."""

    colour: str
    vf_1mA_V: float
    vf_20mA_V: float
    max_current_A: float
    max_reverse_V: float
    visible_current_A: float
    tempco_V_per_K: float
    eye_safety: bool               # the colour itself carries an eye-safety caution
    provenance: str


@dataclass(frozen=True, slots=True)
class Profiles:
    """Everything in profiles.toml, keyed by lower-case name, in file order."""

    batteries: dict[str, BatteryProfile]
    pins: dict[str, PinProfile]
    leds: dict[str, LedProfile]
    path: str


_SCHEMA: dict[str, dict[str, str]] = {
    "battery": {"low": "voltage", "high": "voltage", "nominal": "voltage"},
    "pin": {"output_resistance": "resistance", "max_current": "current",
            "clamp_above_supply": "voltage", "clamp_current": "current",
            "package_current": "current"},
    "led": {"vf_1mA": "voltage", "vf_20mA": "voltage", "max_current": "current",
            "max_reverse": "voltage", "visible_current": "current",
            "tempco": "voltage_per_temperature"},
}
_FLAGS = {"led": {"eye_safety"}}


def _read_entry(group: str, name: str, table: Any, where: TomlLocations,
                errors: list[InputError]) -> dict[str, Any] | None:
    """One entry's values in SI floats, or None after recording what is wrong with it."""
    here = (group, name)
    if not isinstance(table, dict):
        errors.append(InputError(where.at(here), f"[{group}.{name}] must be a table"))
        return None
    wanted = set(_SCHEMA[group]) | _FLAGS.get(group, set()) | {"provenance"}
    values: dict[str, Any] = {}
    for key in sorted(set(table) - wanted):
        errors.append(InputError(where.at(here + (key,)),
                                 f"unknown key {key!r} in [{group}.{name}]"))
    for key in sorted(wanted - set(table)):
        errors.append(InputError(where.at(here), f"[{group}.{name}] lacks {key!r}"))
    for key, kind in _SCHEMA[group].items():
        if key in table:
            try:
                values[key] = parse_quantity(table[key], kind, where.at(here + (key,)), key)
            except InputError as error:
                errors.append(error)
    for key in _FLAGS.get(group, set()) | {"provenance"}:
        if key in table:
            wanted_type = str if key == "provenance" else bool
            if not isinstance(table[key], wanted_type):
                errors.append(InputError(where.at(here + (key,)),
                                         f"{key} in [{group}.{name}] must be a "
                                         f"{wanted_type.__name__}"))
            values[key] = table[key]
    return values if set(values) == wanted else None


def load_file(path: Path) -> Profiles:
    """Read a profiles file (the built-in one, or a test's); bad data is an InputErrors."""
    data, where = read_toml(path)
    errors: list[InputError] = []
    for group in sorted(set(data) - set(_SCHEMA)):
        errors.append(InputError(where.at((group,)), f"unknown table [{group}] in profiles"))
    read: dict[str, dict[str, dict[str, Any]]] = {group: {} for group in _SCHEMA}
    for group in _SCHEMA:
        for name, table in data.get(group, {}).items():
            values = _read_entry(group, name, table, where, errors)
            if values is not None:
                read[group][name.lower()] = values
    for name, v in read["battery"].items():
        if not v["low"] <= v["nominal"] <= v["high"]:
            errors.append(InputError(where.at(("battery", name)),
                                     f"[battery.{name}]: nominal must lie between low and high"))
    if DEFAULT_PIN not in read["pin"]:
        errors.append(InputError(where.at(()), f"profiles lack the default [pin.{DEFAULT_PIN}]"))
    if errors:
        raise InputErrors(errors)
    return Profiles(
        batteries={n: BatteryProfile(n, v["low"], v["high"], v["nominal"], v["provenance"])
                   for n, v in read["battery"].items()},
        pins={n: PinProfile(n, v["output_resistance"], v["max_current"],
                            v["clamp_above_supply"], v["clamp_current"],
                            v["package_current"], v["provenance"])
              for n, v in read["pin"].items()},
        leds={n: LedProfile(n, v["vf_1mA"], v["vf_20mA"], v["max_current"], v["max_reverse"],
                            v["visible_current"], v["tempco"], v["eye_safety"],
                            v["provenance"])
              for n, v in read["led"].items()},
        path=str(path),
    )


@functools.cache
def load() -> Profiles:
    """The built-in profiles, read from profiles.toml once per process."""
    return load_file(PROFILES_FILE)


def _lookup(table: dict[str, Any], name: str, what: str) -> Any:
    key = str(name).strip().lower()
    if key in table:
        return table[key]
    close = difflib.get_close_matches(key, list(table), n=1)
    hint = f"; did you mean {close[0]!r}?" if close else ""
    raise KeyError(f"unknown {what} {name!r}{hint} (known: {', '.join(table)})")


def battery(name: str) -> BatteryProfile:
    """A chemistry's per-cell profile by name (any case); KeyError names the closest one."""
    return _lookup(load().batteries, name, "battery")


def battery_names() -> tuple[str, ...]:
    """The built-in chemistries, in file order."""
    return tuple(load().batteries)


def pin_default() -> PinProfile:
    """The default port-pin profile (a small CMOS controller)."""
    return load().pins[DEFAULT_PIN]


def led(colour: str) -> LedProfile:
    """A colour's LED profile by name (any case); KeyError names the closest colour."""
    return _lookup(load().leds, colour, "LED colour")


def colours() -> tuple[str, ...]:
    """The built-in LED colours, in file order."""
    return tuple(load().leds)


def infer_colour(vf_at_1mA_V: float) -> str:
    """The colour whose forward voltage at 1 mA is nearest; ties go by TIE_ORDER.

    Green, blue and white share 2.6 V, so anything nearest that gives "white".
    """
    if not math.isfinite(vf_at_1mA_V):
        raise ValueError(f"infer_colour: forward voltage must be finite, got {vf_at_1mA_V!r}")
    leds = load().leds
    best = min(abs(p.vf_1mA_V - vf_at_1mA_V) for p in leds.values())
    tied = [c for c, p in leds.items() if abs(p.vf_1mA_V - vf_at_1mA_V) <= best + 1e-9]
    ranked = sorted(tied, key=lambda c: TIE_ORDER.index(c) if c in TIE_ORDER else len(TIE_ORDER))
    return ranked[0]
