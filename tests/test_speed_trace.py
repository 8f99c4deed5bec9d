"""Tracing branches on a board of repeated cells: strings on a pin shared with another string
are merged and solved as one network (drc.analysis._merge_shared_pins, which now keeps the
strings that share no pin out of its union-find), and the common one-LED string takes its key
through a short path (drc.analysis._string_key).

The currents are held to the reference simulator, ngspice (`.op` with the pin's output
resistance as a resistor between its source and its net, the same SPICE diode law: the
ngspice manual's diode chapter).
"""

from __future__ import annotations

import os
import sys

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st

sys.path.insert(0, os.path.dirname(__file__))
import ngspice  # noqa: E402  (tests/ngspice.py, the harness)

from drc.analysis import analyse  # noqa: E402
from drc.context import load_context  # noqa: E402
from drc.expand import expand  # noqa: E402
from drc.solve import solve_string  # noqa: E402

# A scenario of our own: two strings hang on port pin PA (one source, one output resistance),
# one string on pin PB alone, and two alike strings on the rail.
CELLS = """* two strings sharing one pin, one alone on another, two on the rail
.model LRED D(IS=7.7e-19 N=2.0 RS=2.4 EG=2.3 XTI=3)
.model LGRN D(IS=2.8e-18 N=3.0 RS=14 EG=3.2 XTI=3)
V1 vdd 0 DC 3.3
VPA pa 0 DC 3.3
VPB pb 0 DC 3.3
R1 pa n1 220
D1 n1 0 LRED
R2 pa n2 150
D2 n2 0 LGRN
R3 pb n3 330
D3 n3 0 LRED
R4 vdd n4 470
D4 n4 0 LRED
R5 vdd n5 470
D5 n5 0 LRED
.end
"""
CONTEXT = """
[supply.VDD]
source = "V1"
range = ["3.3 V", "3.3 V"]

[pin.PA]
source = "VPA"
supply = "VDD"
output_resistance = "40 ohm"

[pin.PB]
source = "VPB"
supply = "VDD"
output_resistance = "40 ohm"
"""
PIN_OHM = 40.0


@pytest.fixture(scope="module")
def design(tmp_path_factory):
    folder = tmp_path_factory.mktemp("shared")
    path = folder / "cells.cir"
    path.write_text(CELLS)
    (folder / "drc.toml").write_text(CONTEXT)
    return analyse(expand(str(path)), load_context(path, None, rule_ids=None))


def _with_pin_resistance(deck: str) -> str:
    """The deck as ngspice sees the pins: each source behind its output resistance."""
    deck = deck.replace("VPA pa 0", "VPA pa_src 0").replace("VPB pb 0", "VPB pb_src 0")
    return deck.replace(".end", f"RPA pa_src pa {PIN_OHM}\nRPB pb_src pb {PIN_OHM}\n.end")


def test_only_the_strings_on_a_shared_pin_are_merged(design):
    """D1 and D2 share PA: one network branch holding both, where D1's string stood; D3 is
    alone on PB and the rail strings share no pin: they stay plain strings, in board order."""
    ids = [b.id for b in design.branches]
    assert ids == ["D1", "D3", "D4", "D5"]
    merged = design.branches[0]
    assert merged.network is not None and [l.name for l in merged.leds] == ["D1", "D2"]
    for b in design.branches[1:]:
        assert b.network is None and b.stages and len(b.leds) == 1


def test_merged_and_plain_strings_agree_with_ngspice(design):
    ngspice.require_ngspice()
    nets = ["n1", "n2", "n3", "n4", "n5"]
    found = ngspice.op(_with_pin_resistance(CELLS), [f"v({n})" for n in nets] + ["v(pa)", "v(pb)"])[None]
    drive = {"n1": "pa", "n2": "pa", "n3": "pb", "n4": None, "n5": None}
    ohm = {"n1": 220.0, "n2": 150.0, "n3": 330.0, "n4": 470.0, "n5": 470.0}
    current = {}
    for b in design.branches:
        for led in b.leds:
            current[led.element.nodes[0]] = float(b.current_A[led.name][design.corners.nominal])
    for net in nets:
        top = found[f"v({drive[net]})"] if drive[net] else 3.3
        expected = (top - found[f"v({net})"]) / ohm[net]
        assert current[net] == pytest.approx(expected, rel=1e-4), net


