"""Flicker against IEEE Std 1789-2015 and the photosensitive flashing band.

Modulation (percent flicker) is 100*(Lmax-Lmin)/(Lmax+Lmin); light output is taken as
proportional to the LED's current. The lines (from memory, as the domain brief gives them;
check them against the standard's text):
  low-risk:              f < 90 Hz: Mod% < 0.025*f;  90..1250 Hz: Mod% < 0.08*f;  above: none
  no observable effect:  f < 90 Hz: Mod% < 0.01*f;   90..3000 Hz: Mod% < 0.0333*f; above: none
Flashing at roughly 3 to 60 Hz can trouble photosensitive viewers (common practice).
"""

from __future__ import annotations

import numpy as np

PHOTOSENSITIVE_BAND_HZ = (3.0, 60.0)


def modulation_percent(light) -> float:
    """Percent modulation of a waveform of light (or current) over one period."""
    w = np.asarray(light, dtype=float)
    hi, lo = float(w.max()), float(w.min())
    if hi + lo <= 0:
        return 0.0
    return 100.0 * (hi - max(lo, 0.0)) / (hi + max(lo, 0.0))


def low_risk_limit(frequency_Hz: float) -> float:
    """The greatest modulation (percent) in IEEE 1789's low-risk region; inf above 1250 Hz."""
    return _line(frequency_Hz, 0.025, 0.08, 1250.0)


def no_effect_limit(frequency_Hz: float) -> float:
    """The greatest modulation (percent) with no observable effect; inf above 3 kHz."""
    return _line(frequency_Hz, 0.01, 0.0333, 3000.0)


def _line(frequency_Hz: float, slope_below_90: float, slope_from_90: float,
          end_Hz: float) -> float:
    """One of IEEE 1789's two lines: percent modulation proportional to frequency, with one
    slope below 90 Hz and another from 90 Hz to its end; no limit beyond the end."""
    f = float(frequency_Hz)
    if f < 90:
        return slope_below_90 * f
    if f <= end_Hz:
        return slope_from_90 * f
    return float("inf")


def in_photosensitive_band(frequency_Hz: float) -> bool:
    lo, hi = PHOTOSENSITIVE_BAND_HZ
    return lo <= frequency_Hz <= hi


def verdict(frequency_Hz: float, modulation: float) -> str:
    """"no-effect", "low-risk" or "outside" (outside the low-risk region)."""
    if modulation < no_effect_limit(frequency_Hz):
        return "no-effect"
    if modulation < low_risk_limit(frequency_Hz):
        return "low-risk"
    return "outside"
