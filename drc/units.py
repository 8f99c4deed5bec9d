"""The one pint registry, and turning quantities into SI floats and back into text."""

from __future__ import annotations

import pint

ureg = pint.UnitRegistry(autoconvert_offset_to_baseunit=True)
ureg.formatter.default_format = "~P"


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
    a = abs(x)
    if a >= 100:
        return max(digits - 3, 0)
    if a >= 10:
        return max(digits - 2, 0)
    return max(digits - 1, 0)
