"""Reading design-context values: pint quantity strings into SI floats, TOML keys back to their place.

`parse_quantity("20 mA", "current", where, "max_current")` gives 0.02. Temperatures come
back in degrees Celsius (the report's `_C`), fractions as plain ratios ("50 %" -> 0.5).
`read_toml(path)` parses a TOML file and also returns where each key sits in it, because
tomllib gives no positions and every config error must name a line and column.
"""

from __future__ import annotations

import math
import re
import tomllib
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import pint

from drc.errors import InputError, Location
from drc.units import full_registry, ureg


@dataclass(frozen=True, slots=True)
class _Kind:
    """One kind of quantity a key may want: its SI unit, how to name it, an example."""

    unit: str            # the unit the float is returned in
    noun: str            # "a voltage"
    unit_words: str      # "volts"
    example: str         # a spelling that works


KINDS: dict[str, _Kind] = {
    "voltage": _Kind("V", "a voltage", "volts", "1.8 V"),
    "current": _Kind("A", "a current", "amperes", "20 mA"),
    "resistance": _Kind("ohm", "a resistance", "ohms", "40 ohm"),
    "capacitance": _Kind("F", "a capacitance", "farads", "10 uF"),
    "frequency": _Kind("Hz", "a frequency", "hertz", "2 kHz"),
    "temperature": _Kind("degC", "a temperature", "degrees", "-20 degC"),
    "fraction": _Kind("", "a share", "percent", "50 %"),
    "time": _Kind("s", "a time", "seconds", "10 ms"),
    # Ours, for the LED profiles' forward-voltage temperature coefficient.
    "voltage_per_temperature": _Kind("V/K", "a temperature coefficient", "volts per kelvin",
                                     "-2 mV/K"),
}

# A number, then whatever is left is the unit: "1.8V", "-20 degC", "1e-3 A", "10 uF".
_NUMBER = re.compile(r"\s*([+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?)\s*(.*?)\s*$")
_MICRO = str.maketrans({"µ": "u", "μ": "u"})   # micro sign U+00B5 and Greek mu U+03BC


def _describe(value: Any) -> str:
    if isinstance(value, bool):
        return f"the boolean {str(value).lower()}"
    if isinstance(value, (int, float)):
        return f"the number {value!r}"
    if isinstance(value, list):
        return "a list"
    if isinstance(value, dict):
        return "a table"
    return f"a {type(value).__name__}"


def _kind_of(dimensionality: Any, registry: pint.UnitRegistry) -> _Kind | None:
    for kind in KINDS.values():
        if kind.unit and registry.parse_units(kind.unit).dimensionality == dimensionality:
            return kind
    return None


def parse_quantity(text: Any, expected: str, where: Location | None, key: str) -> float:
    """A pint string as an SI float ("2 kHz" -> 2000.0); temperature in °C, percent as a ratio.

    Raises InputError at `where`, naming `key`, for a non-string, unparsable text, a missing
    unit or a unit of the wrong dimension.
    """
    kind = KINDS.get(expected)
    if kind is None:
        raise ValueError(f"parse_quantity: unknown kind {expected!r}; one of {sorted(KINDS)}")
    hint = f'write it as a string with its unit, e.g. {key} = "{kind.example}"'
    if not isinstance(text, str):
        raise InputError(where, f"{key} wants {kind.noun} in {kind.unit_words}; "
                                f"got {_describe(text)}: {hint}")
    match = _NUMBER.fullmatch(text.translate(_MICRO))
    if match is None:
        raise InputError(where, f"{key}: cannot read {text!r} as {kind.noun}; {hint}")
    number_text, unit_text = match.groups()
    if not unit_text:
        raise InputError(where, f"{key}: {text!r} has no unit; {hint}")
    if unit_text == "%":
        unit_text = "percent"
    # drc's own small registry reads the usual spellings and gives the same float as pint's
    # full one (drc/units.txt). Anything it cannot read or refuses is read again by the full
    # registry, so a rarer unit still works and every error reads as pint's full registry has it.
    try:
        return _convert(ureg, number_text, unit_text, text, kind, expected, where, key, hint)
    except Exception:
        return _convert(full_registry(), number_text, unit_text, text, kind, expected, where,
                        key, hint)


def _convert(registry: pint.UnitRegistry, number_text: str, unit_text: str, text: str,
             kind: _Kind, expected: str, where: Location | None, key: str, hint: str) -> float:
    """parse_quantity's reading of number and unit with one pint registry."""
    try:
        units = registry.parse_units(unit_text)
    except Exception as error:
        # pint's unit parser raises many kinds for a malformed expression ("V/" an
        # AssertionError, "(V" a tokenizer error): each is one unreadable unit to the user
        reason = str(error) if isinstance(error, (pint.UndefinedUnitError,
                                                  pint.errors.DefinitionSyntaxError)) \
            else "not a unit expression"
        raise InputError(where, f"{key}: unknown unit {unit_text!r} in {text!r} ({reason}); "
                                f"{hint}") from None
    quantity = registry.Quantity(float(number_text), units)
    target = registry.parse_units(kind.unit) if kind.unit else registry.dimensionless
    if quantity.dimensionality != target.dimensionality:
        got = _kind_of(units.dimensionality, registry)
        got_words = (f"{got.unit_words} ({got.noun})" if got is not None
                     else f"{units:~P} ({units.dimensionality})" if not quantity.dimensionless
                     else "a plain number")
        raise InputError(where, f"{key} wants {kind.unit_words} ({kind.noun}), got "
                                f"{got_words} in {text!r}; {hint}")
    try:
        value = float(quantity.to(target).magnitude)
    except pint.DimensionalityError:   # a temperature difference where a temperature is wanted
        raise InputError(where, f"{key} wants {kind.noun}, got {text!r}, which pint reads as "
                                f"a difference; {hint}") from None
    if not math.isfinite(value):
        raise InputError(where, f"{key}: {text!r} is not a finite value")
    if expected == "temperature" and value < -273.15:
        raise InputError(where, f"{key}: {text!r} is below absolute zero")
    return value


