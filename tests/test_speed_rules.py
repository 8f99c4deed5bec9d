"""The rules' shared work done once: the series-resistor choice shared row by row between
branches, the preferred-number decades and the formatted quantities remembered. Each must
give what the plain computation gives."""

import itertools
import math

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st

from drc import advice, preferred
from drc.analysis import Corners
from drc.api import format_quantity
from drc.solve import choose_series_resistor, led_model_from_forward_voltages, solve_string
from drc.units import format_si

RED = led_model_from_forward_voltages(1.8, 2.0)
WHITE = led_model_from_forward_voltages(2.6, 3.1)


def _corners(rails):
    """Every combination of each rail's three values, three temperatures and the resistor
    tolerance ends (the capacitors at nominal)."""
    combos = list(itertools.product(*rails.values(), [-20.0, 27.0, 60.0], [0.95, 1.0, 1.05]))
    columns = list(zip(*combos))
    supply = {label: np.array(columns[k]) for k, label in enumerate(rails)}
    temperature = np.array(columns[len(rails)])
    factor = np.array(columns[len(rails) + 1])
    nominal = next(k for k, c in enumerate(combos)
                   if all(c[j] == v[1] for j, v in enumerate(rails.values()))
                   and c[-2] == 27.0 and c[-1] == 1.0)
    return Corners(supply, temperature, factor, np.ones(len(combos)), nominal)


def _brute_force(drive, fixed, stages, corners, visible, maximum):
    """One solve_string per E24 value (IEC 60063, 1 ohm to 1 Mohm) at every corner: the
    values whose least current is at least `visible` and greatest at most `maximum`."""
    ok = []
    for r in preferred.values_between(1.0, 1e6, "E24"):
        current = solve_string(drive, fixed + r * corners.resistor_factor, stages,
                               corners.temperature_K).current_A
        if current.min() >= visible and current.max() <= maximum:
            ok.append(r)
    return ok


def test_choice_shared_between_branches_is_each_branch_own():
    corners = _corners({"VBAT": [2.0, 3.0, 3.3], "V33": [3.135, 3.3, 3.465]})
    cases = [(corners.supply_V["VBAT"], 25.0, [[RED]], 0.5e-3, 10e-3),
             (corners.supply_V["V33"], 25.0, [[RED]], 0.5e-3, 10e-3),      # shares T and tolerance
             (corners.supply_V["V33"], 25.0, [[RED]], 1e-3, 15e-3),        # shares every row
             (corners.supply_V["VBAT"], 0.0, [[WHITE]], 0.5e-3, 20e-3),
             (corners.supply_V["V33"], 0.0, [[RED], [RED]], 1e-3, 20e-3)]
    advice.CHOICES.store.clear()
    advice.ROW_CURRENTS.store.clear()
    for drive, extra, stages, visible, maximum in cases:
        got = advice._choose(corners, drive, extra, stages, visible, maximum)
        fixed = np.full(corners.count, extra)
        assert list(got.acceptable_ohm) == _brute_force(drive, fixed, stages, corners, visible, maximum)
        alone = choose_series_resistor(drive, fixed, stages, corners.temperature_K, None, None,
                                       visible, maximum, candidate_factor=corners.resistor_factor)
        assert (got.verdict, got.acceptable_ohm, got.best_ohm) == \
            (alone.verdict, alone.acceptable_ohm, alone.best_ohm)
        assert got.zero_added_low_current_A == alone.zero_added_low_current_A
        assert np.array_equal(got.low_current_A, alone.low_current_A)
        assert np.array_equal(got.high_current_A, alone.high_current_A)
    assert advice.ROW_CURRENTS.hits > 0          # the later branches did reuse rows


@settings(max_examples=60, deadline=None)
@given(st.integers(min_value=2, max_value=40), st.integers(min_value=0, max_value=2**32 - 1),
       st.sampled_from([(RED, 0.5e-3, 10e-3), (WHITE, 0.5e-3, 20e-3)]),
       st.sampled_from([0.0, 25.0]))
