"""Tests of drc.preferred: the IEC 60063 E series and naming resistor values."""

import math

import pytest
from hypothesis import given, strategies as st

from drc.errors import InputError
from drc.preferred import (at_or_above, at_or_below, format_resistance, nearest, series,
                           values_between)

# IEC 60063:2015, E24 (from memory of the standard's table; the widely printed list)
E24_STANDARD = (1.0, 1.1, 1.2, 1.3, 1.5, 1.6, 1.8, 2.0, 2.2, 2.4, 2.7, 3.0,
                3.3, 3.6, 3.9, 4.3, 4.7, 5.1, 5.6, 6.2, 6.8, 7.5, 8.2, 9.1)


def test_e24_is_the_standard_table():
    # IEC 60063:2015 E24 table
    assert series("E24") == E24_STANDARD


def test_e24_is_not_the_rounded_geometric_formula():
    formula = tuple(round(10 ** (i / 24), 1) for i in range(24))
    differ = {m for m, f in zip(series("E24"), formula) if m != f}
    # IEC 60063: these eight E24 values predate the formula and differ from 10**(i/24) rounded
    assert differ == {2.7, 3.0, 3.3, 3.6, 3.9, 4.3, 4.7, 8.2}


def test_e12_and_e6_are_every_second_value():
    # IEC 60063: E12 is every second E24 value, E6 every second E12 value
    assert series("E12") == series("E24")[::2]
    assert series("E6") == series("E12")[::2]


def test_e96_is_the_rounded_geometric_series():
    # IEC 60063: E48 and above are 10**(i/n) rounded to three significant figures
    assert len(series("E96")) == 96
    assert series("E96") == tuple(round(10 ** (i / 96), 2) for i in range(96))


def test_series_names_and_errors():
    assert series("e12") == series("E12")
    with pytest.raises(InputError):
        series("E7")


def test_nearest_across_decades():
    # E24 values (IEC 60063) in each decade; nearest in ratio
    assert nearest(4.6e3) == 4700.0
    assert nearest(0.0475) == 0.047
    assert nearest(9.6) == 10.0                  # the next decade's 1.0 is nearer than 9.1
    assert nearest(9.5, "E12") == 10.0           # sqrt(8.2*10) = 9.06: 9.5 is nearer 10
    assert nearest(1.04e6, "E6") == 1e6
    assert nearest(68.0, "E12") == 68.0


def test_at_or_above_and_below():
    # E24 (IEC 60063): the neighbours of 4.7 k are 4.3 k and 5.1 k
    assert at_or_above(4700.0) == 4700.0
    assert at_or_above(4700.0001) == 5100.0
    assert at_or_below(4699.0) == 4300.0
    assert at_or_above(9.2) == 10.0
    assert at_or_below(0.99) == 0.91
    assert at_or_below(4700.0000000001) == 4700.0   # float noise still counts as the value


def test_values_between_spans_decades():
    # E12 (IEC 60063): 8.2, then the next decade's 10 and 12
    assert values_between(8.0, 12.0, "E12") == (8.2, 10.0, 12.0)
    e24 = values_between(1.0, 1e6, "E24")
    # E24 over six decades and the closing 1 M: 6 * 24 + 1
    assert len(e24) == 145 and e24[0] == 1.0 and e24[-1] == 1e6
    assert list(e24) == sorted(e24)
    assert values_between(5.2, 5.5) == ()
    with pytest.raises(InputError):
        values_between(10.0, 1.0)


@given(st.floats(1e-3, 1e9))
def test_neighbours_bracket_any_value(value):
    lo, hi = at_or_below(value, "E24"), at_or_above(value, "E24")
    assert lo <= value * (1 + 1e-9) and hi >= value * (1 - 1e-9)
    mantissa = lambda x: round(x / 10 ** math.floor(math.log10(x) + 1e-12), 6)
    # each answer is an E24 value (IEC 60063) in its decade
    assert mantissa(lo) in E24_STANDARD and mantissa(hi) in E24_STANDARD
    assert nearest(value) in (lo, hi)


def test_bad_values_are_input_errors():
    for bad in (0.0, -1.0, float("nan"), float("inf"), "abc"):
        with pytest.raises(InputError):
            nearest(bad)


def test_format_resistance():
    # the way values are written on schematics (common practice)
    assert format_resistance(68.0) == "68 Ω"
    assert format_resistance(4700.0) == "4.7 kΩ"
    assert format_resistance(1e6) == "1 MΩ"
    assert format_resistance(10.2e3) == "10.2 kΩ"
    assert format_resistance(0.47) == "0.47 Ω"
    assert format_resistance(999.6) == "1 kΩ"
    assert format_resistance(0.0) == "0 Ω"
    with pytest.raises(InputError):
        format_resistance(-5.0)
