"""What it finds: an LED branch's resistor whose value is not in the E24 series, or is below
the house minimum (100 Ω unless the config says otherwise).

Why it matters: our assembly house stocks E24 values only; below about 100 Ω the LED's
current rests on the pin's output resistance, which the datasheet does not guarantee.

How it is computed: every resistor of every LED branch, its value against the E24 series
(IEC 60063) and the `least` setting.

Example: a 90 Ω resistor copied from a spreadsheet's result.

Fix: the nearest E24 value at or above the minimum, then check the LED's current again.

Sources: IEC 60063:2015 (E24 series); house practice (the 100 Ω floor).
"""

from drc.api import Rule, Setting, finding, format_quantity, is_preferred, nearest_preferred

RULE = Rule(id="house-preferred-resistor", severity="warning",
            summary="LED resistors from the E24 series and at least the house minimum",
            sources=("IEC 60063:2015 E24 series", "house practice: at least 100 ohm"),
            settings={"least": Setting(100.0, unit="ohm", help="the least resistance allowed"),
                      "series": Setting("E24", choices=("E6", "E12", "E24", "E48", "E96"))})


def check(design, settings):
    least, series = settings["least"], settings["series"]
    for branch in design.branches:
        for r in branch.resistors:
            if r.value is None:
                continue
            problems = []
            if not is_preferred(r.value, series):
                problems.append(f"not an {series} value (nearest {format_quantity(nearest_preferred(r.value, series), 'ohm')})")
            if r.value < least:
                problems.append(f"below the house minimum of {format_quantity(least, 'ohm')}")
            if problems:
                yield finding(r, f"{r.name} is {format_quantity(r.value, 'ohm')}: " + " and ".join(problems),
                              elements=[r.name] + [led.name for led in branch.leds], nets=branch.nets,
                              values={"resistance_ohm": r.value, "least_ohm": least},
                              fix=f"use an {series} value of at least {format_quantity(least, 'ohm')}")
