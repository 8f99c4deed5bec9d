"""The static LED rules on demo scenarios of our own (tests/netlists/branches/), firing and
not firing; their computed fixes re-run; the cautions; the exit status; the JSON report
against the contract (docs/contract.md).

Each rule's finding is checked for: the location of the LED's (or pin's) card, found by
reading the netlist text here; the elements; the corner, against the ends the STEM.toml
gives; values whose names carry their unit; a fix that names an E24 value (IEC 60063), and
that the netlist rewritten with that value no longer draws the finding.
"""

from __future__ import annotations

import json
import math
import os
import re
import shutil
import subprocess
import sys
import tomllib
from pathlib import Path

import pytest

sys.path.insert(0, os.path.dirname(__file__))
import ngspice  # noqa: E402

import drc  # noqa: E402
from drc.engine import run_check  # noqa: E402

ROOT = Path(__file__).resolve().parents[1]
HERE = Path(__file__).resolve().parent / "netlists" / "branches"
SAMPLES = ROOT / "samples"

# IEC 60063:2015, the E24 series (decade mantissas; typed from memory of the standard's table)
E24 = (1.0, 1.1, 1.2, 1.3, 1.5, 1.6, 1.8, 2.0, 2.2, 2.4, 2.7, 3.0,
       3.3, 3.6, 3.9, 4.3, 4.7, 5.1, 5.6, 6.2, 6.8, 7.5, 8.2, 9.1)
# the contract: "a key's suffix names the unit"
UNIT_SUFFIX = re.compile(r"_(V|A|s|ohm|F|Hz|C)$")
PREFIX = {"": 1.0, "k": 1e3, "M": 1e6, "m": 1e-3}


def in_e24(ohm: float) -> bool:
    mantissa = ohm / 10 ** math.floor(math.log10(ohm))
    return any(abs(mantissa - m) < 1e-6 for m in E24)


def e24_at_or_above(ohm: float) -> float:
    decade = math.floor(math.log10(ohm))
    for d in (decade, decade + 1):
        for m in E24:
            if m * 10 ** d >= ohm * (1 - 1e-9):
                return float(f"{m * 10 ** d:.6g}")
    raise AssertionError(ohm)


def check(path: Path) -> dict:
    report, _, _ = run_check([str(path)], None, [])
    return report


def of_rule(report: dict, rule: str) -> list[dict]:
    return [f for f in report["findings"] if f["rule"] == rule]


def card_location(path: Path, name: str) -> tuple[int, int]:
    """(line, column) of the card whose first word is `name`, read from the file here."""
    for number, line in enumerate(path.read_text().splitlines(), start=1):
        words = line.split()
        if words and words[0].lower() == name.lower():
            return number, len(line) - len(line.lstrip()) + 1
    raise AssertionError(f"no card {name} in {path}")


def config_of(stem: str) -> dict:
    return tomllib.loads((HERE / f"{stem}.toml").read_text())


def named_ohm(fix: str, lead: str = r"use (?:at least )?") -> float:
    """The resistance a fix names after `lead`, in ohms."""
    m = re.search(lead + r"([0-9.]+) ?([kMm]?)Ω", fix)
    assert m, f"the fix names no resistance: {fix!r}"
    return float(m.group(1)) * PREFIX[m.group(2)]


def rewrite(stem: str, tmp_path: Path, edit) -> Path:
    """The scenario copied to tmp_path with its config, the netlist text passed through edit."""
    out = tmp_path / f"{stem}.cir"
    out.write_text(edit((HERE / f"{stem}.cir").read_text()))
    shutil.copy(HERE / f"{stem}.toml", tmp_path / f"{stem}.toml")
    return out


def set_value(text: str, name: str, ohm: float) -> str:
    new, n = re.subn(rf"(?im)^({name}\s+\S+\s+\S+\s+)\S+", rf"\g<1>{ohm:g}", text)
    assert n == 1
    return new


def assert_finding_shape(f: dict, path: Path, card: str, elements: set[str]):
    line, column = card_location(path, card)
    # the contract: location of the element's card (path, line, column)
    assert f["location"] == {"path": str(path), "line": line, "column": column}
    assert elements <= set(f["elements"]), f["elements"]
    assert f["values"], f
    for key in f["values"]:
        # the contract: every number's key names its unit
        assert UNIT_SUFFIX.search(key), key
    assert isinstance(f["message"], str) and f["message"]


