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
                     preferred, rerun_pump, schottky_params, worst_low)

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
        led = region.leds[0]
        current = branch.current_A[led.name]
        i = worst_low(current)
        if current[i] >= led.visible_current_A:
            continue
        result = region.result
        yield finding(led.element,
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
        r = rerun_pump(design, pump, **changes)
    except Exception:
        return None
    return float(np.min(r.load_average_A))


_FIXES = {}       # pump cell signature -> the fix's words with the names as placeholders


def _fix(design, pump, led):
    key = pump.region.signature
    names = [led.name] + [e.name for e in pump.elements]
    if key is not None and key in _FIXES:
        text = _FIXES[key]
        for k, name in enumerate(names):
            text = text.replace(f"\x00{k}\x00", name)
        return text
    text = _work_out(design, pump, led)
    if key is not None:
        template = text
        for k, name in sorted(enumerate(names), key=lambda kn: -len(kn[1])):
            template = template.replace(name, f"\x00{k}\x00")
        _FIXES[key] = template
    return text


def _work_out(design, pump, led):
    tried = []
    present = pump.capacitors[0].value
    larger = [v for v in preferred.values_between(present * 1.5, present * 10.5, "E6")][:4]
    for value in larger:
        scale = value / present
        changes = {"capacitor_scale": {c.key: scale for c in pump.capacitors}}
        low = _lights(design, pump, led, **changes)
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
    silicon = [d for d in ([pump.charge_diode] + pump.transfer_diodes)
               if d is not None and not is_schottky(design, d)]
    if silicon:
        low = _lights(design, pump, led, diode_override={d.key: schottky_params() for d in silicon})
        tried.append(f"Schottky diodes: {format_quantity(low or 0, 'A')}")
        if low is not None and low >= led.visible_current_A:
            return (f"Schottky diodes (about 0.3 V at 1 mA) for {', '.join(d.name for d in silicon)} give "
                    f"{format_quantity(low, 'A')} at the low corner (the model re-run)")
    return ("no change the model tried lights it at every corner ("
            + "; ".join(tried) + "): choose a lower-voltage colour, or a regulated boost converter")
