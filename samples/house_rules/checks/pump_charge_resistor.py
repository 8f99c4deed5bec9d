"""What it finds: a charge pump whose charge diode is wired straight to the pin or rail that
charges it, with no series resistor in its charge path.

Why it matters: an empty pump capacitor draws a surge through the charge diode at start-up;
our house rule is a resistor there, whatever the model says about the surge.

How it is computed: the charge diode's other terminal (not the pumped node) must be a net
that is not a pin's or a rail's net, reached from it through a resistor.

Example: a Schottky from pin PB6 straight to the pumped node.

Fix: a resistor (tens of ohms) between the charging pin or rail and the charge diode.

Sources: house practice.
"""

from drc.api import Rule, finding


RULE = Rule(id="house-pump-charge-resistor", severity="warning",
            summary="every charge pump has a series resistor in its charge path",
            sources=("house practice",))


def check(design):
    for pump in design.pumps:
        diode = pump.charge_diode
        if diode is None:
            continue            # reverse-leak reports a pump with no charge diode
        pumped = {net for c in pump.capacitors for net in c.nodes}
        for net in diode.nodes:
            if net in pumped:
                continue
            feeder = design.pin_of_net(net) or design.supply_of_net(net)
            if feeder is not None:
                yield finding(diode, f"pump {pump.id}'s charge diode {diode.name} is fed straight from "
                                     f"{feeder.label} with no series resistor",
                              elements=[diode.name, pump.id], nets=[net],
                              fix=f"add a resistor between {feeder.label} and {diode.name}")
