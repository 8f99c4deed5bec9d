"""What it finds: an LED whose light is modulated outside the low-risk region of IEEE Std
1789-2015 (or, as a note, above its no-observable-effect line), and an LED that flashes in
the band of roughly 3 to 60 Hz that can trouble photosensitive viewers.

Why it matters: visible flicker and stroboscopic effects tire and distract; flashing in the
3 to 60 Hz band can trigger seizures in photosensitive people.

How it is computed: percent modulation 100*(Lmax - Lmin)/(Lmax + Lmin) with light taken as
proportional to the LED's current: over the pump's steady period for a pumped LED, between
its drive's phases for a toggled pin. Lines (from memory of IEEE 1789-2015, as the domain
brief gives them): low risk below 90 Hz Mod% < 0.025*f, 90 to 1250 Hz Mod% < 0.08*f, above
1250 Hz no limit; no observable effect below 90 Hz 0.01*f, 90 Hz to 3 kHz 0.0333*f, above
3 kHz none.

An infrared LED is not checked: its light is not seen, and both IEEE 1789's lines and the
photosensitive band concern light that is (its eye-safety caution, IEC 62471, comes with
its colour in every report).

Example: a pin toggling an LED on and off at 500 Hz (100 % modulation, limit 40 %).

Fix: toggle faster (above 1250 Hz the low-risk region has no limit), smooth the light with
a reservoir capacitor, or, for a deliberate flash, keep it out of 3 to 60 Hz.

Sources: IEEE Std 1789-2015; common practice for the 3 to 60 Hz photosensitive band.
"""

from drc.api import Rule, finding, flicker, flicker_of_branch

RULE = Rule(id="flicker", severity="warning",
            summary="a modulated LED outside IEEE 1789's low-risk region, or flashing at 3 to 60 Hz",
            sources=("IEEE Std 1789-2015 (recommended practice on LED flicker)",
                     "common practice: flashing at about 3 to 60 Hz can trouble photosensitive viewers"))

PHOTOSENSITIVE = ("Flashing in the 3 to 60 Hz band can trouble photosensitive people: keep "
                  "deliberate flashes out of it, and follow the applicable accessibility guidance.")


def check(design, settings):
    for branch in design.branches:
        for led in branch.leds:
            if led.colour == "infrared":        # unseen: see the module's doc
                continue
            found = flicker_of_branch(design, branch, led)
            if found is None:
                continue
            f, modulation = found
            if modulation < 1.0:
                continue
            values = {"frequency_Hz": f, "modulation_percent": modulation,
                      "low_risk_limit_percent": min(flicker.low_risk_limit(f), 100.0)}
            if flicker.in_photosensitive_band(f):
                yield finding(led.element, f"{led.name} flashes at {f:g} Hz ({modulation:.0f} % "
                                           "modulation), in the 3 to 60 Hz band",
                              elements=[e.name for e in branch.elements], nets=branch.nets,
                              values=values, caution=PHOTOSENSITIVE,
                              fix="flash below 3 Hz, or toggle above 1250 Hz for steady light")
                continue
            verdict = flicker.verdict(f, modulation)
            if verdict == "outside":
                yield finding(led.element, f"{led.name} is modulated {modulation:.0f} % at {f:g} Hz, outside "
                                           f"IEEE 1789's low-risk region (below {flicker.low_risk_limit(f):.0f} % "
                                           "at that frequency)",
                              elements=[e.name for e in branch.elements], nets=branch.nets, values=values,
                              fix="toggle above 1250 Hz, or smooth the light with a reservoir capacitor")
            elif verdict == "low-risk":
                yield finding(led.element, f"{led.name} is modulated {modulation:.0f} % at {f:g} Hz: low "
                                           "risk, but above IEEE 1789's no-observable-effect line",
                              elements=[e.name for e in branch.elements], nets=branch.nets, values=values,
                              fix="toggle above 3 kHz for no observable effect", severity="note")