# ---------------------------------------------------------------- TOML with key positions

Path_ = tuple[str, ...]


class TomlLocations:
    """Where each table header and `key =` line sits in one TOML text.

    A small scanner, not a TOML parser: it follows table headers, dotted and quoted keys,
    strings and multi-line arrays, which covers the common layouts. `at(path)` gives the
    location of the longest known prefix of `path` (a key inside an inline table falls back
    to the line of the key that holds the table), else line 1, column 1.
    """

    def __init__(self, text: str, path: str):
        self.path = path
        self.keys: dict[Path_, Location] = {}
        self._scan(text)

    def at(self, path: Path_) -> Location:
        key = tuple(path)
        while key:
            if key in self.keys:
                return self.keys[key]
            key = key[:-1]
        return Location(self.path, 1, 1)

    def exact(self, path: Path_) -> Location | None:
        return self.keys.get(tuple(path))

    def _record(self, path: Path_, location: Location) -> None:
        """A key's place; its implicit parent tables are first seen here too."""
        for end in range(1, len(path) + 1):
            self.keys.setdefault(path[:end], location)

    # The scanner keeps two bits of state across lines: open brackets, and an open
    # multi-line string. A line is looked at for a header or a key only when both are closed.
    def _scan(self, text: str) -> None:
        table: Path_ = ()
        depth = 0
        open_string: str | None = None
        for number, line in enumerate(text.splitlines(), start=1):
            start = 0
            if depth == 0 and open_string is None:
                stripped = line.lstrip()
                indent = len(line) - len(stripped)
                if stripped.startswith("["):
                    array_table = stripped.startswith("[[")
                    inner = stripped[2:] if array_table else stripped[1:]
                    parts, rest = _read_key(inner)
                    if parts:
                        table = tuple(parts)
                        self._record(table, Location(self.path, number, indent + 1))
                    continue
                parts, rest = _read_key(stripped)
                if parts and rest.lstrip().startswith("="):
                    self._record(table + tuple(parts), Location(self.path, number, indent + 1))
                    start = len(line) - len(rest.lstrip()) + 1
                else:
                    continue
            depth, open_string = _follow(line, start, depth, open_string)


_BARE = re.compile(r"[A-Za-z0-9_-]+")


def _read_key(text: str) -> tuple[list[str], str]:
    """A (dotted, maybe quoted) key at the start of `text`: its parts and the text after it."""
    parts: list[str] = []
    rest = text
    while True:
        rest = rest.lstrip()
        if rest[:1] in ('"', "'"):
            quote = rest[0]
            end = 1
            piece = []
            while end < len(rest) and rest[end] != quote:
                if quote == '"' and rest[end] == "\\" and end + 1 < len(rest):
                    piece.append(rest[end + 1])
                    end += 2
                    continue
                piece.append(rest[end])
                end += 1
            if end >= len(rest):
                return [], text
            parts.append("".join(piece))
            rest = rest[end + 1:]
        else:
            match = _BARE.match(rest)
            if match is None:
                return [], text
            parts.append(match.group())
            rest = rest[match.end():]
        after = rest.lstrip()
        if after.startswith("."):
            rest = after[1:]
            continue
        return parts, rest


def _follow(line: str, start: int, depth: int, open_string: str | None) -> tuple[int, str | None]:
    """Bracket depth and open multi-line string after reading `line` from `start`."""
    i = start
    n = len(line)
    while i < n:
        if open_string is not None:
            if line.startswith(open_string, i):
                i += 3
                open_string = None
                continue
            if open_string == '"""' and line[i] == "\\":
                i += 2
                continue
            i += 1
            continue
        ch = line[i]
        if ch == "#":
            break
        if line.startswith('"""', i) or line.startswith("'''", i):
            open_string = line[i:i + 3]
            i += 3
            continue
        if ch in ('"', "'"):
            i += 1
            while i < n and line[i] != ch:
                i += 2 if (ch == '"' and line[i] == "\\") else 1
            i += 1
            continue
        if ch in "[{":
            depth += 1
        elif ch in "]}":
            depth = max(depth - 1, 0)
        i += 1
    return depth, open_string


_TOML_POSITION = re.compile(r"\(at line (\d+), column (\d+)\)")


def read_toml(path: Path, shown: str | None = None) -> tuple[dict[str, Any], TomlLocations]:
    """A TOML file's data and its key locations; unreadable or bad TOML is an InputError.

    `shown` is the path as locations should name it (default: `path` as given).
    """
    name = shown if shown is not None else str(path)
    try:
        raw = Path(path).read_bytes()
    except OSError as error:
        raise InputError(Location(name, 1, 1),
                         f"cannot read config file: {error.strerror or error}") from None
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as error:
        line = raw[:error.start].count(b"\n") + 1
        column = error.start - (raw.rfind(b"\n", 0, error.start) + 1) + 1
        raise InputError(Location(name, line, column),
                         "config file is not UTF-8 text (TOML must be UTF-8)") from None
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as error:
        message = str(error)
        found = _TOML_POSITION.search(message)
        if found:
            location = Location(name, int(found.group(1)), int(found.group(2)))
            message = message[:found.start()].rstrip()
        else:   # "(at end of document)"
            lines = text.splitlines() or [""]
            location = Location(name, len(lines), len(lines[-1]) + 1)
            message = re.sub(r"\s*\(at end of document\)", "", message)
        raise InputError(location, f"TOML syntax: {message}") from None
    return data, TomlLocations(text, name)
