"""The plain strings solved together (drc.analysis.solve_strings: the distinct strings of one
set of diodes in one solve_string call over their corners laid end to end) and the series
resistor's verdict on its own (drc.solve.series_verdict).

A string solved in a batch must get the very numbers it gets solved alone; both must agree
with the reference simulator, ngspice (`.op`, the same SPICE diode law: Shockley's law with
series resistance, the ngspice manual's diode chapter). The verdict follows its definition:
the E24 values (IEC 60063) whose least current is at least the visible current and whose
greatest is at most the maximum.
"""

from __future__ import annotations

import os
import sys

import numpy as np
import pytest

sys.path.insert(0, os.path.dirname(__file__))
import ngspice  # noqa: E402  (tests/ngspice.py, the harness)

from drc import preferred  # noqa: E402
from drc.analysis import analyse  # noqa: E402
from drc.context import load_context  # noqa: E402
from drc.expand import expand  # noqa: E402
from drc.solve import (choose_series_resistor, led_model_from_forward_voltages,  # noqa: E402
                       series_currents, series_verdict, solve_string)

# A scenario of our own: cells on two rails, two of them alike under other names (R1/D1 and
# R5/D7), a string of two LEDs and one of two white LEDs side by side.
CELLS = """* indicator cells on two rails
.model LRED D(IS=7.7e-19 N=2.0 RS=2.4 EG=2.3 XTI=3)
.model LWHT D(IS=2.8e-18 N=3.0 RS=14 EG=3.2 XTI=3)
V1 a 0 DC 3.3
V2 b 0 DC 5
R1 a n1 150
D1 n1 0 LRED
R2 a n2 220
D2 n2 0 LRED
R3 b n3 100
D3 n3 n4 LWHT
D4 n4 0 LRED
R4 b n5 330
D5 n5 0 LWHT
D6 n5 0 LWHT
R5 a n6 150
D7 n6 0 LRED
.end
"""
# each branch: its resistor, the rail's net and voltage, the net after the resistor
RESISTORS = {"D1": ("R1", 3.3, "n1"), "D2": ("R2", 3.3, "n2"), "D3": ("R3", 5.0, "n3"),
             "D5": ("R4", 5.0, "n5"), "D7": ("R5", 3.3, "n6")}


@pytest.fixture(scope="module")
def design(tmp_path_factory):
    path = tmp_path_factory.mktemp("cells") / "cells.cir"
    path.write_text(CELLS)
    return analyse(expand(str(path)), load_context(path, None, rule_ids=None))


def test_each_string_in_the_batch_gets_what_it_gets_alone(design):
    """Every string of one diode (and the series pair) against solve_string on its own,
    at every corner, to the last bit."""
    corners = design.corners
    t = corners.temperature_K
    by_id = {b.id: b for b in design.branches}
    for ident in ("D1", "D2", "D3", "D7"):
        b = by_id[ident]
        phase = b.phases[0]
        stages = [[led.params] for led in b.leds]
        alone = solve_string(phase.drive_V, b.series_resistance_ohm + phase.extra_resistance_ohm,
                             stages, t)
        for led, st in zip(b.leds, alone.diode_current_A):
            assert np.array_equal(b.current_A[led.name], np.maximum(st[0], 0.0))
    # the twins share one solution
    assert np.array_equal(by_id["D1"].current_A["D1"], by_id["D7"].current_A["D7"])


def test_batched_strings_agree_with_ngspice(design):
    ngspice.require_ngspice()
    nets = sorted({net for _, _, net in RESISTORS.values()})
    found = ngspice.op(CELLS, [f"v({n})" for n in nets])[None]
    by_id = {b.id: b for b in design.branches}
    nominal = design.corners.nominal
    for ident, (resistor, rail_V, net) in RESISTORS.items():
        ohm = design.element(resistor).value
        expected = (rail_V - found[f"v({net})"]) / ohm
        b = by_id[ident]
        got = sum(float(b.current_A[led.name][nominal]) for led in b.leds if led.name in ("D5", "D6")) \
            if ident == "D5" else float(b.current_A[ident][nominal])
        assert got == pytest.approx(expected, rel=1e-4), ident


def test_series_verdict_follows_its_definition():
    """A made-up table: only the 100 and 110 ohm columns keep every current within 1..10 mA;
    110 ohm gives more current there than 100 (the table says so), so it is the best."""
    candidates = preferred.values_between(1.0, 1e6, "E24")
    count = 1 + len(candidates)
    low = np.full(count, 0.5e-3)
    high = np.full(count, 20e-3)
    for ohm, least, greatest in ((100.0, 2e-3, 8e-3), (110.0, 1.5e-3, 9e-3)):
        column = 1 + candidates.index(ohm)
        low[column], high[column] = least, greatest
    choice = series_verdict(low, high, candidates, 1e-3, 10e-3)
    assert choice.verdict == "ok"
    assert choice.acceptable_ohm == (100.0, 110.0)
    assert choice.best_ohm == 110.0
    low[0] = 0.2e-3
    nothing_fits = series_verdict(low, np.full(count, 20e-3), candidates, 1e-3, 10e-3)
    assert nothing_fits.verdict == "too-dim" and nothing_fits.best_ohm is None


def test_choose_series_resistor_is_the_table_then_the_verdict():
    """choose_series_resistor is series_currents, the corner masks, then series_verdict."""
    led = led_model_from_forward_voltages(1.8, 2.0)
    drive = np.array([3.0, 3.3, 3.6])
    fixed = np.array([25.0, 25.0, 25.0])
    t = np.array([253.15, 300.15, 333.15])
    low, high = np.array([True, True, False]), np.array([False, True, True])
    whole = choose_series_resistor(drive, fixed, [[led]], t, low, high, 1e-3, 15e-3)
    candidates, current = series_currents(drive, fixed, [[led]], t)
    parts = series_verdict(np.min(current[low], axis=0), np.max(current[high], axis=0),
                           candidates, 1e-3, 15e-3)
    assert whole.verdict == parts.verdict == "ok"
    assert (whole.acceptable_ohm, whole.best_ohm, whole.message) == \
        (parts.acceptable_ohm, parts.best_ohm, parts.message)
    assert np.array_equal(whole.low_current_A, parts.low_current_A)
    assert np.array_equal(whole.high_current_A, parts.high_current_A)