# ---------------------------------------------------------------------------- led-headroom


def test_headroom_fires_at_the_low_corner_and_its_fix_clears_it(tmp_path):
    path = HERE / "headroom_coin.cir"
    report = check(path)
    [f] = of_rule(report, "led-headroom")
    assert_finding_shape(f, path, "D1", {"R1", "D1"})
    assert f["severity"] == "error"
    # domain brief (from memory): a lithium coin cell ends its life at 2.0 V; the low corner
    # is the spent cell, the cold end (forward voltage rises as it cools, common practice)
    # and the resistor at its + tolerance end
    assert f["corner"]["supply_V"]["VCELL"] == pytest.approx(2.0)
    assert f["corner"]["temperature_C"] == pytest.approx(-20.0)
    assert f["corner"]["resistor_tolerance"] == "+5 %"
    # Ohm's law: the current is below (2.0 V - the drop of a red LED, ~1.8 V at 1 mA from
    # memory) / 4.7 kOhm, far below the 0.5 mA visible current
    assert f["values"]["current_A"] < (2.0 - 1.6) / (4700 * 1.05)
    assert f["values"]["visible_current_A"] == pytest.approx(0.5e-3)
    assert f["values"]["available_V"] == pytest.approx(2.0)
    value = named_ohm(f["fix"])
    # IEC 60063: the value named is in the E24 series
    assert "E24" in f["fix"] and in_e24(value), f["fix"]
    fixed = rewrite("headroom_coin", tmp_path, lambda t: set_value(t, "R1", value))
    assert not of_rule(check(fixed), "led-headroom")


def test_headroom_fix_keeps_every_corner_within_the_maximum(tmp_path):
    [f] = of_rule(check(HERE / "headroom_coin.cir"), "led-headroom")
    value = named_ohm(f["fix"])
    after = check(rewrite("headroom_coin", tmp_path, lambda t: set_value(t, "R1", value)))
    # the fix's own words: above the visible current and under the maximum at every corner
    assert after["summary"]["error"] == 0, after["findings"]


def test_headroom_silent_with_a_sensible_resistor():
    report = check(HERE / "rail_resistor.cir")
    assert not of_rule(report, "led-headroom")


# --------------------------------------------------------------------------- led-unlimited


def test_unlimited_fires_and_a_series_resistor_from_its_fix_clears_it(tmp_path):
    path = HERE / "unlimited_sink.cir"
    report = check(path)
    [f] = of_rule(report, "led-unlimited")
    assert_finding_shape(f, path, "D1", {"D1"})
    # Li-ion fresh at 4.2 V (domain brief, from memory); the hot end, where Vf is least
    assert f["corner"]["supply_V"]["VCELL"] == pytest.approx(4.2)
    assert f["corner"]["temperature_C"] == pytest.approx(60.0)
    # Ohm's law bound: at most (4.2 V - 1.6 V) / the pin's 40 ohm, and more than 20 mA
    assert 0.02 < f["values"]["current_A"] < (4.2 - 1.6) / 40
    value = named_ohm(f["fix"])
    # IEC 60063: E24
    assert in_e24(value), f["fix"]
    fixed = rewrite("unlimited_sink", tmp_path, lambda t: t.replace(
        "D1 vcell k LRED", f"RFIX vcell a_fix {value:g}\nD1 a_fix k LRED"))
    after = check(fixed)
    for rule in ("led-unlimited", "led-overcurrent", "pin-overcurrent", "led-headroom"):
        assert not of_rule(after, rule), of_rule(after, rule)


def test_unlimited_silent_with_a_resistor():
    assert not of_rule(check(HERE / "pin_sink.cir"), "led-unlimited")


# ------------------------------------------------------------------------- led-overcurrent


