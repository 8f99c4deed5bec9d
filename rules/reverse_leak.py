"""What it finds: a path that lets a pump's charge flow back: a pumped node wired to a port
pin or a rail (above the pin's supply plus about 0.3 V its clamp diode conducts and the
charge goes into the supply), a pump with no charge or no transfer diode to stop it, and a
Schottky diode whose reverse leakage at the hot corner drains a real share of the charge
meant for the LED.

Why it matters: injected clamp current can upset a controller (latch-up, wrong readings)
and wastes the boost; a leaking blocking diode dims the LED exactly at the hot corner.

How it is computed: from the periodic model of the pump: the pumped node's peak voltage
against the pin's supply plus its clamp threshold, through the resistance of the path; a
Schottky's reverse current at the hot corner from the SPICE law IS(T) (which roughly
doubles every 10 °C for a Schottky, common practice) against the LED's average current.

Example: a pump output fed back to an ADC pin through 10 kΩ to watch the boost.

Fix: a resistor divider to ground or a series diode for the sensing path; a diode where one
is missing; a silicon or low-leakage diode in place of a leaky Schottky.

Sources: common practice (clamp diodes conduct above the supply + 0.3 V, about 5 mA at
most); SPICE2 diode temperature law (Nagel, 1975).
"""

import numpy as np

from drc.api import (Rule, Setting, corner, diode_params_of, finding, format_quantity,
                     forward_voltage, saturation_current_at, worst_high)

RULE = Rule(id="reverse-leak", severity="warning",
            summary="a path that lets charge flow back: into a pin's clamp, onto a rail, or a missing or leaky blocking diode",
            sources=("common practice: clamp diodes conduct above the supply + 0.3 V, about 5 mA at most",
                     "SPICE2 diode temperature law (Nagel, UCB/ERL M520, 1975)"),
            settings={"leak_share": Setting(0.1, unit="%", help="the share of the LED's average "
                                            "current a blocking Schottky may leak at the hot corner")})


def check(design, settings):
    share_limit = float(settings.get("leak_share", 0.1))
    hot = _HotCorners(design) if design.pumps else None
    for pump in design.pumps:
        region = pump.region
        result = pump.result
        if pump.charge_diode is None or not pump.transfer_diodes:
            missing = "charge" if pump.charge_diode is None else "transfer"
            yield finding(pump.capacitors[0],
                          f"pump {pump.id} has no {missing} diode: nothing stops its charge flowing back "
                          f"{'into what charges it' if missing == 'charge' else 'from the load into the capacitor'}",
                          elements=[e.name for e in pump.elements], nets=[pump.output_net],
                          fix=f"add a {missing} diode (a small Schottky) to {pump.id}'s pumped node",
                          severity="error")
        if result is None:
            continue
        pumped_nets = {c.nodes[0] if c.nodes[1] in {p.net for p in region.pins} else c.nodes[1]
                       for c in pump.capacitors} | {pump.output_net}
        yield from _clamp_paths(design, pump, region, result, pumped_nets)
        yield from _leaky_schottky(design, pump, region, result, share_limit, hot)


def _peak(result, net, design):
    wave = result.waveform_V.get(net)
    if wave is None:
        return None
    rows = getattr(result, "corner_index", None)
    peak = wave.max(axis=1)
    return peak[rows] if rows is not None else peak


