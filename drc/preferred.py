"""Preferred numbers for resistors and capacitors: the IEC 60063 E series, and naming values.

The mantissas below are the tables of IEC 60063:2015 (E6, E12, E24 in its first table, E96
in the second), typed in by hand from memory of the standard's tables, not computed: E6 to
E24 are older than the geometric formula and several of their values (2.7, 3.0, 3.3, 3.6,
3.9, 4.3, 4.7, 8.2) are not 10**(i/24) rounded. The tests check the tables against the
standard's own structure (E12 is every second E24, E6 every second E12, E96 is the rounded
geometric series). Check against the text of the standard if you have it.

A series is named by its string, "E6", "E12", "E24" or "E96" (any case). Every function takes
SI values (ohms, farads, ...) over all decades; "nearest" means nearest in ratio (on a log
scale), as the series are geometric.
"""

from __future__ import annotations

import functools
import math

from drc.errors import InputError

_SERIES: dict[str, tuple[float, ...]] = {
    "E24": (1.0, 1.1, 1.2, 1.3, 1.5, 1.6, 1.8, 2.0, 2.2, 2.4, 2.7, 3.0,
            3.3, 3.6, 3.9, 4.3, 4.7, 5.1, 5.6, 6.2, 6.8, 7.5, 8.2, 9.1),
    "E12": (1.0, 1.2, 1.5, 1.8, 2.2, 2.7, 3.3, 3.9, 4.7, 5.6, 6.8, 8.2),
    "E6": (1.0, 1.5, 2.2, 3.3, 4.7, 6.8),
    "E96": (1.00, 1.02, 1.05, 1.07, 1.10, 1.13, 1.15, 1.18, 1.21, 1.24, 1.27, 1.30,
            1.33, 1.37, 1.40, 1.43, 1.47, 1.50, 1.54, 1.58, 1.62, 1.65, 1.69, 1.74,
            1.78, 1.82, 1.87, 1.91, 1.96, 2.00, 2.05, 2.10, 2.15, 2.21, 2.26, 2.32,
            2.37, 2.43, 2.49, 2.55, 2.61, 2.67, 2.74, 2.80, 2.87, 2.94, 3.01, 3.09,
            3.16, 3.24, 3.32, 3.40, 3.48, 3.57, 3.65, 3.74, 3.83, 3.92, 4.02, 4.12,
            4.22, 4.32, 4.42, 4.53, 4.64, 4.75, 4.87, 4.99, 5.11, 5.23, 5.36, 5.49,
            5.62, 5.76, 5.90, 6.04, 6.19, 6.34, 6.49, 6.65, 6.81, 6.98, 7.15, 7.32,
            7.50, 7.68, 7.87, 8.06, 8.25, 8.45, 8.66, 8.87, 9.09, 9.31, 9.53, 9.76),
}

# Relative slack when a value "is" a series value (4700.0000001 counts as 4.7 k).
_SLACK = 1e-9


def series(name: str) -> tuple[float, ...]:
    """The decade mantissas of a series, ascending in [1, 10).

    >>> series("E6")
    (1.0, 1.5, 2.2, 3.3, 4.7, 6.8)
    """
    key = str(name).strip().upper()
    if key not in _SERIES:
        raise InputError(None, f"unknown preferred-number series {name!r}; "
                               f"known: {', '.join(sorted(_SERIES, key=lambda s: int(s[1:])))}")
    return _SERIES[key]


def _check_positive(value: float, what: str = "value") -> float:
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise InputError(None, f"{what} {value!r} is not a number") from None
    if not math.isfinite(v) or v <= 0:
        raise InputError(None, f"{what} must be a positive finite number, not {value!r}")
    return v


def _decade_and_mantissa(value: float) -> tuple[int, float]:
    decade = math.floor(math.log10(value))
    mantissa = value / 10.0 ** decade
    if mantissa >= 10.0:          # log10 rounding at an exact power of ten
        decade, mantissa = decade + 1, mantissa / 10.0
    elif mantissa < 1.0:
        decade, mantissa = decade - 1, mantissa * 10.0
    return decade, mantissa


def _value(mantissa: float, decade: int) -> float:
    # Rounded to 12 significant digits so that 4.7 * 10**3 is 4700.0 and not 4700.000000000001.
    return float(f"{mantissa * 10.0 ** decade:.12g}")