def test_overcurrent_fires_at_the_high_corner_and_its_fix_clears_it(tmp_path):
    path = HERE / "overcurrent_rail.cir"
    report = check(path)
    [f] = of_rule(report, "led-overcurrent")
    assert_finding_shape(f, path, "D1", {"R1", "D1"})
    cfg = config_of("overcurrent_rail")
    # the config's high supply end, the hot end, the resistor at its - tolerance end
    assert f["corner"]["supply_V"]["V33"] == pytest.approx(3.465)
    assert f["corner"]["temperature_C"] == pytest.approx(60.0)
    assert f["corner"]["resistor_tolerance"] == "-5 %"
    assert f["values"]["max_current_A"] == pytest.approx(0.020)
    assert cfg["led"]["D1"]["max_current"] == "20 mA"
    ngspice.require_ngspice()
    deck = set_value(path.read_text(), "R1", 47 * 0.95).replace("DC 3.3", "DC 3.465")
    # ngspice .op at the same corner (3.465 V, 60 degC, R1 at -5 %), within 2 %
    ref = ngspice.op(deck, ["@d1[id]"], [60.0])[60.0]["@d1[id]"]
    assert f["values"]["current_A"] == pytest.approx(ref, rel=0.02)
    value = named_ohm(f["fix"])
    # IEC 60063: E24
    assert in_e24(value), f["fix"]
    # with the resistor tolerance taken out, the named value clears it (with it in, it does
    # not)
    fixed = rewrite("overcurrent_rail", tmp_path, lambda t: set_value(t, "R1", value))
    config = fixed.with_suffix(".toml")
    config.write_text(config.read_text().replace('resistor = "5 %"', 'resistor = "0 %"'))
    after = check(fixed)
    assert not of_rule(after, "led-overcurrent")
    assert after["summary"]["error"] == 0, after["findings"]


def test_overcurrent_fix_holds_at_the_tolerance_end(tmp_path):
    [f] = of_rule(check(HERE / "overcurrent_rail.cir"), "led-overcurrent")
    value = named_ohm(f["fix"])
    after = check(rewrite("overcurrent_rail", tmp_path, lambda t: set_value(t, "R1", value)))
    assert not of_rule(after, "led-overcurrent"), of_rule(after, "led-overcurrent")


def test_overcurrent_silent_within_rating():
    assert not of_rule(check(HERE / "rail_resistor.cir"), "led-overcurrent")


# ----------------------------------------------------------------------------- led-reverse


def test_reverse_fires_across_a_two_cell_li_ion_pack_and_turning_it_clears(tmp_path):
    path = HERE / "reverse_pack.cir"
    report = check(path)
    [f] = of_rule(report, "led-reverse")
    assert_finding_shape(f, path, "D1", {"D1", "R1"})
    # two Li-ion cells fresh: 2 x 4.2 V (domain brief, from memory); the LED blocks, so it
    # takes the whole pack in reverse (its leakage through 1.5 kOhm is negligible)
    assert f["values"]["reverse_V"] == pytest.approx(8.4, rel=1e-3)
    assert f["values"]["max_reverse_V"] == pytest.approx(5.0)
    assert f["corner"]["supply_V"]["VPACK"] == pytest.approx(8.4)
    assert "turn D1 round" in f["fix"]
    fixed = rewrite("reverse_pack", tmp_path, lambda t: t.replace("D1 0 k LRED", "D1 k 0 LRED"))
    after = check(fixed)
    assert not of_rule(after, "led-reverse")
    assert after["summary"]["error"] == 0, after["findings"]


def test_reverse_silent_below_the_rating():
    report = check(HERE / "reverse_low_rail.cir")
    # 3.6 V at most in reverse, under the 5 V rating (common practice)
    assert not of_rule(report, "led-reverse")


# ---------------------------------------------------------------------------- net-floating


def test_net_floating_fires_on_an_open_cathode_and_a_lone_resistor(tmp_path):
    path = HERE / "floating_open.cir"
    found = of_rule(check(path), "net-floating")
    by_element = {tuple(f["elements"]): f for f in found}
    assert set(by_element) == {("D1",), ("RPULL",)}, found
    led = by_element[("D1",)]
    line, column = card_location(path, "D1")
    assert led["location"] == {"path": str(path), "line": line, "column": column}
    assert led["nets"] == ["k_open"] and "cathode" in led["message"]
    lone = by_element[("RPULL",)]
    line, column = card_location(path, "RPULL")
    assert lone["location"] == {"path": str(path), "line": line, "column": column}
    assert lone["nets"] == ["sense_nc"]
    fixed = rewrite("floating_open", tmp_path, lambda t: t.replace(
        "D1 a k_open LRED", "D1 a 0 LRED").replace("RPULL vdd sense_nc 10k\n", ""))
    assert not of_rule(check(fixed), "net-floating")


