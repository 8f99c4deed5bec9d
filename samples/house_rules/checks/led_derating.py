"""What it finds: an LED whose average current at the high corner is above a share (half,
unless the config says otherwise) of its maximum current.

Why it matters: our products run for years in warm enclosures; an LED kept well below its
rating ages slower and keeps its brightness.

How it is computed: the branch's average current at every corner (drc's operating points),
its greatest value against `share` times the LED's max_current.

Example: a red status LED at 11 mA on a 20 mA part.

Fix: a larger series resistor; see led-overcurrent's fix for the computed E24 value.

Sources: house practice (derate LEDs to half their rating); the LED's datasheet governs.
"""

from drc.api import Rule, Setting, corner, finding, format_quantity, worst_high

RULE = Rule(id="house-led-derating", severity="warning",
            summary="an LED above a share of its rated current at the high corner",
            sources=("house practice: LEDs at most half their rated current",),
            settings={"share": Setting(0.5, unit="%", help="the share of max_current allowed")})


def check(design, settings):
    for branch in design.branches:
        for led in branch.leds:
            current = branch.current_A.get(led.name)
            if current is None:
                continue
            i = worst_high(current)
            allowed = settings["share"] * led.max_current_A
            if current[i] > allowed:
                yield finding(led.element,
                              f"{led.name} averages {format_quantity(float(current[i]), 'A')} at the high corner, "
                              f"above {settings['share'] * 100:g} % of its {format_quantity(led.max_current_A, 'A')} rating",
                              elements=[e.name for e in branch.elements], nets=branch.nets,
                              corner=corner(design, i),
                              values={"current_A": float(current[i]), "allowed_A": allowed})
