"""What it finds: a port pin driven past its current limit: steadily by the LED branches on
it, in a phase of its drive (a pump's pin sources current while high and sinks it while
low), or by the start-up surge into an empty pump capacitor.

Why it matters: a small controller's pin is rated some 20 to 25 mA absolute; past it the
output stage degrades, its levels sag, and the package's total may be exceeded. The first
charge phase of a pump meets an empty capacitor, so the pin sees about
(Vpin - Vd) / (the loop's resistance): with no series resistor, tens of milliamps.

How it is computed: each branch on the pin is solved at every corner, phase by phase, with
the pin's output resistance; the branches on one pin are solved together (they share its
output resistance). For a pump, the periodic model gives the pin's peak current in each
phase and, from its first cycles with every capacitor empty, the start-up surge. The fix's
E24 resistor is checked by re-running the model, which also says what it costs the LED.

Example: a doubler lifted by a pin straight into a 10 µF capacitor: about 50 mA at start-up.

Fix: an E24 (IEC 60063) series resistor on the pin (or the pin's series resistor raised to
one), with what it costs in boost; where several pins of one pump need one, also what they
cost together.

Sources: common practice (port pins of small CMOS controllers, 20 to 25 mA absolute); the
capacitor charging law v(t) = V(1 - exp(-t/RC)).
"""

import numpy as np

from drc.api import (Rule, corner, finding, format_quantity, format_resistance, preferred,
                     rerun_pump, worst_high, worst_low)

RULE = Rule(id="pin-overcurrent", severity="error",
            summary="a port pin past its current limit: steady, per phase, or the start-up surge",
            sources=("common practice: small CMOS port pins are rated 20 to 25 mA absolute",
                     "capacitor charging law v(t) = V(1 - exp(-t/RC))"))


# (pump cell signature, pin index, first value tried, pin limit) -> (ohm, (each LED's
# current after, in the region's order)) or None: what _search finds depends on nothing
# else. And (signature, ((pin, ohm added), ...), (each LED's low corner, ...)) -> each LED's
# current there with all of them (_together). By position, not name: twin cells share them.
_OUTCOMES = {}


def check(design, settings):
    fed = {}
    for b in design.branches:
        if b.pump_region is not None:
            fed.setdefault(id(b.pump_region), []).append(b)
    totals = {}
    for branch in design.branches:
        for label, current in branch.pin_current_A.items():
            entry = totals.get(label)
            if entry is None:
                entry = totals[label] = [np.zeros(design.corners.count), []]
            entry[0] = entry[0] + current
            entry[1].append(branch)
    for label, (current, branches) in totals.items():
        pin = design.pins[label]
        i = worst_high(current)
        if current[i] <= pin.max_current_A:
            continue
        pumped = [b for b in branches if b.drive == "pump"]
        where = _phase_words(pumped[0], label, i) if pumped else ""
        yield finding(_at(design, pin),
                      f"pin {label} carries {format_quantity(float(current[i]), 'A')}{where} at the "
                      f"high corner, above its {format_quantity(pin.max_current_A, 'A')} limit",
                      elements=sorted({e.name for b in branches for e in b.elements}), nets=[pin.net],
                      corner=corner(design, i),
                      values={"current_A": float(current[i]), "max_current_A": pin.max_current_A},
                      fix=_fix(design, pin, pumped, float(current[i]))[0])
    regions = {}
    for pump in design.pumps:
        if pump.result is not None:
            regions.setdefault(id(pump.region), []).append(pump)
    for pumps in regions.values():
        # the region's pumps share one result: a pin that lifts two of them surges once
        lifts = {}
        for pump in pumps:
            for label in pump.pins:
                lifts.setdefault(label, []).append(pump)
        result = pumps[0].result
        found, added = [], {}
        for label, lifted in lifts.items():
            if label not in result.startup_surge_A:
                continue
            pin = design.pins[label]
            surge = result.startup_surge_A[label]
            i = worst_high(surge)
            if surge[i] <= pin.max_current_A:
                continue
            fix, ohm = _fix(design, pin, fed.get(id(pumps[0].region), []), float(surge[i]), surge=True)
            if ohm is not None:
                added[label] = ohm
            into, count = _capacitors_of(pin, lifted)
            found.append(finding(
                _at(design, pin),
                f"pin {label} takes a start-up surge of {format_quantity(float(surge[i]), 'A')} "
                f"into the empty pump capacitor{'s' if count > 1 else ''} {into}, above its "
                f"{format_quantity(pin.max_current_A, 'A')} limit",
                elements=list(dict.fromkeys(e.name for p in lifted for e in p.elements)),
                nets=[pin.net], corner=corner(design, i),
                values={"startup_surge_A": float(surge[i]), "max_current_A": pin.max_current_A},
                fix=fix))
        together = _together(design, pumps[0], fed.get(id(pumps[0].region), []), added)
        for f in found:
            if together and f.fix:
                f.fix += together
            yield f