# ------------------------------------------------------------------------- pin-overcurrent


def test_pin_overcurrent_fires_and_the_named_resistance_clears_it(tmp_path):
    path = HERE / "pin_overcurrent.cir"
    report = check(path)
    [f] = of_rule(report, "pin-overcurrent")
    assert_finding_shape(f, path, "VPA5", {"D1", "R1"})
    assert not of_rule(report, "led-overcurrent")     # the LED is rated 30 mA
    assert f["values"]["max_current_A"] == pytest.approx(0.012)
    assert f["corner"]["temperature_C"] == pytest.approx(60.0)
    ngspice.require_ngspice()
    deck = set_value(path.read_text(), "R1", 22 * 0.95).replace(
        "VPA5 pa5 0", "VPA5 pa5_drv 0").replace("\n.end", "\nRPIN pa5_drv pa5 40\n.end")
    # ngspice .op at the corner (3.3 V, 60 degC, R1 -5 %), the pin's 40 ohm as a resistor
    ref = ngspice.op(deck, ["@d1[id]"], [60.0])[60.0]["@d1[id]"]
    assert f["values"]["current_A"] == pytest.approx(ref, rel=0.02)
    least = named_ohm(f["fix"], lead=r"add at least ")
    value = e24_at_or_above(least)      # the fix says "E24 at or above"
    fixed = rewrite("pin_overcurrent", tmp_path, lambda t: t.replace(
        "R1 pa5 a 22", f"RFIX pa5 p_fix {value:g}\nR1 p_fix a 22"))
    after = check(fixed)
    assert not of_rule(after, "pin-overcurrent")
    assert after["summary"]["error"] == 0, after["findings"]


def test_pin_overcurrent_fix_names_an_e24_value():
    [f] = of_rule(check(HERE / "pin_overcurrent.cir"), "pin-overcurrent")
    # IEC 60063: E24
    assert in_e24(named_ohm(f["fix"], lead=r"add at least "))


def test_pin_overcurrent_silent_within_the_limit():
    assert not of_rule(check(HERE / "pin_source.cir"), "pin-overcurrent")


def test_two_strings_on_one_pin_share_its_output_resistance():
    ngspice.require_ngspice()
    path = HERE / "pin_shared.cir"
    deck = path.read_text().replace("VPA1 pa1 0", "VPA1 pa1_drv 0").replace(
        "\n.end", "\nRPIN pa1_drv pa1 40\n.end")
    ref = ngspice.op(deck, ["@d1[id]", "@d2[id]"])[None]
    report = check(path)
    by_led = {b["led"]: b for b in report["branches"]}
    # ngspice .op, the pin's 40 ohm shared by both strings
    assert by_led["D1"]["current_A"]["nominal"] == pytest.approx(ref["@d1[id]"], rel=0.02)
    # ngspice: the pin carries 11.9 mA in all, under its 12 mA limit
    assert not of_rule(report, "pin-overcurrent")


# -------------------------------------------------------------------------------- cautions


def test_lithium_caution_on_the_finding_and_the_report():
    for stem in ("headroom_coin", "reverse_pack"):
        report = check(HERE / f"{stem}.cir")
        assert report["findings"]
        for f in report["findings"]:
            # domain brief: lithium cells shorted or reversed can overheat, vent or burn
            assert "lithium" in f["caution"].lower() and "burn" in f["caution"], f
        assert any("lithium" in c.lower() and "burn" in c for c in report["cautions"])


def test_no_lithium_caution_on_a_mains_adapter_rail():
    report = check(HERE / "overcurrent_rail.cir")
    assert not any("lithium" in c.lower() for c in report["cautions"])
    assert all("lithium" not in f["caution"].lower() for f in report["findings"])


def test_infrared_led_carries_the_eye_safety_caution():
    report = check(HERE / "ir_remote.cir")
    [f] = of_rule(report, "led-overcurrent")
    # domain brief: infrared LEDs have eye-safety limits (IEC 62471)
    assert "IEC 62471" in f["caution"]
    assert any("IEC 62471" in c for c in report["cautions"])
    assert not any("IEC 62471" in c for c in check(HERE / "rail_resistor.cir")["cautions"])


