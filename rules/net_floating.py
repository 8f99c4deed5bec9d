"""What it finds: a net with a single connection, and an LED terminal left open.

Why it matters: a net that goes nowhere is usually a wire the schematic lost: a pull-up
never tied, an LED whose return was never drawn. SPICE simulators also refuse such nets
or solve them only with a tiny conductance to ground.

How it is computed: every net's connections are counted over the flat design (subcircuit
contents included). A net whose only connection is a black-box part's pin is reported as a
note: an unused controller pin is common.

Example: `D3 led_a led_k LEDW` with nothing else on `led_k`.

Fix: connect the net, or remove the part.

Sources: SPICE netlist conventions (every node needs a DC path to ground).
"""

from drc.api import GROUND, Rule, finding

RULE = Rule(id="net-floating", severity="warning",
            summary="a net with a single connection, or an LED terminal left open",
            sources=("SPICE netlist conventions: every node needs a DC path to ground",))


def check(design, settings):
    for net in design.nets:
        if net == GROUND:
            continue
        conns = design.connections(net)
        if len(conns) != 1:
            continue
        element, terminal = conns[0]
        led = design.leds.get(element.key)
        if led is not None:
            side = "anode" if terminal == 0 else "cathode"
            message = f"{element.name}'s {side} is left open on net {net}"
            severity = None
        elif element.kind == "X" and element.subckt is not None:
            message = f"net {net} goes only to the black-box part {element.name}"
            severity = "note"
        else:
            message = f"net {net} has a single connection, {element.name}"
            severity = None
        yield finding(element, message, elements=[element.name], nets=[net],
                      fix=f"connect net {net} or remove {element.name}", severity=severity)
