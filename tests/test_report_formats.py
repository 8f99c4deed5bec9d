"""The report formatters against outside references: the OASIS SARIF 2.1.0 schema, a
general-purpose XML parser with the JUnit element names CI servers read, and the JSON and
no-color.org conventions."""

from __future__ import annotations

import copy
import io
import json
import os
import re
import xml.etree.ElementTree as ET
from pathlib import Path

import jsonschema
import pytest
from hypothesis import given, strategies as st

from drc.errors import InputError
from drc.report import (fingerprint, render, render_json, render_junit, render_sarif,
                        render_text, should_color, write_atomic)
from drc.report.sarif import first_paragraph

SARIF_SCHEMA_PATH = Path(__file__).resolve().parents[2] / "shared/schemas/sarif-schema-2.1.0.json"

TAG = "boards/tag.cir"
REMOTE = "boards/remote.sp"

SOURCES = {
    TAG: [
        "* sensor tag: coin cell, a red and a white indicator",
        "VBAT vbat 0 DC 3.0",
        "VPA pa 0 PULSE(0 3 0 10n 10n 250u 500u)",
        "R1 pa led_r 470",
        "D1 led_r 0 LEDRED",
        "C1 pa x\t1u",
        "D2 vbat x BAT54",
        "  D3 x led_w LEDW",
        "R2 led_w 0 100",
        ".end",
    ],
    REMOTE: [
        "* remote: two alkaline cells, a green indicator",
        "VDD vdd 0 DC 3.0",
        "R5 vdd led_g 10",
        "D5 led_g 0 LEDG",
        ".end",
    ],
}

RULES = [
    {"id": "led-headroom", "severity": "error", "summary": "LED cannot reach its visible current",
     "help": "Finds a rail or pin LED branch that stays dark at the low corner.\n\n"
             "How it is computed: the series loop is solved at every corner.",
     "sources": ["Shockley diode law"], "origin": "built-in"},
    {"id": "boost-inadequate", "severity": "error", "summary": "pump output too low",
     "help": "# What it finds\nA pump whose output cannot light its LED, see "
             "[the Dickson paper](https://doi.org/10.1109/JSSC.1976.1050739) and "
             "https://example.org/pumps for more.\n\nSecond paragraph.",
     "sources": ["J. F. Dickson, IEEE JSSC 11(3), 1976"], "origin": "built-in"},
    {"id": "suffix-ambiguity", "severity": "warning", "summary": "suspicious SPICE suffix",
     "help": "A value whose suffix likely means other than intended.",
     "sources": ["Berkeley SPICE3 user's manual"], "origin": "built-in"},
    {"id": "flicker", "severity": "warning", "summary": "modulated LED outside the low-risk region",
     "help": "Checks modulation against IEEE Std 1789-2015.", "sources": ["IEEE Std 1789-2015"],
     "origin": "built-in"},
    {"id": "led-overcurrent", "severity": "error", "summary": "LED past its maximum current",
     "help": "An LED whose current exceeds its maximum at the high corner.", "sources": [],
     "origin": "built-in"},
    {"id": "reverse-leak", "severity": "warning", "summary": "charge can flow back",
     "help": "A path that lets charge flow back.", "sources": [], "origin": "acme-house"},
    {"id": "net-floating", "severity": "warning", "summary": "net with one connection",
     "help": "A net with a single connection.", "sources": [], "origin": "built-in"},
]


