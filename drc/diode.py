"""The SPICE diode law and its temperature law, on SI floats and numpy arrays.

Shockley's law with series resistance, I = IS*(exp((V - I*RS)/(N*Vt)) - 1), Vt = k*T/q, and
the temperature law of SPICE2 (Nagel, UCB/ERL M520, 1975; the ngspice manual, diode chapter):
IS(T) = IS * (T/TNOM)^(XTI/N) * exp((T/TNOM - 1) * EG / (N*Vt(T))).
k and q are CODATA's exact values, taken from pint once at import.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from drc.units import ureg

BOLTZMANN_J_PER_K = float(ureg.Quantity(1, "boltzmann_constant").to("J/K").magnitude)
ELEMENTARY_CHARGE_C = float(ureg.Quantity(1, "elementary_charge").to("C").magnitude)
ZERO_CELSIUS_K = 273.15
SPICE_NOMINAL_C = 27.0


def thermal_voltage(temperature_K):
    """Vt = k*T/q in volts (array in, array out)."""
    return BOLTZMANN_J_PER_K * np.asarray(temperature_K, dtype=float) / ELEMENTARY_CHARGE_C


@dataclass(frozen=True, slots=True)
class DiodeParams:
    """The SPICE diode parameters drc uses; defaults are SPICE's own."""

    IS: float = 1e-14     # saturation current, A
    N: float = 1.0        # emission coefficient
    RS: float = 0.0       # series resistance, ohm
    XTI: float = 3.0      # saturation-current temperature exponent
    EG: float = 1.11      # activation energy, eV
    TNOM_C: float = SPICE_NOMINAL_C
    BV: float = float("inf")   # reverse breakdown voltage, V (inf: none given)
    IBV: float = 1e-3     # current at BV, A

    @classmethod
    def from_model(cls, params: dict[str, float], area: float = 1.0) -> "DiodeParams":
        """From a `.model D(...)` card's lower-case parameters (SPICE names and defaults)."""
        p = {k.lower(): v for k, v in params.items()}
        default = cls()
        bv = p.get("bv", p.get("vb", p.get("vrb")))
        return cls(
            IS=p.get("is", p.get("js", default.IS)) * area,
            N=p.get("n", default.N),
            RS=p.get("rs", default.RS) / area,
            XTI=p.get("xti", default.XTI),
            EG=p.get("eg", default.EG),
            TNOM_C=p.get("tnom", p.get("tref", default.TNOM_C)),
            BV=float(bv) if bv is not None else default.BV,
            IBV=p.get("ibv", default.IBV) * area,
        )


def saturation_current(d: DiodeParams, temperature_K):
    """IS at the temperature (SPICE2 law), array in, array out."""
    t = np.asarray(temperature_K, dtype=float)
    tnom = d.TNOM_C + ZERO_CELSIUS_K
    ratio = t / tnom
    return d.IS * ratio ** (d.XTI / d.N) * np.exp((ratio - 1.0) * d.EG / (d.N * thermal_voltage(t)))


def voltage_at_current(d: DiodeParams, current_A, temperature_K):
    """The forward voltage that carries `current_A` (exact inverse, RS included)."""
    i = np.asarray(current_A, dtype=float)
    nvt = d.N * thermal_voltage(temperature_K)
    return nvt * np.log1p(i / saturation_current(d, temperature_K)) + i * d.RS


def current_at_junction(d: DiodeParams, junction_V, temperature_K):
    """Current for a voltage across the junction alone (RS excluded); overflow-safe."""
    nvt = d.N * thermal_voltage(temperature_K)
    x = np.minimum(np.asarray(junction_V, dtype=float) / nvt, 200.0)
    return saturation_current(d, temperature_K) * np.expm1(x)