def _lows(branch) -> dict:
    """Each LED of a pump branch's region -> the corner where it is least lit."""
    return {led.name: worst_low(branch.current_A[led.name]) for led in branch.pump_region.leds}


def _capacitors_of(pin, pumps) -> tuple[str, int]:
    """The pumping capacitors a pin lifts (its net on a plate, or behind the pin's series
    resistor), in words, and how many: ("C2 of pump C1", 1) where the pump is named after
    another of its capacitors, ("CPA and CPB", 2) for two pumps; a pump's name where the
    pin lifts none of its capacitors (it charges them through the charge diode)."""
    words, count = [], 0
    for p in pumps:
        plates = {pin.net}
        through = p.pin_resistors.get(pin.label)
        if through is not None:
            plates.update(through.nodes)
        names = [c.name for c in p.capacitors if plates & set(c.nodes)] or [p.id]
        count += len(names)
        words.append(" and ".join(names) + ("" if names == [p.id] else f" of pump {p.id}"))
    return " and ".join(words), count


def _together(design, pump, pumped, added):
    """Where the surge fixes of several pins of one pump region would all be made, what
    they cost its LEDs together (each fix's own cost is with its resistor alone): words to
    add to each of those fixes, or ''."""
    if len(added) < 2 or not pumped:
        return ""
    region = pump.region
    branch = pumped[0]
    lows = _lows(branch)

    def work():
        try:
            r = rerun_pump(design, pump, series_ohm=added)
        except Exception:
            return None
        return tuple(float(r.diode_average_A[name][low]) for name, low in lows.items())
    after = _remembered((region.signature, tuple(sorted(added.items())), tuple(lows.values()))
                        if region.signature is not None else None, work)
    if after is None:
        return ""
    gets = []
    for (name, low), now in zip(lows.items(), after):
        before = float(branch.current_A[name][low])
        gets.append(f"{name} gets {format_quantity(now, 'A')} at the low corner "
                    f"({_cost(before, now):.0f} % less)")
    return f"; with the fixes on {' and '.join(sorted(added))} made together, " + ", and ".join(gets)


def _remembered(key, work):
    """_OUTCOMES[key], worked out by work() the first time (every time for key None)."""
    if key is None:
        return work()
    if key not in _OUTCOMES:
        _OUTCOMES[key] = work()
    return _OUTCOMES[key]


def _cost(before: float, after: float) -> float:
    """What a change costs the LED's current, in percent of `before`."""
    return 100.0 * (1 - after / float(before)) if before > 0 else 0.0


def _at(design, pin):
    source = design.element(pin.source) if pin.source else None
    return source if source is not None else pin.location


def _phase_words(branch, label, i):
    r = branch.pump_region.result
    high = float(r.pin_high_peak_A[label][i]) if label in r.pin_high_peak_A else 0.0
    low = float(r.pin_low_peak_A[label][i]) if label in r.pin_low_peak_A else 0.0
    return " while high (sourcing)" if high >= low else " while low (sinking)"