def make_report() -> dict:
    """A hand-built report of the contract's shape: two files, every severity, two waived."""
    return {
        "schema": "drc-report/1",
        "tool": {"name": "drc", "version": "0.1.0"},
        "inputs": [{"path": TAG, "elements": 9, "nets": 6, "config": "boards/tag.toml"},
                   {"path": REMOTE, "elements": 3, "nets": 3, "config": None}],
        "assumptions": ["VDD: no [supply] table, checked at its DC value 3.0 V only"],
        "findings": [
            {"rule": "boost-inadequate", "severity": "error",
             "message": "D3 gets 0.31 mA from pump C1 at the low corner, below its visible 0.5 mA",
             "location": {"path": TAG, "line": 8, "column": 3},
             "elements": ["D3", "C1", "D2"], "nets": ["x", "led_w"],
             "corner": {"supply_V": {"VBAT": 2.0}, "temperature_C": -20.0},
             "values": {"average_A": 0.00031, "visible_A": 0.0005},
             "fix": "Lower R2 to 47 ohm (E12) or raise C1 to 2.2 uF (E12) so the pump keeps "
                    "its charge over a whole period at the low corner; check the pin current "
                    "again afterwards, since both changes raise the start-up surge into C1.",
             "caution": "A lithium coin cell shorted or reversed can overheat, vent or burn."},
            {"rule": "suffix-ambiguity", "severity": "note",
             "message": "C1 value 1u read as 1e-06 F", "location": {"path": TAG, "line": 6,
                                                                  "column": 9},
             "elements": ["C1"], "nets": [], "corner": None, "values": {"value_F": 1e-06}},
            {"rule": "flicker", "severity": "warning",
             "message": "D1 toggles at 2 kHz with 100 % modulation",
             "location": {"path": TAG, "line": 3, "column": 1}, "elements": ["D1", "VPA"],
             "nets": ["pa"], "corner": None, "values": {"frequency_Hz": 2000.0},
             "waiver": {"reason": "2 kHz is above the band IEEE 1789 limits", "source": "inline",
                        "expires": None}},
            {"rule": "led-overcurrent", "severity": "error",
             "message": "D5 takes 31.2 mA at the high corner, past its 20 mA maximum",
             "location": {"path": REMOTE, "line": 4, "column": 1}, "elements": ["D5", "R5"],
             "nets": ["led_g", "vdd"], "corner": {"supply_V": {"VDD": 3.0}, "temperature_C": 60.0},
             "values": {"current_A": 0.0312, "max_A": 0.02},
             "fix": "Raise R5 to 56 ohm (E12)."},
            {"rule": "net-floating", "severity": "warning",
             "message": "net led_g has one connection", "location": {"path": REMOTE, "line": 3,
                                                                   "column": 8},
             "elements": ["R5"], "nets": ["led_g"], "corner": None, "values": {}},
            {"rule": "reverse-leak", "severity": "warning",
             "message": "D5 lets vdd back into the pin's clamp",
             "location": {"path": REMOTE, "line": 4, "column": 1}, "elements": ["D5"],
             "nets": ["vdd"], "corner": None, "values": {"leak_A": 2.5e-06},
             "waiver": {"reason": "reviewed with the board owner", "source": "file",
                        "expires": "2031-06-30"}},
        ],
        "branches": [
            {"led": "D1", "drive": "pin", "source": "VPA", "elements": ["VPA", "R1", "D1"],
             "current_A": {"low": 0.0011, "nominal": 0.00142, "high": 0.0018},
             "forward_V": {"low": 1.74, "nominal": 1.79, "high": 1.86}},
            {"led": "D3", "drive": "pump", "source": "C1", "elements": ["C1", "D2", "D3", "R2"],
             "current_A": {"low": 0.00031, "nominal": 0.00122, "high": 0.0021},
             "forward_V": {"low": 2.55, "nominal": 2.71, "high": 2.83}},
            {"led": "D5", "drive": "rail", "source": "VDD", "elements": ["VDD", "R5", "D5"],
             "current_A": {"low": 0.0188, "nominal": 0.0246, "high": 0.0312},
             "forward_V": {"low": 2.1, "nominal": 2.2, "high": 2.3}},
        ],
        "pumps": [
            {"id": "C1", "topology": "doubler", "stages": 1, "elements": ["D2", "C1", "D3"],
             "output_net": "x", "peak_V": {"low": 3.08, "nominal": 5.36, "high": 6.1},
             "average_V": {"low": 2.41, "nominal": 4.63, "high": 5.81}},
        ],
        "cautions": ["Lithium cells shorted or reversed can overheat, vent or burn: "
                     "protect the battery path."],
        "summary": {"error": 2, "warning": 1, "note": 1},
    }


