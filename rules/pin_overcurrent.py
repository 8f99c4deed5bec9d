"""What it finds: a port pin driven past its current limit: steadily by the LED branches on
it, in a phase of its drive, or by the start-up surge into an empty pump capacitor.

Why it matters: a small controller's pin is rated some 20 to 25 mA absolute; past it the
output stage degrades, its levels sag, and the package's total may be exceeded.

How it is computed: each branch on the pin is solved at every corner, phase by phase, with
the pin's output resistance; the currents of the branches on one pin are added (they share
its phases) and the greatest is compared with the pin's max_current (from its [pin] table,
else the built-in pin profile).

Example: a red LED from the battery straight into a sinking pin: about 24 mA on fresh cells.

Fix: an E24 series resistor that brings the pin under its limit.

Sources: common practice (port pins of small CMOS controllers, 20 to 25 mA absolute).
"""

import numpy as np

from drc.api import Rule, corner, finding, format_quantity, format_resistance, preferred, worst_high

RULE = Rule(id="pin-overcurrent", severity="error",
            summary="a port pin past its current limit: steady, per phase, or the start-up surge",
            sources=("common practice: small CMOS port pins are rated 20 to 25 mA absolute",))


def check(design, settings):
    totals = {}
    for branch in design.branches:
        for label, current in branch.pin_current_A.items():
            entry = totals.setdefault(label, [np.zeros(design.corners.count), []])
            entry[0] = entry[0] + current
            entry[1].append(branch)
    for label, (current, branches) in totals.items():
        pin = design.pins[label]
        i = worst_high(current)
        if current[i] <= pin.max_current_A:
            continue
        drive_V = float(np.max(pin.high_V)) if np.size(pin.high_V) else 0.0
        elements = sorted({e.name for b in branches for e in b.elements})
        source = design.element(pin.source) if pin.source else None
        at = source if source is not None else pin.location
        extra = drive_V / pin.max_current_A - pin.output_resistance_ohm if drive_V > 0 else 0.0
        if extra > 0:
            value = preferred.at_or_above(extra, "E24")
            fix = (f"add at least {format_resistance(value)} (E24, IEC 60063) in series on {label}, "
                   "then check the LEDs' headroom again")
        else:
            fix = f"add a series resistor on {label} or move a branch to another pin"
        yield finding(at, f"pin {label} delivers {format_quantity(float(current[i]), 'A')} at the high "
                      f"corner, above its {format_quantity(pin.max_current_A, 'A')} limit",
                      elements=elements, nets=[pin.net], corner=corner(design, i),
                      values={"current_A": float(current[i]), "max_current_A": pin.max_current_A},
                      fix=fix)
