"""What it finds: an LED branch with no resistor in it: nothing but the diode's own
resistance and, for a pin, its output resistance limits the current.

Why it matters: an LED's current rises steeply with voltage; without a resistor it is set
by the rail, the temperature and the part's spread, and a fresh battery or a strong pin can
push it past its rating, or the pin past its own.

How it is computed: the branch's series path from the LED to its drive and return holds no
resistor. The current the branch would carry is solved at every corner and given.

Example: a red LED from the battery straight into a sinking pin.

Fix: the E24 resistor (IEC 60063) that keeps the LED visible at the low corner and under
its maximum at the high corner.

Sources: Shockley diode law; IEC 60063:2015 (E24).
"""

from drc.api import (Rule, branch_cautions, corner, finding, format_quantity,
                     series_resistor_advice, worst_high)

RULE = Rule(id="led-unlimited", severity="error",
            summary="an LED branch with nothing that limits its current",
            sources=("Shockley diode law", "IEC 60063:2015 preferred values"))


def check(design, settings):
    for branch in design.branches:
        # a network's resistors may all be beside its LEDs; a string solved with what else
        # its pin drives (pin_loads) still knows its own
        if not branch.unlimited or (branch.network is not None and not branch.pin_loads) or branch.reversed:
            continue
        for led in branch.leds:
            values, at = {}, None
            tail = ""
            if branch.peak_current_A:
                peak = branch.peak_current_A[led.name]
                i = worst_high(peak)
                values = {"current_A": float(peak[i]), "max_current_A": led.max_current_A}
                at = corner(design, i)
                tail = f": {format_quantity(float(peak[i]), 'A')} at the high corner"
            pin = branch.pin or branch.sink_pin
            limiter = (f"the pin {pin.label}'s {pin.output_resistance_ohm:g} Ω output resistance"
                       if pin is not None else "the diode's own resistance")
            yield finding(led.element,
                          f"{led.name} has no resistor in its branch; only {limiter} limits its current{tail}",
                          elements=[e.name for e in branch.elements], nets=branch.nets, corner=at,
                          values=values, fix=series_resistor_advice(design, branch, led, goal="max"),
                          caution=branch_cautions(design, branch))
