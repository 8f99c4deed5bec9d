"""What it finds: an LED reverse-biased beyond its maximum reverse voltage in some phase of
its drive: fitted the wrong way round across a rail or a pin, or taken below its cathode
when a sinking pin goes high on a higher rail, or in a phase of a charge pump.

Why it matters: small LEDs are rated for about 5 V in reverse; beyond it they break down,
and a reversed indicator is dark besides.

How it is computed: the drive's voltage across the LED in every phase, at every corner; the
greatest reverse voltage is compared with the LED's rating ([led] max_reverse, else the
colour's built-in rating, usually 5 V).

Example: an LED with its anode on ground and its cathode on a two-cell Li-ion pack.

Fix: turn the LED round; where a reverse voltage is part of the drive, add a diode in
series or in anti-parallel to take it.

Sources: common practice (reverse rating about 5 V for indicator LEDs).
"""

from drc.api import Rule, branch_cautions, corner, finding, worst_high

RULE = Rule(id="led-reverse", severity="error",
            summary="an LED reverse-biased beyond its maximum in some phase of its drive",
            sources=("common practice: indicator LEDs are rated about 5 V in reverse",))


def check(design, settings):
    for branch in design.branches:
        if not branch.reverse_V:
            continue
        for led in branch.leds:
            reverse = branch.reverse_V[led.name]
            i = worst_high(reverse)
            if reverse[i] <= led.max_reverse_V:
                continue
            if branch.reversed:
                what = f"sits reversed across {branch.source}"
                fix = f"turn {led.name} round: its anode goes toward {branch.source}"
            else:
                what = "is reversed in a phase of its drive"
                fix = f"add a diode in anti-parallel with {led.name}, or one in series, to take the reverse voltage"
            yield finding(led.element,
                          f"{led.name} {what}: {float(reverse[i]):.2f} V in reverse at the worst corner, "
                          f"above its {led.max_reverse_V:g} V rating",
                          elements=[e.name for e in branch.elements], nets=branch.nets,
                          corner=corner(design, i),
                          values={"reverse_V": float(reverse[i]), "max_reverse_V": led.max_reverse_V},
                          fix=fix, caution=branch_cautions(design, branch))