def _clamp_paths(design, pump, region, result, pumped_nets):
    lifting = {design.pins[label].net for label in pump.pins if label in design.pins}
    for e in region.elements:
        if e.kind != "R":
            continue
        a, b = e.nodes
        for node, other in ((a, b), (b, a)):
            if node not in pumped_nets:
                continue
            pin = design.pin_of_net(other)
            rail = design.supply_of_net(other)
            if pin is not None and other not in lifting:
                supply = design.supplies.get(pin.supply)
                if supply is None:
                    continue
                peak = _peak(result, node, design)
                if peak is None:
                    continue
                threshold = supply.voltage_V + pin.clamp_above_supply_V
                injected = np.maximum(peak - threshold, 0.0) / max(e.value or 1e-3, 1e-3)
                i = worst_high(injected)
                if injected[i] <= 0:
                    continue
                severity = "error" if injected[i] > pin.clamp_current_A else None
                yield finding(e, f"pumped node {node} reaches {float(peak[i]):.2f} V and drives "
                                 f"{format_quantity(float(injected[i]), 'A')} through {e.name} into pin "
                                 f"{pin.label}'s clamp diode (it conducts above "
                                 f"{float(threshold[i]):.2f} V)",
                              elements=[e.name, pump.id], nets=[node, other], corner=corner(design, i),
                              values={"injected_A": float(injected[i]), "peak_V": float(peak[i]),
                                      "clamp_limit_A": pin.clamp_current_A},
                              fix=(f"sense {node} through a divider to ground that keeps {pin.label} below "
                                   f"its supply, or block the path with a series diode"),
                              severity=severity)
            elif rail is not None:
                peak = _peak(result, node, design)
                if peak is None:
                    continue
                back = np.maximum(peak - rail.voltage_V, 0.0) / max(e.value or 1e-3, 1e-3)
                i = worst_high(back)
                if back[i] <= 0:
                    continue
                yield finding(e, f"pumped node {node} feeds {format_quantity(float(back[i]), 'A')} back "
                                 f"onto rail {rail.label} through {e.name} at its peak",
                              elements=[e.name, pump.id], nets=[node, other], corner=corner(design, i),
                              values={"back_current_A": float(back[i]), "peak_V": float(peak[i])},
                              fix=f"remove the path from {node} to {rail.label}, or put a diode in it")


class _HotCorners:
    """The hot end of the temperature range, and each diode's Schottky test and reverse
    leakage there: the same for every pump of one design, so worked out once per check
    (the leakage once per distinct diode model)."""

    def __init__(self, design):
        temperature_C = design.corners.temperature_C
        self.index = worst_high(temperature_C)
        self.temperature_C = float(temperature_C[self.index])
        self.rows = np.flatnonzero(temperature_C == temperature_C[self.index])
        self.t_hot = float(design.corners.temperature_K[self.index])
        self.t_nom = float(design.corners.temperature_K[design.corners.nominal])
        self.leaks = {}          # DiodeParams -> its leakage at the hot corner, or None

    def schottky_leak(self, params):
        """A Schottky's saturation current at the hot corner; None for another diode."""
        if params not in self.leaks:
            schottky = float(forward_voltage(params, 1e-3, self.t_nom)) < 0.45
            self.leaks[params] = float(saturation_current_at(params, self.t_hot)) if schottky else None
        return self.leaks[params]


def _leaky_schottky(design, pump, region, result, share_limit, hot):
    led = region.leds[0]
    load = result.load_average_A
    for d in [pump.charge_diode] + list(pump.transfer_diodes):
        if d is None:
            continue
        leak = hot.schottky_leak(diode_params_of(design, d))
        if leak is None:
            continue                       # not a Schottky
        reverse = result.diode_reverse_max_V.get(d.name)
        if reverse is None or float(np.max(reverse)) <= 0:
            continue
        i = int(hot.rows[np.argmin(load[hot.rows])])
        share = leak / max(float(load[i]), 1e-15)
        if share <= share_limit:
            continue
        yield finding(d, f"Schottky {d.name} leaks about {format_quantity(leak, 'A')} in reverse at "
                         f"{hot.temperature_C:g} °C, {share * 100:.0f} % of "
                         f"{led.name}'s average current there",
                      elements=[d.name, pump.id, led.name], nets=list(d.nodes), corner=corner(design, i),
                      values={"leak_A": leak, "led_current_A": float(load[i]), "share": share},
                      fix=f"a lower-leakage diode for {d.name} (a silicon one, or a Schottky rated for "
                          "low reverse current), then check the boost again")
