"""SPICE numbers and IEC 60062 value codes (drc/values.py), checked against the Berkeley
SPICE3 user's manual's scale-factor table, against ngspice's own reading, and against the
letter-and-digit code of IEC 60062."""

import os
import sys

import pytest
from hypothesis import given, settings, strategies as st

sys.path.insert(0, os.path.dirname(__file__))
from ngspice import op  # noqa: E402

from drc.values import parse_iec_code, parse_number, spice_reading_of_code  # noqa: E402

# Berkeley SPICE3 user's manual, "scale factors": T=1e12 G=1e9 MEG=1e6 K=1e3 MIL=25.4e-6
# M=1e-3 U=1e-6 N=1e-9 P=1e-12 F=1e-15; letters that follow are ignored.
SPICE3_TABLE = {"T": 1e12, "G": 1e9, "MEG": 1e6, "K": 1e3, "M": 1e-3, "U": 1e-6,
                "N": 1e-9, "P": 1e-12, "F": 1e-15, "MIL": 25.4e-6}


@pytest.mark.parametrize("suffix", sorted(SPICE3_TABLE))
@pytest.mark.parametrize("case", [str.upper, str.lower, str.capitalize])
def test_suffix_table_matches_spice3_manual(suffix, case):
    text = "2.5" + case(suffix)
    # Berkeley SPICE3 user's manual: scale factors, case-insensitive
    assert parse_number(text).value == pytest.approx(2.5 * SPICE3_TABLE[suffix], rel=1e-12)


def test_m_is_milli_and_f_is_femto():
    # Berkeley SPICE3 user's manual: M is milli (1e-3), not mega; F is femto (1e-15)
    assert parse_number("1M").value == pytest.approx(1e-3)
    # Berkeley SPICE3 user's manual: F is femto, not farad
    assert parse_number("1F").value == pytest.approx(1e-15)
    # Berkeley SPICE3 user's manual: mega is written MEG
    assert parse_number("1MEG").value == pytest.approx(1e6)


@pytest.mark.parametrize("text,mantissa,factor", [
    ("10uF", 10, 1e-6), ("10V", 10, 1.0), ("4.7kOhm", 4.7, 1e3), ("1megohm", 1, 1e6),
    ("2milinch", 2, 25.4e-6), ("3mA", 3, 1e-3), ("5Hz", 5, 1.0), ("1e3pF", 1e3, 1e-12),
    ("1e", 1, 1.0)])
def test_trailing_letters_ignored(text, mantissa, factor):
    # Berkeley SPICE3 user's manual: letters after a number or its scale factor are ignored
    assert parse_number(text).value == pytest.approx(mantissa * factor, rel=1e-12)


def test_ten_microfarad():
    # Berkeley SPICE3 user's manual (and the issue): 10uF is 1e-5
    assert parse_number("10uF").value == pytest.approx(1e-5, rel=1e-12)


@pytest.mark.parametrize("text", ["", "k", "abc", "1.2.3", "--1", "e3", "1 k"])
def test_not_numbers(text):
    # Berkeley SPICE3 user's manual: a number starts with digits (or a point and digits)
    assert parse_number(text) is None


@settings(max_examples=300, deadline=None)
@given(st.floats(min_value=1e-6, max_value=1e6, allow_nan=False),
       st.sampled_from(sorted(SPICE3_TABLE)), st.sampled_from(["", "F", "H", "V", "A", "Ohm"]))
def test_suffix_with_any_mantissa(x, suffix, unit):
    mantissa = f"{x:.6f}"
    text = mantissa + suffix + unit
    # Berkeley SPICE3 user's manual: value = mantissa * scale factor; trailing letters ignored
    assert parse_number(text).value == pytest.approx(float(mantissa) * SPICE3_TABLE[suffix],
                                                     rel=1e-12)


def test_suffixes_as_ngspice_reads_them():
    """ngspice (the reference simulator) reads each suffix as the SPICE3 table says: a
    current source of value 1<suffix> into 1 ohm gives a node voltage of that value."""
    texts = ["1T", "1G", "1MEG", "1K", "1M", "1U", "1N", "1P", "1F", "1MIL", "10uF", "2.2kohm"]
    lines = ["suffix reading"]
    for k, t in enumerate(texts):
        lines += [f"I{k} 0 n{k} DC {t}", f"R{k} n{k} 0 1"]
    lines.append(".end")
    got = op("\n".join(lines), [f"v(n{k})" for k in range(len(texts))])[None]
    for k, t in enumerate(texts):
        # ngspice 39 .op: its value for the same text (it prints 7 significant digits)
        assert parse_number(t).value == pytest.approx(got[f"v(n{k})"], rel=1e-6), t