def sarif_validator() -> jsonschema.Draft7Validator:
    schema = json.loads(SARIF_SCHEMA_PATH.read_text(encoding="utf-8"))
    # Source: the OASIS schema declares "$schema": draft-07; check the schema itself first.
    jsonschema.Draft7Validator.check_schema(schema)
    return jsonschema.Draft7Validator(schema)


def assert_valid_sarif(text: str) -> dict:
    log = json.loads(text)
    errors = sorted(sarif_validator().iter_errors(log), key=lambda e: list(e.path))
    # Source: OASIS SARIF 2.1.0 JSON schema (../shared/schemas/sarif-schema-2.1.0.json).
    assert not errors, "\n".join(f"{list(e.path)}: {e.message}" for e in errors)
    return log


# ---------------------------------------------------------------- SARIF


def test_sarif_validates_and_carries_every_finding():
    report = make_report()
    log = assert_valid_sarif(render_sarif(report, RULES))
    run = log["runs"][0]
    # Source: SARIF 2.1.0 §3.13 (sarifLog.version is "2.1.0") and contract.md (one run).
    assert log["version"] == "2.1.0" and len(log["runs"]) == 1
    driver = run["tool"]["driver"]
    # Source: contract.md, "tool.driver.rules lists every rule that ran".
    assert [r["id"] for r in driver["rules"]] == [r["id"] for r in RULES]
    assert driver["name"] == "drc" and driver["version"] == report["tool"]["version"]
    # Source: the hand-built report above, one result per finding.
    assert len(run["results"]) == len(report["findings"])
    for finding, result in zip(report["findings"], run["results"]):
        # Source: SARIF 2.1.0 §3.27.6 (ruleIndex indexes tool.driver.rules).
        assert driver["rules"][result["ruleIndex"]]["id"] == result["ruleId"] == finding["rule"]
        # Source: SARIF 2.1.0 §3.27.10 (level is one of error, warning, note, none).
        assert result["level"] == finding["severity"]
        physical = result["locations"][0]["physicalLocation"]
        # Source: contract.md (artifactLocation.uri and region.startLine in every result).
        assert physical["artifactLocation"]["uri"] == finding["location"]["path"]
        assert physical["region"]["startLine"] == finding["location"]["line"]
        assert physical["region"]["startColumn"] == finding["location"]["column"]
        # Source: the fingerprint definition in this module's brief (rule, path, names).
        assert result["partialFingerprints"]["drcFinding/v1"] == fingerprint(finding)
        if finding.get("fix"):
            # Source: the brief, message.text = message + " Fix: " + fix.
            assert result["message"]["text"] == f"{finding['message']} Fix: {finding['fix']}"


def test_sarif_waived_findings_are_suppressed_with_the_right_kind():
    report = make_report()
    results = json.loads(render_sarif(report, RULES))["runs"][0]["results"]
    kinds = {}
    for finding, result in zip(report["findings"], results):
        if finding.get("waiver"):
            kinds[finding["waiver"]["source"]] = result["suppressions"][0]["kind"]
            # Source: SARIF 2.1.0 §3.35.6 (suppression.justification is a string).
            assert result["suppressions"][0]["justification"] == finding["waiver"]["reason"]
        else:
            # Source: SARIF 2.1.0 §3.27.23, a result with no suppressions is not suppressed.
            assert "suppressions" not in result
    # Source: SARIF 2.1.0 §3.35.3 ("inSource" for a waiver in the file, "external" elsewhere).
    assert kinds == {"inline": "inSource", "file": "external"}


