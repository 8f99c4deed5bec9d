"""A PULSE's edges: drc takes each as a step at its middle, and says so in the report's
assumptions where the edges are more than a hundredth of the period. Scenarios of our own
(tests/netlists/branches/): pulse_pin (1 us edges) and pulse_slow_edges (the same pin and
LED, the same high time counted edge middle to edge middle, with 100 us edges).

Against ngspice .tran: with 1 us edges drc's LED average is within 1 %; with 100 us edges
it is more than 5 % off, which is why the report has to say what it assumed.
"""

from __future__ import annotations

import os
import sys
from pathlib import Path

import pytest

sys.path.insert(0, os.path.dirname(__file__))
import ngspice  # noqa: E402

from drc.engine import run_check  # noqa: E402

HERE = Path(__file__).resolve().parent / "netlists" / "branches"
PERIOD_S = 1e-3


def _report(name: str) -> dict:
    report, _, _ = run_check([str(HERE / f"{name}.cir")], None, [])
    return report


def _ngspice_average(name: str) -> float:
    """D1's average over the 5th period of ngspice .tran (uic), at 27 degC, the pin's
    source behind its configured 40 ohm, the current sensed by a 0 V source."""
    text = (HERE / f"{name}.cir").read_text()
    deck = text.replace("D1 a 0 LRED", "D1 a s LRED\nVsense s 0 DC 0").replace(
        "VPC1 pc1 0 PULSE", "Rout pd pc1 40\nVPC1 pd 0 PULSE")
    assert deck.count("Vsense") == 1 and "Rout" in deck
    return ngspice.tran_average(deck, "i(Vsense)", PERIOD_S, 5, points=2000,
                                temperature_C=27.0, capped=True)


def _edge_notes(report: dict) -> list[str]:
    return [a for a in report["assumptions"] if "PULSE edges" in a]


def test_fast_edges_need_no_word_and_agree_with_ngspice():
    report = _report("pulse_pin")
    assert _edge_notes(report) == []
    [branch] = report["branches"]
    assert branch["current_A"]["nominal"] == pytest.approx(_ngspice_average("pulse_pin"), rel=0.01)


def test_slow_edges_are_said_to_be_steps_and_are_off():
    report = _report("pulse_slow_edges")
    [note] = _edge_notes(report)
    assert note.startswith("VPC1: ") and "20 % of the period" in note
    [branch] = report["branches"]
    drc = branch["current_A"]["nominal"]
    # the same high time, edge middle to edge middle: drc's answer is the fast pin's
    assert drc == pytest.approx(_report("pulse_pin")["branches"][0]["current_A"]["nominal"])
    # ngspice follows the LED along the edges: more than 5 % away
    assert abs(drc / _ngspice_average("pulse_slow_edges") - 1) > 0.05


# A PULSE's levels as a pin drive: the low level is taken as ground and the high level as
# the pin's supply; where the PULSE says otherwise, the report says what it took.
LEVELS = """Porch sign: a red LED on a PWM pin, the only supply 3.3 V
.model LRED D(IS=1e-19 N=1.8 RS=3 EG=2.0 XTI=3)
VDD vdd 0 DC 3.3
VP p 0 PULSE({low} {high} 0 10n 10n 0.5m 1m)
R1 p a 150
DR a vdd_ret LRED
RRET vdd_ret 0 1m
.end
"""


@pytest.mark.parametrize("low,high,said", [
    ("0", "3.3", None),
    ("1", "3.3", "VP: PULSE low level 1 V taken as 0 V"),
    ("0", "2.5", "its PULSE level 2.5 V is not VDD's 3.3 V: the pin is taken at VDD's"),
])
def test_pulse_levels_that_are_not_ground_and_the_supply_are_said(tmp_path, low, high, said):
    path = tmp_path / "levels.cir"
    path.write_text(LEVELS.format(low=low, high=high))
    report, _, _ = run_check([str(path)], None, [])
    lines = [a for a in report["assumptions"] if a.startswith("VP:")]
    if said is None:
        assert not any("low level" in a or "is not VDD" in a for a in lines), lines
    else:
        assert any(said in a for a in lines), lines