SIGN_OFF = ("not a sign-off", "datasheet")   # domain brief: the caution every report carries


def test_every_report_carries_the_sign_off_caution():
    for path in sorted(HERE.glob("*.cir")):
        report = check(path)
        # domain brief: a clean report is not a sign-off; the datasheets govern
        assert any(all(w in c for w in SIGN_OFF) for c in report["cautions"]), path


# ---------------------------------------------------------------------------- command line


def cli(*args: str) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "drc", *args], capture_output=True, text=True,
                          cwd=ROOT, timeout=120)


def test_exit_status_one_with_an_error_and_zero_when_clean(tmp_path):
    # the contract: 1 when something is at or above --fail-on (error), else 0
    assert cli("check", str(HERE / "overcurrent_rail.cir")).returncode == 1
    fixed = rewrite("overcurrent_rail", tmp_path, lambda t: set_value(t, "R1", 150))
    done = cli("check", str(fixed), "--format", "json")
    assert done.returncode == 0, done.stdout + done.stderr
    assert json.loads(done.stdout)["summary"]["error"] == 0


def test_the_samples_run_from_the_command_line_without_a_traceback():
    done = cli("check", str(SAMPLES), "--format", "json")
    assert "Traceback" not in done.stderr, done.stderr
    assert done.returncode in (0, 1), done.stderr
    report = json.loads(done.stdout)
    # the contract: a folder means every netlist below it
    assert len(report["inputs"]) == len(list(SAMPLES.rglob("*.cir")))
    # the contract: 1 exactly when there is an error finding (default --fail-on error)
    assert (done.returncode == 1) == (report["summary"]["error"] > 0)


@pytest.mark.parametrize("sample", sorted(p.name for p in SAMPLES.glob("*.cir")))
def test_every_sample_checks_and_carries_the_sign_off_caution(sample):
    report = check(SAMPLES / sample)
    # domain brief: a clean report is not a sign-off; the datasheets govern
    assert any(all(w in c for w in SIGN_OFF) for c in report["cautions"])
    for level in ("error", "warning", "note"):
        assert report["summary"][level] == sum(f["severity"] == level for f in report["findings"])


# ----------------------------------------------------------------------- JSON report shape


def test_report_shape_against_the_contract():
    path = HERE / "subckt_twice.cir"
    done = cli("check", str(path.relative_to(ROOT)), "--format", "json")
    report = json.loads(done.stdout)
    assert report["schema"] == "drc-report/1"
    assert report["tool"] == {"name": "drc", "version": drc.__version__}
    pyproject = tomllib.loads((ROOT / "pyproject.toml").read_text())
    assert pyproject["project"].get("version", drc.__version__) == drc.__version__
    for key in ("inputs", "assumptions", "findings", "branches", "cautions", "summary"):
        assert key in report
    [entry] = report["inputs"]
    assert entry["path"] == str(path.relative_to(ROOT))
    assert entry["config"] == str(path.with_suffix(".toml").relative_to(ROOT))
    ngspice.require_ngspice()
    listing = ngspice.run_batch(path.read_text(), ["listing e"])
    cards = re.findall(r"(?m)^\s*\d+ : (\S+)", listing)[1:]           # past the title
    devices = [c for c in cards if not c.startswith(".")]
    # ngspice's expanded listing: the elements after flattening the two instances
    assert entry["elements"] == len(devices) == 5
    nodes = [k for k in ngspice.op_all(path.read_text()) if "#" not in k]
    # ngspice's node list (ground not among them): drc counts ground as a net as well
    assert entry["nets"] == len(nodes) + 1
    names = {b["led"] for b in report["branches"]}
    assert names == {"XOPEN.DL", "XSHUT.DL"}
    for b in report["branches"]:
        assert b["drive"] == "rail" and b["source"] == "VDD"
        prefix = b["led"].split(".")[0]
        assert set(b["elements"]) == {f"{prefix}.RL", f"{prefix}.DL"}
        for key in ("current_A", "forward_V"):
            spread = b[key]
            assert set(spread) == {"low", "nominal", "high"}
            assert spread["low"] <= spread["nominal"] <= spread["high"]
    for level in ("error", "warning", "note"):
        assert report["summary"][level] == sum(f["severity"] == level for f in report["findings"])