def test_sarif_rule_descriptors():
    driver = json.loads(render_sarif(make_report(), RULES))["runs"][0]["tool"]["driver"]
    boost = driver["rules"][1]
    # Source: the rule's help text above: its first paragraph, without heading or links.
    assert boost["fullDescription"]["text"] == (
        "A pump whose output cannot light its LED, see the Dickson paper and for more.")
    assert "http" not in boost["fullDescription"]["text"]
    # Source: SARIF 2.1.0 §3.49.13 (help is a multiformatMessageString, the whole help).
    assert boost["help"]["text"] == RULES[1]["help"]
    # Source: SARIF 2.1.0 §3.50.3 (reportingConfiguration.level).
    assert boost["defaultConfiguration"]["level"] == "error"
    assert driver["rules"][5]["properties"]["origin"] == "acme-house"


def test_sarif_empty_and_unlisted_rule_still_validate():
    empty = make_report()
    empty["findings"] = []
    log = assert_valid_sarif(render_sarif(empty, RULES))
    # Source: SARIF 2.1.0 §3.14.23, an empty results array means nothing was found.
    assert log["runs"][0]["results"] == []

    odd = make_report()
    odd["findings"] = [dict(odd["findings"][0], rule="house-rule-failed")]
    log = assert_valid_sarif(render_sarif(odd, []))
    result = log["runs"][0]["results"][0]
    # Source: SARIF 2.1.0 §3.27.6, ruleIndex must name a descriptor that exists.
    assert log["runs"][0]["tool"]["driver"]["rules"][result["ruleIndex"]]["id"] == \
        "house-rule-failed"


def test_sarif_paths_become_uri_references():
    report = make_report()
    report["findings"] = [dict(report["findings"][0],
                               location={"path": "boards\\old tag.cir", "line": 2, "column": 1})]
    log = assert_valid_sarif(render_sarif(report, RULES))
    physical = log["runs"][0]["results"][0]["locations"][0]["physicalLocation"]
    uri = physical["artifactLocation"]["uri"]
    # Source: RFC 3986 §2.1 and §3.3 (a space is percent-encoded; "/" separates segments).
    assert uri == "boards/old%20tag.cir"


def test_sarif_is_deterministic():
    # Source: the brief ("Deterministic output"): two renders of equal input are equal bytes.
    assert render_sarif(make_report(), RULES) == render_sarif(copy.deepcopy(make_report()), RULES)


def test_first_paragraph_drops_links():
    text = "See <https://a.example/x> and [IEEE 1789](https://b.example).\n\nMore."
    # Source: the brief (fullDescription is the first paragraph with no links).
    assert first_paragraph(text) == "See and IEEE 1789."


# ---------------------------------------------------------------- JUnit


def parse_junit(text: str) -> ET.Element:
    root = ET.fromstring(text.encode("utf-8"))
    # Source: the Ant/Jenkins JUnit XML layout: <testsuites> holds <testsuite> elements.
    assert root.tag == "testsuites"
    total_tests = total_failures = 0
    for suite in root.findall("testsuite"):
        cases = suite.findall("testcase")
        failed = [c for c in cases if c.find("failure") is not None]
        # Source: Jenkins JUnit plugin reads testsuite@tests and @failures as these counts.
        assert int(suite.get("tests")) == len(cases)
        assert int(suite.get("failures")) == len(failed)
        total_tests += len(cases)
        total_failures += len(failed)
    # Source: same reader: testsuites@tests/@failures are the sums over its suites.
    assert int(root.get("tests")) == total_tests
    assert int(root.get("failures")) == total_failures
    return root


def cases_of(root: ET.Element) -> dict[tuple[str, str], ET.Element]:
    return {(c.get("classname"), c.get("name")): c for c in root.iter("testcase")}