def _fix(design, pin, pumped, current, surge=False):
    """The fix's words, and the ohms the model re-run added on the pin (None: no re-run
    found a value)."""
    drive_V = float(np.max(pin.high_V)) if np.size(pin.high_V) else 0.0
    pump = pumped[0].pump_region.pumps[0] if pumped else None
    # a pump lifted through a series resistor already: the fix is that resistor's new value
    present = next((p.pin_resistors[pin.label] for p in pumped[0].pump_region.pumps
                    if pin.label in p.pin_resistors), None) if pumped else None
    present_ohm = (present.value or 0.0) if present is not None else 0.0
    extra = drive_V / pin.max_current_A - pin.output_resistance_ohm if drive_V > 0 else 0.0
    if extra <= present_ohm:
        return f"add a series resistor on {pin.label}, or move a branch to another pin", None
    value = preferred.at_or_above(extra, "E24")
    if not pumped:
        return (f"add at least {format_resistance(value)} (E24, IEC 60063) in series on {pin.label}, "
                "then check the LEDs' headroom again"), None
    branch = pumped[0]
    region = branch.pump_region
    # every LED the pump feeds, each at its own low corner
    lows = _lows(branch)
    index = [p.label for p in region.pins].index(pin.label) if pin.label in [p.label for p in region.pins] else -1
    outcome = _remembered((region.signature, index, value, pin.max_current_A)
                          if region.signature is not None else None,
                          lambda: _search(design, pin, pump, value, lows, present_ohm))

    def change(ohm, e24=" (E24, IEC 60063)"):
        if present is not None:
            return (f"raise {present.name}, in series on {pin.label}, from "
                    f"{format_resistance(present_ohm)} to {format_resistance(ohm)}{e24}")
        return f"add {format_resistance(ohm)}{e24} in series on {pin.label}"
    if outcome is None:
        return (f"{change(value, ' or more')}; re-run the check with it, as it costs the pump "
                "some boost"), None
    value, after = outcome
    return (f"{change(value)}: the model "
            f"re-run keeps it under {format_quantity(pin.max_current_A, 'A')}, and it costs "
            f"{_costs(branch, lows, after)}"), value - present_ohm


def _costs(branch, lows, after) -> str:
    """What a change costs each LED of a pump at its low corner, in words: `after` holds
    each LED's current there with the change, in the order of `lows`."""
    parts = []
    for (name, low), now in zip(lows.items(), after):
        before = float(branch.current_A[name][low])
        parts.append(f"{name} {_cost(before, now):.0f} %" + (" of its average current at the low corner"
                                                             if len(lows) == 1 else "")
                     + f" ({format_quantity(before, 'A')} to {format_quantity(now, 'A')})")
    if len(parts) == 1:
        return parts[0]
    return ", ".join(parts[:-1]) + " and " + parts[-1] + " of their average currents at their low corners"


def _search(design, pin, pump, value, lows, present_ohm=0.0):
    """The least E24 value from `value` up that the model shows to keep the pin within its
    limit, and each LED's average current with it at its low corner (`lows`: LED -> corner);
    None if none of 8 does. The value replaces the pin's series resistor of present_ohm, if
    it has one."""
    for _ in range(8):
        try:
            r = rerun_pump(design, pump, series_ohm={pin.label: value - present_ohm})
        except Exception:
            break
        worst = max(float(np.max(r.startup_surge_A.get(pin.label, 0.0))),
                    float(np.max(np.maximum(r.pin_high_peak_A.get(pin.label, 0.0),
                                            r.pin_low_peak_A.get(pin.label, 0.0)))))
        if worst <= pin.max_current_A:
            # in the order of the LEDs (a twin cell remembers it under other names)
            return value, tuple(float(r.diode_average_A[name][low]) for name, low in lows.items())
        value = preferred.at_or_above(value * 1.2, "E24")
    return None
