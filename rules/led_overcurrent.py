"""What it finds: an LED whose current exceeds its maximum at the high corner: a fresh
battery, the hot or cold end where its forward voltage is lowest, the resistors at their
low tolerance end.

Why it matters: past its rating an LED ages fast and can fail; the pin that drives it may
be past its own rating too (see pin-overcurrent).

How it is computed: the branch is solved at every corner (SPICE diode law with the
temperature law); the current in the brightest phase of its drive is compared with the
LED's maximum (from its [led] table, else the colour's built-in rating).

Example: an indicator cell whose resistor was copied from a 2.5 V design onto a 3.3 V rail.

Fix: the E24 resistor (IEC 60063) that keeps it under its maximum at the high corner and
visible at the low corner.

Sources: Shockley diode law; SPICE2 diode temperature law; IEC 60063:2015 (E24).
"""

from drc.api import (Rule, branch_cautions, corner, finding, format_quantity,
                     series_resistor_advice, worst_high)

RULE = Rule(id="led-overcurrent", severity="error",
            summary="an LED whose current exceeds its maximum at the high corner",
            sources=("Shockley diode law", "SPICE2 diode temperature law (Nagel, 1975)",
                     "IEC 60063:2015 preferred values"))


def check(design, settings):
    for branch in design.branches:
        if not branch.peak_current_A:
            continue
        for led in branch.leds:
            peak = branch.peak_current_A[led.name]
            i = worst_high(peak)
            if peak[i] <= led.max_current_A:
                continue
            yield finding(led.element,
                          f"{led.name} carries {format_quantity(float(peak[i]), 'A')} at the high corner, "
                          f"above its {format_quantity(led.max_current_A, 'A')} maximum",
                          elements=[e.name for e in branch.elements], nets=branch.nets,
                          corner=corner(design, i),
                          values={"current_A": float(peak[i]), "max_current_A": led.max_current_A,
                                  "average_A": float(branch.current_A[led.name][i])},
                          fix=series_resistor_advice(design, branch, led, goal="max"),
                          caution=branch_cautions(design, branch))
