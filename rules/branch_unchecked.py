"""What it finds: an LED branch that drc found but could not work out, so no other rule
checked it: a pump lifted by pins at different frequencies, an LED fed through a capacitor
in no pump drc recognises, a capacitor or inductor that smooths a toggling pin's drive (an
RC filter into an LED from a PWM pin, a choke in its string: a time constant over 2 % of
the pin's shorter phase), a string whose ends are neither a rail, a port pin nor ground,
a circuit the pump model could not solve.

Why it matters: a report with no errors reads as "this design is fine". For a branch drc
could not compute it means only that nothing was looked at: its LED may stay dark, or its
pins be overloaded, and the report would not say so.

How it is computed: every branch the analysis traced that has no operating point (no
current at any corner) is reported once, with the analysis's reason.

Example: a doubler whose charge pin toggles at 4 kHz and whose lift pin at 3.3 kHz.

Fix: check that branch another way (a transient simulation of it: the netlist loads in
ngspice), or bring it to a form drc models (one toggling frequency per pump, a rail or a
port pin at each end of a string).

Sources: none beyond drc's own analysis (it reports what that analysis could not do).
"""

from drc.api import Rule, finding

RULE = Rule(id="branch-unchecked", severity="warning",
            summary="an LED branch drc found but could not compute, so no rule checked it",
            sources=("drc's analysis (what it could not work out)",))


def check(design, settings):
    for branch in design.branches:
        if branch.current_A or not branch.leds:
            continue
        names = [led.name for led in branch.leds]
        why = branch.note or "drc found nothing that drives it"
        yield finding(branch.leds[0].element,
                      f"{', '.join(names)} {'was' if len(names) == 1 else 'were'} not checked: {why}",
                      elements=[e.name for e in branch.elements], nets=branch.nets,
                      fix="check this branch with a transient simulation, or bring it to a form "
                          "drc models (one toggling frequency per pump; a rail, a port pin or "
                          "ground at each end of a string)")
