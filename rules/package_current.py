"""What it finds: the pins powered by one supply drawing more at once than the controller's
package may deliver, where the config gives the limit ([supply.X] package_current).

Why it matters: besides each pin's own limit, a small controller's package has a total
(some 80 to 150 mA, common practice); LEDs and pump pins switching together can pass it.

How it is computed: the peak current of every pin on the supply, each at its worst phase,
added at each corner (a conservative sum: they are taken as simultaneous).

Example: four pins each at 30 mA on a package rated 100 mA.

Fix: spread the loads over time (firmware), reduce each branch's current, or drive some
from the rail through a transistor.

Sources: common practice (package totals of small CMOS controllers).
"""

import numpy as np

from drc.api import Rule, corner, finding, format_quantity, worst_high

RULE = Rule(id="package-current", severity="error",
            summary="pins on one supply drawing more than its package_current at once",
            sources=("common practice: small CMOS controller packages are rated 80 to 150 mA in all",))


def check(design, settings):
    for supply in design.supplies.values():
        limit = supply.package_current_A
        if not limit:
            continue
        total = np.zeros(design.corners.count)
        names = []
        for branch in design.branches:
            for label, current in branch.pin_current_A.items():
                pin = design.pins.get(label)
                if pin is not None and pin.supply == supply.label:
                    total = total + current
                    names.append(label)
        i = worst_high(total)
        if total[i] <= limit:
            continue
        at = design.element(supply.source) if supply.source else None
        yield finding(at if at is not None else supply.location,
                      f"the pins on {supply.label} ({', '.join(sorted(set(names)))}) draw "
                      f"{format_quantity(float(total[i]), 'A')} together at the high corner, above its "
                      f"package_current of {format_quantity(limit, 'A')}",
                      elements=sorted(set(names)), nets=[supply.net], corner=corner(design, i),
                      values={"current_A": float(total[i]), "package_current_A": limit},
                      fix="spread the loads in time, lower each branch's current, or drive some "
                          "loads through a transistor from the rail")
