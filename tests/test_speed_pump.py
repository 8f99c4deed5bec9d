"""The pump model's Newton stop on a residual of pure rounding (drc.pumpmodel._junctions).

A doubler whose transfer diode feeds the LED directly, with no reservoir capacitor: the node
between them is held only by the model's 1 nS to ground, so the reduced port matrix Z has
entries near 1e9 ohm and the junction residual cannot fall below some 1e-8 V in double
precision. The model must still agree with ngspice there, and must not spend
MAX_NEWTON_ITERATIONS on every step where that happens. The circuit is a scenario of our own.
"""

from __future__ import annotations

import os
import sys

import numpy as np
import pytest

sys.path.insert(0, os.path.dirname(__file__))
from ngspice import require_ngspice  # noqa: E402
from test_pumpmodel import (CORNERS, SCHOTTKY, SUPPLY, TEMPERATURE_K, WHITE_LED,  # noqa: E402
                            reference)

from drc import pumpmodel  # noqa: E402

SUPPLY_HIGH = SUPPLY + 1.3      # 3.1 V at nominal: some 15 mA through the LED
from drc.pumpmodel import DiodeBranch, PinDrive, PumpNetwork, RailDrive, simulate_periodic  # noqa: E402


def unbuffered_doubler():
    """The rail charges the pump capacitor through D1; the pin lifts it; D2 feeds the LED,
    whose cathode returns to ground through 47 ohm. Nothing but the diodes touches `out`."""
    return PumpNetwork(
        nodes=["vdd", "pa", "mid", "out", "k"],
        pins=[PinDrive("PA", "pa", SUPPLY_HIGH, 40.0, 2000.0)],
        rails=[RailDrive("DD", "vdd", SUPPLY_HIGH)],
        resistors=[("k", "0", 47.0)],
        capacitors=[("pa", "mid", 10e-6)],
        diodes=[DiodeBranch("D1", "vdd", "mid", SCHOTTKY),
                DiodeBranch("D2", "mid", "out", SCHOTTKY),
                DiodeBranch("LED", "out", "k", WHITE_LED)],
    )


def test_unbuffered_doubler_against_ngspice():
    require_ngspice()
    network = unbuffered_doubler()
    model = simulate_periodic(network, TEMPERATURE_K, "out", "LED", 0.5e-3)
    assert model.settled.all()
    for corner in range(len(CORNERS)):
        ref = reference(network, corner, "LED", "out", 40)
        where = f"at {CORNERS[corner]}"
        # ngspice .tran uic, steady state: the LED's average current within 10%
        assert model.load_average_A[corner] == pytest.approx(ref["load_average_A"], rel=0.10), where
        # ngspice: greatest |pin current| in the first three periods from rest, within 10%
        assert model.startup_surge_A["PA"][corner] == pytest.approx(ref["surge_A"], rel=0.10), where


def test_rounding_limited_residual_stops_newton(monkeypatch):
    """Each step needs a few iterations; before the round-off test, every step of the LED's
    lit phase ran all MAX_NEWTON_ITERATIONS (the residual stayed above 1e-8 V)."""
    calls = []
    original = pumpmodel._Compiled.diode_current

    def counting(self, vj):
        calls.append(1)
        return original(self, vj)

    monkeypatch.setattr(pumpmodel._Compiled, "diode_current", counting)
    result = simulate_periodic(unbuffered_doubler(), TEMPERATURE_K, "out", "LED", 0.5e-3)
    steps = result.periods_simulated * (len(result.waveform_time_s) - 1)
    assert np.isfinite(result.load_average_A).all()
    assert len(calls) < 8 * steps