@functools.lru_cache(maxsize=1024)
def _decade(key: str, decade: int) -> tuple[float, ...]:
    """One decade of a series (`key` as in _SERIES), ascending. Cached: a fix's search asks
    for the same few decades thousands of times, and each value costs a round trip through
    text; the result depends on nothing but the two arguments."""
    return tuple(_value(m, decade) for m in _SERIES[key])


def _around(value: float, name: str) -> tuple[float, ...]:
    """Series values from the decade below to the decade above `value`, ascending."""
    decade, _ = _decade_and_mantissa(value)
    series(name)                              # an unknown name is an error, as ever
    key = str(name).strip().upper()
    return _decade(key, decade - 1) + _decade(key, decade) + _decade(key, decade + 1)


def nearest(value: float, name: str = "E24") -> float:
    """The series value nearest to `value` in ratio (log scale); ties go to the higher.

    >>> nearest(5000.0, "E12")
    4700.0
    """
    v = _check_positive(value)
    candidates = _around(v, name)
    return min(candidates, key=lambda c: (abs(math.log(c / v)), -c))


def at_or_above(value: float, name: str = "E24") -> float:
    """The least series value that is not below `value`.

    >>> at_or_above(4701.0, "E24")
    5100.0
    """
    try:
        return _at_or_above(value, name)
    except TypeError:                 # an unhashable value: the plain path says what it is
        return _at_or_above.__wrapped__(value, name)


@functools.lru_cache(maxsize=4096)
def _at_or_above(value, name: str) -> float:
    """at_or_above, remembered: a pure function of its two arguments, asked for the same
    few values once per finding (a pin's limit, say) by thousands of findings."""
    v = _check_positive(value)
    return next(c for c in _around(v, name) if c >= v * (1 - _SLACK))


def at_or_below(value: float, name: str = "E24") -> float:
    """The greatest series value that is not above `value`.

    >>> at_or_below(4699.0, "E24")
    4300.0
    """
    v = _check_positive(value)
    return next(c for c in reversed(_around(v, name)) if c <= v * (1 + _SLACK))


def values_between(lo: float, hi: float, name: str = "E24") -> tuple[float, ...]:
    """Every series value in [lo, hi] over all decades, ascending.

    >>> values_between(8.0, 12.0, "E12")
    (8.2, 10.0, 12.0)
    """
    low = _check_positive(lo, "lower end")
    high = _check_positive(hi, "upper end")
    if high < low:
        raise InputError(None, f"empty range: upper end {hi!r} is below lower end {lo!r}")
    mantissas = series(name)
    first, _ = _decade_and_mantissa(low)
    last, _ = _decade_and_mantissa(high)
    out = [_value(m, d) for d in range(first, last + 1) for m in mantissas]
    return tuple(c for c in out if low * (1 - _SLACK) <= c <= high * (1 + _SLACK))


_PREFIXES = ((1e9, "G"), (1e6, "M"), (1e3, "k"), (1.0, ""))


def format_resistance(ohm: float) -> str:
    """A resistance as people write it on a schematic, to 3 significant digits at most.

    >>> format_resistance(68.0), format_resistance(4700.0), format_resistance(1e6)
    ('68 Ω', '4.7 kΩ', '1 MΩ')
    """
    try:
        v = float(ohm)
    except (TypeError, ValueError):
        raise InputError(None, f"resistance {ohm!r} is not a number") from None
    if not math.isfinite(v) or v < 0:
        raise InputError(None, f"resistance must be finite and not negative, not {ohm!r}")
    if v == 0:
        return "0 Ω"
    return _resistance_text(v)


@functools.lru_cache(maxsize=4096)
def _resistance_text(v: float) -> str:
    """format_resistance of a finite v > 0. Cached: the fixes name the same few values for
    every finding of a repeated cell; the text depends on v alone."""
    rounded = float(f"{v:.3g}")
    for scale, prefix in _PREFIXES:
        if rounded >= scale:
            break
    else:
        scale, prefix = 1.0, ""
    number = f"{rounded / scale:.3g}"
    if "e" in number:             # below 1 mΩ or above 999 GΩ: plain scientific notation
        return f"{rounded:.3g} Ω"
    return f"{number} {prefix}Ω"
