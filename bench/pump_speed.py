"""How long the periodic-steady-state model takes for one doubler pump at 81 corners.

Run: python bench/pump_speed.py [repeats]. The scenario is our own demo: a two-pin diode
doubler (pin A charges the pump capacitor through a Schottky-like diode, pin B lifts it,
a transfer diode feeds a reservoir capacitor and a white LED with its series resistor) at
2 kHz, over 3 supply x 3 temperature x 3 resistor tolerance x 3 capacitor tolerance corners.
Prints the best and median wall time per pump over the repeats (the target is 50 ms).
"""

from __future__ import annotations

import itertools
import statistics
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from drc.diode import DiodeParams  # noqa: E402
from drc.pumpmodel import DiodeBranch, PinDrive, PumpNetwork, simulate_periodic  # noqa: E402

SCHOTTKY = DiodeParams(IS=5e-7, N=1.05, RS=5.0, XTI=2.0, EG=0.69)   # demo part
WHITE_LED = DiodeParams(IS=3e-18, N=3.0, RS=10.0)                   # demo part


def corners():
    """81 corners: supply, temperature, resistor and capacitor tolerance (columns)."""
    grid = itertools.product([1.6, 1.8, 2.0], [253.15, 300.15, 333.15],
                             [0.95, 1.0, 1.05], [0.8, 1.0, 1.2])
    return np.array(list(grid)).T


def doubler(supply_V, resistor_scale, capacitor_scale) -> PumpNetwork:
    frequency_Hz = 2000.0
    return PumpNetwork(
        nodes=["pa", "pb", "mid", "out", "led"],
        pins=[PinDrive("PA", "pa", supply_V, 40.0, frequency_Hz),
              PinDrive("PB", "pb", supply_V, 40.0, frequency_Hz, inverted=True)],
        resistors=[("out", "led", 100.0 * resistor_scale)],
        capacitors=[("pb", "mid", 10e-6 * capacitor_scale), ("out", "0", 10e-6 * capacitor_scale)],
        diodes=[DiodeBranch("D1", "pa", "mid", SCHOTTKY), DiodeBranch("D2", "mid", "out", SCHOTTKY),
                DiodeBranch("DLED", "led", "0", WHITE_LED)],
    )


def main(repeats: int = 7) -> None:
    supply, temperature, r_scale, c_scale = corners()
    network = doubler(supply, r_scale, c_scale)
    modes = [("steady state + surge, start-up linearised", {"simulated_startup_periods": 3}),
             ("steady state + surge + start-up simulated in full (default)", {})]
    for label, options in modes:
        times = []
        for _ in range(repeats):
            start = time.perf_counter()
            result = simulate_periodic(network, temperature, "out", "DLED", 0.5e-3, **options)
            times.append(time.perf_counter() - start)
        print(f"{label}: {supply.size} corners, {result.periods_simulated} periods simulated, "
              f"settled at {int(result.settled.sum())}/{supply.size} corners")
        print(f"  time per pump: best {min(times) * 1e3:.1f} ms, "
              f"median {statistics.median(times) * 1e3:.1f} ms over {repeats} runs (target 50 ms)")
    print(f"output average {result.average_V.min():.3f} .. {result.average_V.max():.3f} V, "
          f"LED average {result.load_average_A.min() * 1e3:.3f} .. "
          f"{result.load_average_A.max() * 1e3:.3f} mA")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 7)