def test_branch_spread_matches_ngspice_at_the_corners():
    """current_A {low, nominal, high} of a rail LED against ngspice at the corners where a
    fixed-voltage LED is dimmest (low rail, cold) and brightest (high rail, hot)."""
    ngspice.require_ngspice()
    path = HERE / "rail_resistor.cir"
    [b] = check(path)["branches"]
    assert (b["led"], b["drive"], b["source"]) == ("D1", "rail", "VDD")
    assert set(b["elements"]) == {"R1", "D1"}
    text = path.read_text()
    low = ngspice.op(text.replace("DC 3.3", "DC 3.0"), ["@d1[id]"], [-20.0])[-20.0]["@d1[id]"]
    nominal = ngspice.op(text, ["@d1[id]", "v(a)"], [27.0])[27.0]
    high = ngspice.op(text.replace("DC 3.3", "DC 3.6"), ["@d1[id]"], [60.0])[60.0]["@d1[id]"]
    # ngspice .op at 3.0 V / -20 degC, 3.3 V / 27 degC, 3.6 V / 60 degC (2 % / 3 %)
    assert b["current_A"]["low"] == pytest.approx(low, rel=0.03)
    assert b["current_A"]["nominal"] == pytest.approx(nominal["@d1[id]"], rel=0.02)
    assert b["current_A"]["high"] == pytest.approx(high, rel=0.03)
    # ngspice: the anode's voltage is the forward voltage (cathode on ground)
    assert b["forward_V"]["nominal"] == pytest.approx(nominal["v(a)"], rel=0.02)


def test_a_netlist_with_no_config_lists_every_default(tmp_path):
    lone = tmp_path / "lone.cir"
    shutil.copy(HERE / "rail_resistor.cir", lone)
    report = check(lone)
    text = "\n".join(report["assumptions"]).lower()
    assert "no design context" in text
    assert "temperature" in text and "-20" in text and "60" in text
    assert "tolerance" in text and "resistor" in text
    assert any("VDD" in a and "3.3 V" in a for a in report["assumptions"])   # its DC value
    assert any("D1" in a and "visible" in a for a in report["assumptions"])  # LED ratings
    assert report["inputs"][0].get("config") is None


UNSOLVED_LOADS = """Pin loads drc cannot solve (our own scenario)
.model LRED D(IS=5e-19 N=2.0 RS=3 EG=2.2 XTI=3)
.model SIL D(IS=2e-9 N=1.8 RS=0.5)
VCC vcc 0 DC 3.3
CCC vcc 0 1u
VPA pa 0 PULSE(0 3.3 0 1u 1u 0.5m 1m)
CF pa 0 100n
R1 pa a 330
D1 a 0 LRED
VPB pb 0 DC 3.3
DX pb q SIL
RQ q 0 1k
XU pb vcc SENSOR
CB pb 0 100n
R2 pb b 330
D2 b 0 LRED
.end
"""


def test_what_else_a_pin_drives_that_drc_cannot_solve_is_said(tmp_path):
    """A capacitor on a toggling pin, a diode's path and a black-box part on a pin: each is
    named under assumptions as taken to draw no current; a capacitor on a pin that does not
    toggle is open at DC, and is not named."""
    path = tmp_path / "loads.cir"
    path.write_text(UNSOLVED_LOADS)
    path.with_suffix(".toml").write_text(
        '[supply.VCC]\nsource = "VCC"\nrange = ["3.0 V", "3.6 V"]\n'
        '[pin.PA]\nsource = "VPA"\nsupply = "VCC"\n[pin.PB]\nsource = "VPB"\nsupply = "VCC"\n')
    report = check(path)
    said = [a for a in report["assumptions"] if "also drives" in a]
    assert len(said) == 2, said
    pa = next(a for a in said if a.startswith("pin PA "))
    pb = next(a for a in said if a.startswith("pin PB "))
    assert "CF" in pa and "drawing no current" in pa
    assert all(name in pb for name in ("DX", "RQ", "XU")) and "CB" not in pb
    assert {b["led"] for b in report["branches"] if b["drive"] == "pin"} == {"D1", "D2"}