def test_choice_on_the_bounding_rows_is_the_whole_table(count, seed, led, extra):
    # corners that are no grid (random drives, temperatures and tolerance ends, some
    # repeated): the choice read from the rows that bound each candidate's current is the
    # one read from every row (choose_series_resistor solves the whole table)
    rng = np.random.default_rng(seed)
    drive = rng.choice([1.8, 2.0, 2.2, 2.6, 3.0, 3.3], count) + rng.choice([0.0, 0.05], count)
    corners = Corners({"VBAT": drive}, rng.choice([-20.0, 27.0, 60.0], count),
                      rng.choice([0.95, 1.0, 1.05], count), np.ones(count), 0)
    params, visible, maximum = led
    advice.CHOICES.store.clear()
    advice.ROW_CURRENTS.store.clear()
    got = advice._choose(corners, drive, extra, [[params]], visible, maximum)
    # the key a branch's advice makes from its Phase's bytes and its stages' number is the
    # same key: the same remembered choice comes back
    assert advice._choose(corners, drive, extra, [[params]], visible, maximum,
                          drive_key=drive.tobytes(), stages_id=advice._stage_id([[params]])) is got
    alone = choose_series_resistor(drive, np.full(count, extra), [[params]],
                                   corners.temperature_K, None, None, visible, maximum,
                                   candidate_factor=corners.resistor_factor)
    assert (got.verdict, got.acceptable_ohm, got.best_ohm) == \
        (alone.verdict, alone.acceptable_ohm, alone.best_ohm)
    assert got.zero_added_low_current_A == alone.zero_added_low_current_A
    assert np.array_equal(got.low_current_A, alone.low_current_A)
    assert np.array_equal(got.high_current_A, alone.high_current_A)


def test_bounding_rows_on_a_grid_are_two_per_temperature():
    rows = np.array([(v, 25.0, t, f) for v in (1.8, 2.0, 2.2) for t in (253.15, 300.15)
                     for f in (0.95, 1.0, 1.05)])
    kept = rows[advice._bounding(rows)]
    assert sorted(map(tuple, kept)) == sorted(
        [(1.8, 25.0, t, 1.05) for t in (253.15, 300.15)] + [(2.2, 25.0, t, 0.95) for t in (253.15, 300.15)])


_E24 = (1.0, 1.1, 1.2, 1.3, 1.5, 1.6, 1.8, 2.0, 2.2, 2.4, 2.7, 3.0,
        3.3, 3.6, 3.9, 4.3, 4.7, 5.1, 5.6, 6.2, 6.8, 7.5, 8.2, 9.1)     # IEC 60063:2015, E24
_E12 = _E24[::2]


@settings(max_examples=200, deadline=None)
@given(st.floats(min_value=1e-3, max_value=1e8, allow_nan=False, allow_infinity=False))
def test_decades_remembered_per_series(value):
    # asked in turn, so that a decade remembered for one series is never read for the other
    for table, name in ((_E24, "E24"), (_E12, "e12"), (_E24, "E24")):
        decade = math.floor(math.log10(value))
        listed = sorted(m * 10.0 ** d for d in range(decade - 1, decade + 3) for m in table)
        expected = next(c for c in listed if c >= value * (1 - 1e-9))
        assert preferred.at_or_above(value, name) == pytest.approx(expected, rel=1e-12)


def test_format_quantity_is_format_si():
    values = [5e-4, 5e-4, 0.0, -0.0, 0.0, -2.5e-3, np.float64(1.2e-6), 3, float("nan"), 1e-16]
    for value in values:
        for unit in ("A", "V", "F"):
            assert format_quantity(value, unit) == format_si(value, unit)
            assert format_quantity(value, unit, 4) == format_si(value, unit, 4)


@pytest.mark.parametrize("value,unit,text", [
    (1e-7, "F", "100 nF"),           # 99.99999999999999 nF in floating point
    (2.2e-7, "F", "220 nF"),
    (9.996e-6, "F", "10.0 µF"),      # rounds up into the next decade's figures
    (1e-5, "F", "10.0 µF"),
    (4.7e-6, "F", "4.70 µF"),
    (0.1e-3, "A", "100 µA"),
])
def test_three_figures_counted_as_printed(value, unit, text):
    # three significant figures whatever the float's last bits (common practice in
    # engineering notation; the report's own convention)
    assert format_si(value, unit) == text
