"""What it finds: an LED on a rail or a port pin that cannot reach its visible current at
the low corner: the end of the battery's life, the cold end of the temperature range, the
resistors at their tolerance end.

Why it matters: an indicator that is dark on a weak battery in the cold tells the user
nothing, exactly when they may need it most.

How it is computed: the branch is solved at every corner with the SPICE diode law (IS, N,
RS, and the temperature law with XTI and EG), the pin's output resistance and the branch
resistors; the LED's average current over its drive's period (a pin that is high half the
time gives half) is compared with its visible current. The voltage it would need is the
forward voltage at the visible current plus the resistors' drop.

Example: a green InGaN LED from a pin on two spent alkaline cells (1.8 V): it needs about
2.6 V at 0.5 mA, so it stays dark.

Fix: the E24 resistor that keeps it visible and under its maximum at every corner, or, when
none can, a charge pump, a lower-voltage colour or a regulated rail.

Sources: Shockley diode law; SPICE2 diode temperature law (Nagel, UCB/ERL M520, 1975);
Talbot-Plateau law (average current as perceived brightness); IEC 60063 (E24).
"""

from drc.api import (Rule, branch_cautions, corner, finding, format_quantity, needed_voltage,
                     series_resistor_advice, worst_low)

RULE = Rule(id="led-headroom", severity="error",
            summary="a rail or pin LED branch that cannot reach its visible current at the low corner",
            sources=("Shockley diode law with series resistance",
                     "SPICE2 diode temperature law (Nagel, UCB/ERL M520, 1975)",
                     "Talbot-Plateau law", "IEC 60063:2015 preferred values"))


def check(design, settings):
    for branch in design.branches:
        if branch.drive not in ("rail", "pin") or not branch.current_A or branch.reversed:
            continue
        for led in branch.leds:
            current = branch.current_A[led.name]
            i = worst_low(current)
            if current[i] >= led.visible_current_A:
                continue
            lit = branch.phases[branch.lit_phase]        # as branch.on_drive() reads it
            share, drive_V = lit.share, lit.drive_V
            if branch.sink_pin is not None and branch.pin is None:
                rail = branch.supply.label if branch.supply is not None else "its rail"
                what_gives = f"{rail}, into pin {branch.sink_pin.label} held low, gives"
            elif branch.drive == "pin":
                what_gives = f"its pin {branch.source} gives"
            else:
                what_gives = f"its rail {branch.source} gives"
            values = {"current_A": float(current[i]), "visible_current_A": led.visible_current_A,
                      "available_V": float(drive_V[i])}
            if branch.stages:
                needed = needed_voltage(design, branch, led.visible_current_A / max(share, 1e-9), i)
                values["needed_V"] = needed
                message = (f"{led.name} needs {needed:.2f} V to reach "
                           f"{format_quantity(led.visible_current_A, 'A')} but {what_gives} "
                           f"{float(drive_V[i]):.2f} V at the low corner "
                           f"({format_quantity(float(current[i]), 'A')} on average)")
            else:
                message = (f"{led.name} gets {format_quantity(float(current[i]), 'A')} at the low "
                           f"corner, below its visible {format_quantity(led.visible_current_A, 'A')}")
            yield finding(led.element, message,
                          elements=[e.name for e in branch.elements], nets=branch.nets,
                          corner=corner(design, i), values=values,
                          fix=series_resistor_advice(design, branch, led),
                          caution=branch_cautions(design, branch))