def test_junit_structure_and_failures():
    root = parse_junit(render_junit(make_report(), RULES))
    # Source: the hand-built report: one suite per input file, named by its path.
    assert [s.get("name") for s in root.findall("testsuite")] == [TAG, REMOTE]
    cases = cases_of(root)
    # Source: the brief, one testcase per (file, rule that ran).
    assert len(cases) == 2 * len(RULES)
    failure = cases[(TAG, "boost-inadequate")].find("failure")
    # Source: the hand-built report, one unwaived error of boost-inadequate in tag.cir at 8:3.
    assert failure is not None and failure.get("message").startswith("1 finding")
    assert f"{TAG}:8:3: D3 gets 0.31 mA" in failure.text
    assert cases[(REMOTE, "led-overcurrent")].find("failure") is not None
    # Source: the hand-built report, only the two errors fail at the default threshold.
    assert int(root.get("failures")) == 2
    waived = cases[(REMOTE, "reverse-leak")]
    # Source: the brief, a waived-only case passes with a <system-out> note.
    assert waived.find("failure") is None
    assert "waived" in waived.find("system-out").text
    # Source: the hand-built report, led-headroom found nothing: a bare passing case.
    assert list(cases[(TAG, "led-headroom")]) == []


@pytest.mark.parametrize("fail_on, expected", [("error", 2), ("warning", 3), ("note", 4),
                                               ("never", 0)])
def test_junit_threshold(fail_on, expected):
    root = parse_junit(render_junit(make_report(), RULES, fail_on=fail_on))
    # Source: the hand-built report: unwaived error 2, warning 1, note 1, each in its own case.
    assert int(root.get("failures")) == expected


def test_junit_survives_control_characters():
    report = make_report()
    report["findings"][0]["message"] = "bad \x01 byte"
    # Source: XML 1.0 §2.2 (U+0001 is not a Char); the general parser must still accept it.
    root = parse_junit(render_junit(report, RULES))
    assert "\x01" not in ET.tostring(root, encoding="unicode")


# ---------------------------------------------------------------- fingerprints


def test_fingerprint_survives_line_moves_and_tracks_elements():
    finding = make_report()["findings"][0]
    moved = copy.deepcopy(finding)
    moved["location"]["line"] += 5
    moved["message"] = moved["message"].replace("0.31", "0.29")
    moved["elements"] = ["d2", "c1", "D3"]
    # Source: the brief: lines inserted above (other line), numbers and name case don't count.
    assert fingerprint(moved) == fingerprint(finding)
    other = dict(finding, elements=["D4", "C1", "D2"])
    # Source: the brief: a different element is a different finding.
    assert fingerprint(other) != fingerprint(finding)
    # Source: the brief: sha256 hex, first 32 characters.
    assert re.fullmatch(r"[0-9a-f]{32}", fingerprint(finding))


@given(line=st.integers(1, 10**6), column=st.integers(1, 500), message=st.text())
def test_fingerprint_ignores_place_and_wording(line, column, message):
    finding = make_report()["findings"][3]
    shifted = dict(finding, message=message, location={"path": REMOTE, "line": line,
                                                        "column": column})
    # Source: the brief (not the line/column nor the message).
    assert fingerprint(shifted) == fingerprint(finding)


# ---------------------------------------------------------------- JSON


def test_json_is_byte_identical_and_round_trips():
    first = render_json(make_report())
    reordered = {key: value for key, value in reversed(list(make_report().items()))}
    # Source: the brief (same input, byte-identical output), also for another key order.
    assert first == render_json(make_report()) == render_json(reordered)
    assert first.endswith("}\n")
    data = json.loads(first)
    # Source: contract.md, the report object's keys in its order.
    assert list(data) == ["schema", "tool", "inputs", "assumptions", "findings", "branches",
                          "pumps", "cautions", "summary"]
    assert list(data["findings"][0])[:10] == ["rule", "severity", "message", "location",
                                              "elements", "nets", "corner", "values", "fix",
                                              "caution"]
    assert list(data["branches"][0]["current_A"]) == ["low", "nominal", "high"]
    # Source: the hand-built report: unwaived error 2, warning 1, note 1; two waived.
    assert data["summary"] == {"error": 2, "warning": 1, "note": 1, "waived": 2}
    expected = make_report()
    for finding, rendered in zip(expected["findings"], data["findings"]):
        # Source: the brief (fingerprint added to every finding in JSON).
        assert rendered.pop("fingerprint") == fingerprint(finding)
    expected["summary"] = data["summary"]
    # Source: RFC 8259 round trip: parsing the text gives back the same values.
    # (every float included: drc writes each as a shortest text that reads back the same)
    assert data == expected


