"""drc/flicker.py against IEEE Std 1789-2015's lines, as the domain brief gives them (from
memory; check against the standard's text): low-risk below 90 Hz Mod% < 0.025 f, 90..1250 Hz
Mod% < 0.08 f, above 1250 Hz none; no observable effect below 90 Hz 0.01 f, 90..3000 Hz
0.0333 f, above none. Modulation (percent flicker, IEEE 1789 / IES): 100 (Lmax-Lmin)/(Lmax+Lmin).
"""

import math

import numpy as np
import pytest

from drc import flicker

EPS = 1e-3  # relative step inside / outside a line

LOW_RISK = [(10.0, 0.025), (50.0, 0.025), (89.0, 0.025), (90.0, 0.08), (500.0, 0.08), (1250.0, 0.08)]
NO_EFFECT = [(10.0, 0.01), (50.0, 0.01), (89.0, 0.01), (90.0, 0.0333), (1000.0, 0.0333), (3000.0, 0.0333)]


@pytest.mark.parametrize("f,slope", LOW_RISK)
def test_low_risk_line(f, slope):
    line = slope * f
    assert flicker.low_risk_limit(f) == pytest.approx(line)
    assert flicker.verdict(f, line * (1 - EPS)) in ("low-risk", "no-effect")
    assert flicker.verdict(f, line * (1 + EPS)) == "outside"


@pytest.mark.parametrize("f,slope", NO_EFFECT)
def test_no_effect_line(f, slope):
    line = slope * f
    assert flicker.no_effect_limit(f) == pytest.approx(line)
    assert flicker.verdict(f, line * (1 - EPS)) == "no-effect"
    above = flicker.verdict(f, line * (1 + EPS))
    assert above != "no-effect"
    # just above the no-effect line is still under the low-risk line at these frequencies
    assert above == ("low-risk" if line * (1 + EPS) < flicker.low_risk_limit(f) else "outside")


def test_no_limits_above_the_ends():
    assert math.isinf(flicker.low_risk_limit(1251.0)) and flicker.verdict(1251.0, 100.0) == "low-risk"
    assert flicker.low_risk_limit(1251.0) == math.inf
    assert math.isinf(flicker.no_effect_limit(3001.0)) and flicker.verdict(5000.0, 100.0) == "no-effect"
    # between 1250 and 3000 Hz, full modulation: low risk but observable (0.0333 f < 100 %)
    assert flicker.verdict(2000.0, 100.0) == "low-risk"


def test_segment_edge_at_90_Hz():
    """Just below 90 Hz the slope is 0.025, at 90 Hz 0.08 (the line steps up there)."""
    assert flicker.low_risk_limit(89.999) == pytest.approx(0.025 * 89.999)
    assert flicker.low_risk_limit(90.0) == pytest.approx(7.2)


def test_modulation_of_known_waveforms():
    t = np.linspace(0.0, 1.0, 2001)
    assert flicker.modulation_percent(np.where(t < 0.5, 1.0, 0.0)) == pytest.approx(100.0)   # on/off
    assert flicker.modulation_percent(np.full(10, 3.0)) == pytest.approx(0.0)                # steady
    # a sine of amplitude a on offset b: 100 a / b
    assert flicker.modulation_percent(2.0 + 0.5 * np.sin(2 * np.pi * t)) == pytest.approx(25.0, rel=1e-6)
    # a square between 3 and 1: 100 (3-1)/(3+1) = 50 %
    assert flicker.modulation_percent(np.where(t < 0.3, 3.0, 1.0)) == pytest.approx(50.0)


def test_photosensitive_band():
    """Common practice: roughly 3 to 60 Hz."""
    assert flicker.in_photosensitive_band(10.0) and flicker.in_photosensitive_band(3.0)
    assert not flicker.in_photosensitive_band(2.0) and not flicker.in_photosensitive_band(70.0)
