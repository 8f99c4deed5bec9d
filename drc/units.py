"""The pint registries, and turning quantities into SI floats and back into text.

`ureg` is built from drc/units.txt: the SI prefixes and the units drc's own files and the
usual config spellings use (V, A, ohm, F, H, Hz, s, K, degC, W, %, ppm, ...), each defined
exactly as pint's own definition files define it. Loading it takes milliseconds; pint's
whole default file takes about 140 ms, which every `drc check` paid at import.

`full_registry()` is pint's whole default registry, built the first time a spelling needs it
(degF, min, delta_degC, a misspelt unit...). drc/quantities.py reads a quantity with `ureg`
first and, whenever `ureg` cannot read it or the value is refused, reads it again with the
full registry, so the result and every error message are what pint's full registry gives.
"""

from __future__ import annotations

import functools
from pathlib import Path

import pint

DEFINITIONS_FILE = Path(__file__).with_name("units.txt")

ureg = pint.UnitRegistry(str(DEFINITIONS_FILE), autoconvert_offset_to_baseunit=True)
ureg.formatter.default_format = "~P"


@functools.cache
def full_registry() -> pint.UnitRegistry:
    """pint's whole default registry (every unit pint knows), built once, on first use."""
    registry = pint.UnitRegistry(autoconvert_offset_to_baseunit=True)
    registry.formatter.default_format = "~P"
    return registry


_PREFIXES = [(1e9, "G"), (1e6, "M"), (1e3, "k"), (1.0, ""), (1e-3, "m"), (1e-6, "µ"),
             (1e-9, "n"), (1e-12, "p"), (1e-15, "f")]


def format_si(value: float, unit: str, digits: int = 3) -> str:
    """A float in SI base units as text with an engineering prefix: 0.00052, "A" -> "0.520 mA"."""
    if value is None:
        return "?"
    if value != value:
        return f"nan {unit}"
    if unit in ("V", "%", "°C", "") or value == 0:
        return f"{value:.{max(digits - 1, 0)}f} {unit}".rstrip()
    magnitude = abs(value)
    if magnitude < 1e-15:
        return f"under 1 f{unit}" if value > 0 else f"{'-' if value < 0 else ''}0 {unit}"
    for scale, prefix in _PREFIXES:
        if magnitude >= scale * 0.9995:
            return f"{value / scale:.{_decimals(value / scale, digits)}f} {prefix}{unit}"
    return f"{value:.3g} {unit}"


def _decimals(x: float, digits: int) -> int:
    # the magnitude as it prints to `digits` figures: 1e-7 F is 99.99999999999999 nF, which
    # is "100 nF", not "100.0 nF"
    a = float(f"{abs(x):.{max(digits, 1)}g}")
    if a >= 100:
        return max(digits - 3, 0)
    if a >= 10:
        return max(digits - 2, 0)
    return max(digits - 1, 0)
