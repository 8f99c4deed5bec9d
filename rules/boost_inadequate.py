"""What it finds: a charge pump whose output cannot light its LED at the low corner: the
LED's average current over the pump's period stays below its visible current at the end
of the battery's life, in the cold, with the capacitors at their low tolerance.

Why it matters: a pump is added exactly because the rail alone cannot light the LED; a pump
that falls short at the low corner leaves the indicator dark when the battery is weak.

How it is computed: the pump is simulated in periodic steady state at every corner (the
pins as square waves through their output resistance, every diode and the LED with the
SPICE diode law at the corner's temperature, the capacitors with their tolerance), cycling
until one period repeats to within 0.1 mV. The fix is computed by re-running the model with
a larger pumping capacitor, longer phases (a lower toggle frequency), or a Schottky diode
in place of a silicon one, and naming the first change that lights the LED at every corner,
or saying that none of them does.

Example: a two-pin Schottky doubler on a 1.8 V rail feeding a white LED through 100 Ω:
about 0.36 mA at 1.71 V and -20 °C against 0.5 mA visible.

Fix: the change the model shows to work, or a lower-voltage colour, or a regulated boost.

Sources: Dickson, IEEE J. Solid-State Circuits 11(3), 1976 (the pump); Shockley diode law;
SPICE2 diode temperature law; Talbot-Plateau law (average current as brightness).
"""

import numpy as np

from drc.api import (Rule, branch_cautions, corner, finding, format_quantity, is_schottky,
                     preferred, rerun_pump, rerun_pump_variants, schottky_params, worst_low)

RULE = Rule(id="boost-inadequate", severity="error",
            summary="a pump whose output cannot light its LED at the low corner",
            sources=("J. F. Dickson, IEEE J. Solid-State Circuits 11(3), 1976",
                     "Shockley diode law; SPICE2 diode temperature law (Nagel, 1975)",
                     "Talbot-Plateau law"))


def check(design, settings):
    for branch in design.branches:
        if branch.drive != "pump" or not branch.current_A or branch.pump_region is None:
            continue
        region = branch.pump_region
        pump = region.pumps[0]
        for led in branch.leds:
            current = branch.current_A.get(led.name)
            if current is None:
                continue
            i = worst_low(current)
            if current[i] < led.visible_current_A:
                yield _finding(design, branch, pump, led, current, i)


def _finding(design, branch, pump, led, current, i):
    result = branch.pump_region.result
    return finding(led.element,
                   f"{led.name} gets {format_quantity(float(current[i]), 'A')} on average from pump "
                   f"{pump.id} at the low corner, below its visible "
                   f"{format_quantity(led.visible_current_A, 'A')} (the pump gives "
                   f"{float(result.average_V[i]):.2f} V on average, {float(result.peak_V[i]):.2f} V at peak)",
                   elements=[e.name for e in pump.elements] + [led.name], nets=[pump.output_net],
                   corner=corner(design, i),
                   values={"current_A": float(current[i]), "visible_current_A": led.visible_current_A,
                           "average_V": float(result.average_V[i]), "peak_V": float(result.peak_V[i])},
                   fix=_fix(design, pump, led), caution=branch_cautions(design, branch))


def _lights(design, pump, led, **changes):
    try:
        r = rerun_pump(design, pump, steady=True, **changes)
    except Exception:
        return None
    return float(np.min(r.diode_average_A[led.name]))


def _lights_each(design, pump, led, variants):
    """_lights for each of `variants` (changes the model takes per corner), run as one
    batch of corners; one by one if the batch fails, so that a variant the model cannot
    solve spoils only its own answer, as in _lights."""
    try:
        results = rerun_pump_variants(design, pump, variants, steady=True)
    except Exception:
        return [_lights(design, pump, led, **v) for v in variants]
    return [float(np.min(r.diode_average_A[led.name])) for r in results]


# (pump cell signature, the LED's place among the pump's LEDs, pumping capacitor, visible
# current, nominal temperature) -> what _work_out found: it depends on nothing else.
_FIXES = {}


def _fix(design, pump, led):
    """The fix's words, worked out once per distinct pump cell. Only the Schottky advice
    names parts; it is kept as the diodes' places in the pump, so that each cell's finding
    names its own."""
    place = [l.name for l in pump.region.leds].index(led.name)
    key = ((pump.region.signature, place, pump.capacitors[0].value, led.visible_current_A,
            float(design.corners.temperature_K[design.corners.nominal]))
           if pump.region.signature is not None else None)
    found = _FIXES.get(key) if key is not None else None
    if found is None:
        found = _work_out(design, pump, led)
        if key is not None:
            _FIXES[key] = found
    if isinstance(found, str):
        return found
    places, low = found
    names = [d.name for place, d in _pump_diodes(pump.region) if place in places]
    return (f"Schottky diodes (about 0.3 V at 1 mA) for {', '.join(names)} "
            f"give {format_quantity(low, 'A')} at the low corner (the model re-run)")


def _pump_diodes(region):
    """Every pump's charge and transfer diodes in the region, each with its place (the
    pump's and the diode's index): cells side by side take the same diode."""
    return [((j, k), d) for j, p in enumerate(region.pumps)
            for k, d in enumerate([p.charge_diode] + p.transfer_diodes) if d is not None]


def _work_out(design, pump, led):
    """The first change the model shows to light the LED at every corner, in words; or,
    for Schottky diodes, (their places in the pump, the LED's least current with them)."""
    tried = []
    present = pump.capacitors[0].value
    larger = [v for v in preferred.values_between(present * 1.5, present * 10.5, "E6")][:4]
    # every pumping capacitor of that value in the region (cells side by side take the
    # same part), every candidate value in one run of the model (the capacitors are
    # values per corner)
    alike = [c for p in pump.region.pumps for c in p.capacitors if c.value == present]
    lows = _lights_each(design, pump, led, [{"capacitor_scale": {c.key: value / present
                                                                for c in alike}}
                                            for value in larger])
    for value, low in zip(larger, lows):
        tried.append(f"{format_quantity(value, 'F')} pumping capacitor: {format_quantity(low or 0, 'A')}")
        if low is not None and low >= led.visible_current_A:
            return (f"a {format_quantity(value, 'F')} pumping capacitor (E6, IEC 60063) in place of "
                    f"{format_quantity(present, 'F')} gives {format_quantity(low, 'A')} "
                    "at the low corner (the model re-run); check the pins' surge again")
    frequency = next((p.frequency_Hz for p in pump.region.pins if p.drive == "toggle"), None)
    if frequency:
        for scale in (0.5, 0.25):
            low = _lights(design, pump, led, frequency_scale=scale)
            tried.append(f"{frequency * scale:g} Hz toggling: {format_quantity(low or 0, 'A')}")
            if low is not None and low >= led.visible_current_A:
                return (f"toggling the pins at {frequency * scale:g} Hz in place of {frequency:g} Hz "
                        f"(phases of {0.5e3 / (frequency * scale):g} ms) gives {format_quantity(low, 'A')} "
                        "at the low corner (the model re-run); check flicker and the pins' surge again")
    silicon = [(place, d) for place, d in _pump_diodes(pump.region) if not is_schottky(design, d)]
    if silicon:
        low = _lights(design, pump, led, diode_override={d.key: schottky_params() for _, d in silicon})
        tried.append(f"Schottky diodes: {format_quantity(low or 0, 'A')}")
        if low is not None and low >= led.visible_current_A:
            return [place for place, _ in silicon], low    # the diodes' places (see _fix)
    return ("no change the model tried lights it at every corner ("
            + "; ".join(tried) + "): choose a lower-voltage colour, or a regulated boost converter")