def test_json_never_writes_nan():
    report = make_report()
    report["branches"][0]["current_A"]["low"] = float("nan")

    def refuse(token):
        raise ValueError(token)

    # Source: RFC 8259 §6 (NaN and Infinity are not JSON numbers).
    data = json.loads(render_json(report), parse_constant=refuse)
    assert data["branches"][0]["current_A"]["low"] is None


# ---------------------------------------------------------------- text


def test_text_plain_has_no_escape_and_colour_has():
    plain = render_text(make_report(), SOURCES, color=False, quiet=False)
    coloured = render_text(make_report(), SOURCES, color=True, quiet=False)
    # Source: ECMA-48 (ANSI) control sequences start with ESC, 0x1B.
    assert "\x1b" not in plain
    assert "\x1b[" in coloured
    # Source: ECMA-48 SGR: removing the sequences leaves the plain text.
    assert re.sub(r"\x1b\[[0-9;]*m", "", coloured) == plain


def test_text_layout():
    text = render_text(make_report(), SOURCES, color=False, quiet=False)
    lines = text.splitlines()
    first = f"{TAG}:8:3: error: D3 gets 0.31 mA from pump C1 at the low corner, below its " \
            f"visible 0.5 mA [boost-inadequate]"
    # Source: the brief (path:line:col: severity: message [rule]).
    assert first in lines
    at = lines.index(first)
    quoted, marker = lines[at + 1], lines[at + 2]
    bar = quoted.index("| ") + 2
    # Source: the netlist line above, "  D3 x led_w LEDW": the element name at column 3.
    assert quoted[bar:] == SOURCES[TAG][7]
    assert marker[bar:] == "  ^^"
    assert quoted.split("|")[0].strip() == "8"
    # Source: the brief (fix and caution indented, wrapped at about 100 columns).
    assert lines[at + 3].startswith("  fix: ")
    assert all(len(line) <= 100 for line in lines if line.startswith("  "))
    tab_line = next(i for i, line in enumerate(lines) if line.startswith(f"{TAG}:6:9:"))
    # Source: the netlist line "C1 pa x<TAB>1u": the pad keeps the tab so ^ sits under "1u".
    assert lines[tab_line + 2].endswith("| " + " " * 7 + "\t^^")
    # Source: the hand-built report: unwaived error 2, warning 1, note 1, 2 waived, 2 inputs.
    assert lines[-1].startswith("2 errors, 1 warning, 1 note in 2 files (2 waived)")
    assert "FAILS" in lines[-1]
    for heading in ("Indicators (3)", "Pumps (1)", "Assumed", "Cautions"):
        assert any(line.startswith(heading) for line in lines), heading
    # Source: drc.units.format_si on the branch figures (0.00142 A, 2.71 V, 5.36 V).
    assert "1.42 mA" in text and "2.71 V" in text and "5.36 V" in text
    # Source: domain.md, "Cautions the reports carry".
    assert "burn" in text and "not a sign-off" in text


def test_text_quiet_is_shorter_and_keeps_the_summary():
    full = render_text(make_report(), SOURCES, color=False, quiet=False)
    quiet = render_text(make_report(), SOURCES, color=False, quiet=True)
    assert len(quiet.splitlines()) < len(full.splitlines())
    # Source: the brief: quiet keeps the findings' first lines and the summary line.
    assert quiet.splitlines()[-1] == full.splitlines()[-1]
    # Source: the hand-built report: four unwaived findings, then the summary line.
    assert len(quiet.splitlines()) == 4 + 1
    assert "Indicators" not in quiet and " | " not in quiet


def test_text_clean_run_passes():
    report = make_report()
    report["findings"] = [f for f in report["findings"] if f["severity"] == "note"]
    last = render_text(report, SOURCES, color=False, quiet=True).splitlines()[-1]
    # Source: contract.md (--fail-on error: a note alone does not fail).
    assert last.startswith("0 errors, 0 warnings, 1 note in 2 files") and "passes" in last
    last = render_text(report, SOURCES, color=False, quiet=True, fail_on="note").splitlines()[-1]
    # Source: contract.md (--fail-on note: a note fails).
    assert "FAILS" in last


