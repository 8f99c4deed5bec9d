"""What it finds: a value whose text, as typed, likely means other than what a SPICE
simulator reads: `1M` on a resistor (M is milli, so a milliohm, where a megohm was surely
meant), `1F` on a capacitor (F is femto), and values in the letter-and-digit code of
IEC 60062 (`4k7`, `R47`, `2u2`) that exported schematics write.

Why it matters: the simulator and the review read the same card differently. A bleeder
typed `1M` is a short in simulation; `4k7` simulates as 4 kΩ.

How it is computed: the reader keeps each value's text as typed. A SPICE number whose scale
letter is an upper-case M on a resistor, or a lone F on a capacitor, is flagged; drc uses
the value SPICE reads. An IEC 60062 code is read as the part's value (4k7 is 4.7 kΩ) and
flagged, because a simulator reads only its leading number and suffix (ngspice reads `4k7`
as 4 kΩ).

Example: `RBLEED vbat 0 1M` reads as 1 mΩ; write `1MEG`.

Fix: write the value the way SPICE reads it: `1MEG` for a megohm, `4.7k` for 4k7, `1u` for
a microfarad.

Sources: Berkeley SPICE3 user's manual (scale suffixes); IEC 60062 (letter and digit code).
"""

from drc.api import Rule, finding

RULE = Rule(id="suffix-ambiguity", severity="warning",
            summary="a value whose SPICE suffix likely means other than intended",
            sources=("Berkeley SPICE3 user's manual: number scale factors",
                     "IEC 60062: marking codes for resistors and capacitors"))


def check(design, settings):
    for note in design.value_notes:
        if note.spice_reads is not None and note.read_as != note.spice_reads:
            fix = (f"write the value as SPICE reads it ({_spice_text(note.read_as)}), so the "
                   "simulator and the review agree")
        else:
            fix = "write the value with an unambiguous suffix (MEG for mega, u for micro)"
        yield finding(note.location, f"{note.element}: {note.meant}", elements=[note.element],
                      values={"read_as": note.read_as,
                              **({"spice_reads": note.spice_reads} if note.spice_reads is not None else {})},
                      fix=fix)


def _spice_text(value: float) -> str:
    for scale, suffix in ((1e6, "MEG"), (1e3, "k"), (1.0, ""), (1e-3, "m"), (1e-6, "u"),
                          (1e-9, "n"), (1e-12, "p")):
        if abs(value) >= scale * 0.9995:
            return f"{value / scale:g}{suffix}"
    return f"{value:g}"