# IEC 60062 letter-and-digit code: the letter stands for the decimal point and the scale;
# R, K, M, G for resistors (ohm, kilo, mega, giga), p, n, u (µ) for capacitors.
IEC_CASES = [("4k7", 4.7e3), ("R47", 0.47), ("0R47", 0.47), ("47R", None), ("2u2", 2.2e-6),
             ("1M5", 1.5e6), ("4n7", 4.7e-9), ("6p8", 6.8e-12), ("2G2", 2.2e9), ("1R0", 1.0),
             ("4µ7", 4.7e-6)]


@pytest.mark.parametrize("text,value", IEC_CASES)
def test_iec_60062_codes(text, value):
    got = parse_iec_code(text)
    if value is None:
        # IEC 60062: a letter at the end is no decimal mark (47R is a plain SPICE 47)
        assert got is None
    else:
        # IEC 60062: letter-and-digit code, the letter marks the decimal point and scale
        assert got == pytest.approx(value, rel=1e-12)


def test_what_ngspice_reads_an_iec_code_as():
    """drc's guess at a simulator's reading of a code is ngspice's actual reading."""
    texts = ["4k7", "2u2", "1M5", "4n7"]
    lines = ["code reading"]
    for k, t in enumerate(texts):
        lines += [f"I{k} 0 n{k} DC {t}", f"R{k} n{k} 0 1"]
    lines.append(".end")
    got = op("\n".join(lines), [f"v(n{k})" for k in range(len(texts))])[None]
    for k, t in enumerate(texts):
        # ngspice 39: reads the leading number and suffix, ignores the rest (4k7 -> 4000)
        assert spice_reading_of_code(t) == pytest.approx(got[f"v(n{k})"], rel=1e-6), t


def test_overflow_is_refused():
    # IEEE 754 double: 1e308 * 1e12 is past the largest finite value
    with pytest.raises(OverflowError):
        parse_number("1e308T")


# ------------------------------------------------------------- the suffix-ambiguity rule

def _suffix_findings(path):
    from drc.engine import run_check
    report, _, _ = run_check([str(path)], None, [])
    return {f["elements"][0]: f for f in report["findings"] if f["rule"] == "suffix-ambiguity"}


def _line_and_column(path, card, value):
    for k, text in enumerate(path.read_text().split("\n"), start=1):
        if text.startswith(card + " "):
            return k, text.index(" " + value) + 2
    raise AssertionError(card)


def test_suffix_ambiguity_findings():
    from pathlib import Path
    path = Path(__file__).resolve().parent / "netlists" / "iec_codes.cir"
    found = _suffix_findings(path)
    # IEC 60062: 4k7 is 4.7 kohm, 2u2 is 2.2 uF, 0R47 is 0.47 ohm: drc reads the part's value
    for element, code in (("R1", "4k7"), ("C1", "2u2"), ("R4", "0R47")):
        f = found[element]
        assert f["values"]["read_as"] == pytest.approx(parse_iec_code(code), rel=1e-12)
        # ngspice 39 reads only the leading number and suffix (see the ngspice test above)
        assert f["values"]["spice_reads"] == pytest.approx(spice_reading_of_code(code), rel=1e-12)
        # the warning points at the value as typed
        assert (f["location"]["line"], f["location"]["column"]) == _line_and_column(path, element, code)
        assert f["severity"] == "warning"
    # Berkeley SPICE3 manual: 1M on a resistor is a milliohm (a megohm is 1MEG)
    assert found["R2"]["values"]["read_as"] == pytest.approx(1e-3)
    assert (found["R2"]["location"]["line"], found["R2"]["location"]["column"]) == \
        _line_and_column(path, "R2", "1M")
    # Berkeley SPICE3 manual: 1F on a capacitor is a femtofarad
    assert found["C2"]["values"]["read_as"] == pytest.approx(1e-15)
    assert found["C2"]["location"]["line"] == _line_and_column(path, "C2", "1F")[0]
    # Berkeley SPICE3 manual: 1MEG and 1uF say what they mean: no finding
    assert "R3" not in found and "C3" not in found


def test_suffix_ambiguity_through_the_command_line():
    import json
    import subprocess
    from pathlib import Path
    root = Path(__file__).resolve().parent.parent
    done = subprocess.run([sys.executable, "-m", "drc", "check", "samples/value_codes.cir",
                           "--format", "json"], capture_output=True, text=True, cwd=root, timeout=120)
    report = json.loads(done.stdout)
    flagged = {f["elements"][0] for f in report["findings"] if f["rule"] == "suffix-ambiguity"}
    # the sample's README and IEC 60062 / SPICE3: RBLEED "1M" and the codes 4k7, 2u2, 0R47
    assert {"RBLEED", "R1", "C1", "R3"} <= flagged
    # 47R is a plain SPICE 47 (R trails the number and is ignored): nothing to flag
    assert "R2" not in flagged