# ---------------------------------------------------------------- dispatch


def test_render_dispatches_and_refuses_unknown_names():
    report = make_report()
    # Source: the brief (render dispatches on the format name to the same functions).
    assert render(report, "json", sources=SOURCES, rules=RULES, color=False, quiet=False,
                  fail_on="error") == render_json(report)
    assert_valid_sarif(render(report, "sarif", sources=SOURCES, rules=RULES, color=False,
                              quiet=False, fail_on="error"))
    parse_junit(render(report, "junit", sources=SOURCES, rules=RULES, color=False,
                       quiet=False, fail_on="warning"))
    # Source: contract.md (an unusable command line is an input error, status 2).
    with pytest.raises(InputError):
        render(report, "html", sources=SOURCES, rules=RULES, color=False, quiet=False,
               fail_on="error")
    with pytest.raises(InputError):
        render(report, "text", sources=SOURCES, rules=RULES, color=False, quiet=False,
               fail_on="fatal")


# ---------------------------------------------------------------- output


def test_write_atomic_replaces_whole(tmp_path):
    target = tmp_path / "report.json"
    target.write_text("old\n", encoding="utf-8")
    write_atomic(str(target), "new ünïcode\n")
    # Source: POSIX rename(2) via os.replace: the target holds the new text whole.
    assert target.read_text(encoding="utf-8") == "new ünïcode\n"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["report.json"]


def test_write_atomic_missing_folder(tmp_path):
    existing = tmp_path / "report.sarif"
    existing.write_text("keep\n", encoding="utf-8")
    missing = tmp_path / "no-such-folder" / "report.sarif"
    with pytest.raises(InputError) as raised:
        write_atomic(str(missing), "x")
    # Source: the brief ("cannot write ...: reason" located at the path).
    assert raised.value.message.startswith(f"cannot write {missing}")
    assert raised.value.location.path == str(missing)
    assert existing.read_text(encoding="utf-8") == "keep\n"
    assert not missing.parent.exists()


def test_write_atomic_failure_while_writing_keeps_the_old_file(tmp_path, monkeypatch):
    target = tmp_path / "report.xml"
    target.write_text("previous report\n", encoding="utf-8")

    def disk_full(fd):
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(os, "fsync", disk_full)
    with pytest.raises(InputError) as raised:
        write_atomic(str(target), "half a report")
    # Source: the injected failure (ENOSPC) is named in the message.
    assert "No space left on device" in raised.value.message
    # Source: POSIX rename(2): the target is not touched until the rename.
    assert target.read_text(encoding="utf-8") == "previous report\n"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["report.xml"]


def test_write_atomic_failure_at_rename_keeps_the_old_file(tmp_path, monkeypatch):
    target = tmp_path / "report.txt"
    target.write_text("previous\n", encoding="utf-8")

    def refuse(src, dst):
        raise PermissionError(13, "Permission denied")

    monkeypatch.setattr(os, "replace", refuse)
    with pytest.raises(InputError):
        write_atomic(str(target), "new")
    # Source: POSIX rename(2) failed, so the old file and only it remains.
    assert target.read_text(encoding="utf-8") == "previous\n"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["report.txt"]


class FakeTerminal(io.StringIO):
    def isatty(self) -> bool:
        return True


def test_should_color(monkeypatch):
    monkeypatch.delenv("NO_COLOR", raising=False)
    # Source: io.IOBase.isatty (a terminal gets colour, a plain buffer does not).
    assert should_color(FakeTerminal()) is True
    assert should_color(io.StringIO()) is False
    monkeypatch.setenv("NO_COLOR", "1")
    # Source: https://no-color.org (NO_COLOR set prevents ANSI colour).
    assert should_color(FakeTerminal()) is False