def test_pins_at_two_frequencies_in_one_circuit_are_said_to_be_taken_as_independent(tmp_path):
    """A bi-colour LED pair between a 1 kHz pin and a 2.5 kHz one: how long the two are in
    each state together depends on more than their duties; drc takes the product of the
    duties, and says so under assumptions (the same pins at one frequency: nothing said)."""
    net = """Bi-colour pair between two pins (our own scenario)
.model LRED D(IS=5e-19 N=2.0 RS=3 EG=2.2 XTI=3)
VCC vcc 0 DC 3.3
CCC vcc 0 1u
VPA pa 0 PULSE(0 3.3 0 10n 10n 0.5m 1m)
VPB pb 0 PULSE(3.3 0 0 10n 10n {w} {per})
R1 pa m 100
DR m pb LRED
DG pb m LRED
.end
"""
    said = []
    for w, per in (("0.2m", "0.4m"), ("0.5m", "1m")):
        path = tmp_path / f"pair_{per}.cir"
        path.write_text(net.format(w=w, per=per))
        path.with_suffix(".toml").write_text('[supply.VCC]\nsource = "VCC"\n')
        said.append([a for a in check(path)["assumptions"] if "different frequencies" in a])
    assert len(said[0]) == 1 and "VPA (1000 Hz)" in said[0][0] and "2500 Hz" in said[0][0], said
    assert said[1] == []


def test_a_temp_card_is_said_to_be_the_simulators_and_a_temperature_outside_is_named(tmp_path):
    """A netlist's `.temp` sets a simulator's temperature; drc's corners come from
    [ambient] (the contract). The report says so, and names a .temp value the corners
    leave out."""
    net = """Porch light tell-tale (our own scenario)
.model LRED D(IS=5e-19 N=2.0 RS=3 EG=2.2 XTI=3)
VCC vcc 0 DC 3.3
R1 vcc a 150
D1 a 0 LRED
.temp {temps}
.end
"""
    said = {}
    for temps in ("25 85", "0 40"):
        path = tmp_path / f"porch_{temps.replace(' ', '_')}.cir"
        path.write_text(net.format(temps=temps))
        path.with_suffix(".toml").write_text('[ambient]\ntemperature = ["-10 degC", "50 degC"]\n')
        said[temps] = [a for a in check(path)["assumptions"] if ".temp" in a]
    assert len(said["25 85"]) == 1 and "-10 °C to 50 °C" in said["25 85"][0]
    assert "leaves out 85 °C" in said["25 85"][0]
    assert len(said["0 40"]) == 1 and "leaves out" not in said["0 40"][0]


def test_an_unlimited_led_on_a_pin_with_a_pull_down_is_found_and_its_fix_holds(tmp_path):
    """An LED straight on a pin whose net also has a 10 k pull-down: still led-unlimited
    (the pull-down is beside it, not in series). The fix is worked out for the string alone
    and says so; with its E24 value in series, the check (which solves the pull-down with
    it) finds the LED under its maximum."""
    net = """Lid-open tell-tale (our own scenario)
.model LRED D(IS=5e-19 N=2.0 RS=3 EG=2.2 XTI=3)
VCC vcc 0 DC 3.3
CCC vcc 0 1u
VPA pa 0 DC 3.3
RPD pa 0 10k
D1 pa 0 LRED
.end
"""
    toml = '[supply.VCC]\nsource = "VCC"\nrange = ["3.0 V", "3.6 V"]\n[pin.PA]\nsource = "VPA"\nsupply = "VCC"\n'
    path = tmp_path / "lid.cir"
    path.write_text(net)
    path.with_suffix(".toml").write_text(toml)
    [f] = of_rule(check(path), "led-unlimited")
    assert "for the string alone" in f["fix"] and "RPD" in f["fix"], f["fix"]
    ohm = named_ohm(f["fix"])
    assert in_e24(ohm)
    fixed = tmp_path / "lid_fixed.cir"
    fixed.write_text(net.replace("D1 pa 0 LRED", f"RF pa a {ohm:g}\nD1 a 0 LRED"))
    fixed.with_suffix(".toml").write_text(toml)
    report = check(fixed)
    assert not of_rule(report, "led-unlimited") and not of_rule(report, "led-overcurrent")
    assert report["branches"][0]["current_A"]["high"] < 20e-3