def test_the_one_led_string_gets_what_it_gets_solved_alone(design):
    """The short path for a one-LED string keys and solves it as the general path does: the
    numbers are solve_string's for that string on its own, to the last bit, and the twins
    D4 and D5 share them."""
    t = design.corners.temperature_K
    by_id = {b.id: b for b in design.branches}
    for ident in ("D3", "D4"):
        b = by_id[ident]
        phase = b.phases[0]
        alone = solve_string(phase.drive_V, b.series_resistance_ohm + phase.extra_resistance_ohm,
                             [[b.leds[0].params]], t)
        assert np.array_equal(b.current_A[ident], np.maximum(alone.diode_current_A[0][0], 0.0))
    assert np.array_equal(by_id["D4"].current_A["D4"], by_id["D5"].current_A["D5"])


def _traced(path):
    """Each branch as (id, drive, source, elements, nets, stages, leds, note, network)."""
    from pathlib import Path
    design = analyse(expand(str(path)), load_context(Path(path), None, rule_ids=None))
    return [(b.id, b.drive, b.source, [e.key for e in b.elements], list(b.nets),
             [[d.key for d in st] for st in b.stages], [l.name for l in b.leds], b.note,
             None if b.network is None else ([e.key for e in b.network.elements], b.network.nets),
             None if b.pump_region is None else [p.id for p in b.pump_region.pumps])
            for b in design.branches]


def _decks():
    from pathlib import Path
    root = Path(__file__).resolve().parent.parent
    found = sorted((root / "tests" / "netlists").rglob("*.cir")) + sorted((root / "samples").glob("*.cir"))
    return [p for p in found if "bad" not in p.parts]


@pytest.mark.parametrize("deck", _decks(), ids=lambda p: p.name)
def test_string_shortcut_traces_what_the_region_walk_traces(deck, monkeypatch):
    # a string whose two walks end at stops skips the region walk; the branches must be
    # exactly those the region walk gives (every test netlist and sample)
    from drc import analysis
    from drc.errors import InputError, InputErrors
    try:
        fast = _traced(deck)
    except (InputError, InputErrors):
        return                                   # a deck the reader refuses on purpose
    monkeypatch.setattr(analysis, "_STRING_SHORTCUT", False)
    assert _traced(deck) == fast


RANDOM_PARTS = ("R", "R", "D", "C", "X")


@settings(max_examples=150, deadline=None)
@given(st.lists(st.tuples(st.sampled_from(RANDOM_PARTS), st.integers(0, 5), st.integers(0, 5)),
                min_size=1, max_size=12))
def test_string_shortcut_on_random_topologies(parts):
    # random nets 0 (ground), n1..n5, a rail on n1, a toggling pin on n2: whatever hangs
    # where, the shortcut traces what the region walk traces
    import tempfile
    from pathlib import Path
    from drc import analysis
    lines = ["* random", ".model LW D(IS=3e-18 N=3.0 RS=10)", "V1 n1 0 DC 3.0",
             "VP n2 0 PULSE(0 3 0 1n 1n 0.25m 0.5m)", "DA n3 0 LW"]
    value = {"R": "100", "C": "1u", "D": "LW"}
    for k, (kind, a, b) in enumerate(parts):
        na, nb = ("0" if a == 0 else f"n{a}"), ("0" if b == 0 else f"n{b}")
        lines.append(f"X{k} {na} {nb} BOX" if kind == "X" else f"{kind}{k} {na} {nb} {value[kind]}")
    lines.append(".end")
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "r.cir"
        path.write_text("\n".join(lines) + "\n")
        fast = _traced(path)
        analysis._STRING_SHORTCUT = False
        try:
            assert _traced(path) == fast
        finally:
            analysis._STRING_SHORTCUT = True
