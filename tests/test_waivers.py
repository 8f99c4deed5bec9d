"""Waivers through the command line: inline drc-waive comments and --waivers files, their
reasons and end dates, unused waivers, and how JSON, SARIF (OASIS schema), JUnit and text
show a waived finding."""

from __future__ import annotations

import json
import shutil
import xml.etree.ElementTree as ET
from pathlib import Path

import jsonschema
import pytest

from drc.cli import main

HERE = Path(__file__).resolve().parent
SCHEMA = json.loads((HERE.parents[1] / "shared/schemas/sarif-schema-2.1.0.json").read_text())

LAMPS = """Greenhouse vent: one lamp cell used twice, the second with a resistor far too small
.model LRED D(IS=5e-19 N=2.0 RS=3 EG=2.2 XTI=3)
.subckt lamp feed rlim=470
RL feed k {rlim}
DL k 0 LRED
.ends lamp
VDD vdd 0 DC 3.3
XOK vdd lamp
{above}
XHOT vdd lamp rlim=10 {inline}
.end
"""
CONTEXT = """[supply.VDD]
source = "VDD"
range = ["3.0 V", "3.6 V"]
[led.LRED]
model = "LRED"
colour = "red"
max_current = "20 mA"
"""


def board(tmp_path, above="* nothing to say", inline=""):
    path = tmp_path / "lamps.cir"
    path.write_text(LAMPS.replace("{above}", above).replace("{inline}", inline))
    (tmp_path / "lamps.toml").write_text(CONTEXT)
    return path


def check(capsys, *argv):
    status = main(["check", *map(str, argv)])
    out, err = capsys.readouterr()
    return status, out, err


def findings(capsys, *argv):
    status, out, err = check(capsys, *argv, "--format", "json")
    assert err == ""
    return status, json.loads(out)


def test_unwaived_board_fails(capsys, tmp_path):
    status, report = findings(capsys, board(tmp_path))
    assert status == 1
    assert [f["rule"] for f in report["findings"]] == ["led-overcurrent"]
    assert report["findings"][0]["elements"][-1] == "XHOT.DL" or "XHOT.DL" in report["findings"][0]["elements"]


@pytest.mark.parametrize("above, inline", [
    ("* drc-waive led-overcurrent: bench prototype, never shipped", ""),
    ("* nothing", "; drc-waive led-overcurrent until 2999-12-31: bench prototype, never shipped"),
])
def test_inline_waiver_on_the_instance_line_or_above(capsys, tmp_path, above, inline):
    status, report = findings(capsys, board(tmp_path, above, inline))
    assert status == 0
    (f,) = report["findings"]
    assert f["waiver"]["reason"] == "bench prototype, never shipped"
    assert f["waiver"]["source"] == "inline"
    assert f["waiver"]["at"].split("/")[-1].startswith("lamps.cir:")
    assert report["summary"] == {"error": 0, "warning": 0, "note": 0, "waived": 1}


def test_waived_finding_in_sarif_junit_and_text(capsys, tmp_path):
    path = board(tmp_path, "* drc-waive led-overcurrent: bench prototype")
    status, out, _ = check(capsys, path, "--format", "sarif")
    log = json.loads(out)
    jsonschema.validate(log, SCHEMA)
    (result,) = log["runs"][0]["results"]
    assert result["suppressions"] == [{"kind": "inSource", "status": "accepted",
                                       "justification": "bench prototype"}]
    status, out, _ = check(capsys, path, "--format", "junit", "--fail-on", "note")
    root = ET.fromstring(out)
    assert root.find(".//failure") is None and "waived" in out
    status, out, _ = check(capsys, path)
    assert "error (waived)" in out and "waived: bench prototype (in the netlist, no end date)" in out
    assert out.splitlines()[-1].startswith("0 errors, 0 warnings, 0 notes in 1 file (1 waived)")


def test_expired_waiver_brings_the_finding_back_with_a_note(capsys, tmp_path):
    path = board(tmp_path, "* drc-waive led-overcurrent until 2001-02-03: prototype")
    status, report = findings(capsys, path)
    assert status == 1
    (f,) = report["findings"]
    assert "waiver" not in f and f["waiver_expired"]["expires"] == "2001-02-03"
    status, out, _ = check(capsys, path)
    assert "its waiver ran out on 2001-02-03" in out


def test_waiver_file(capsys, tmp_path):
    path = board(tmp_path)
    waivers = tmp_path / "waivers.toml"
    waivers.write_text('[[waiver]]\nrule = "led-overcurrent"\nelement = "xhot.dl"\n'
                       'reason = "a bench lamp, reviewed"\nuntil = 2999-01-01\n'
                       'netlist = "lamps.cir"\n')
    status, report = findings(capsys, path, "--waivers", waivers)
    assert status == 0
    (f,) = report["findings"]
    assert f["waiver"] == {"reason": "a bench lamp, reviewed", "source": "file",
                           "expires": "2999-01-01", "at": f"{waivers}:1:1"}
    status, out, _ = check(capsys, path, "--waivers", waivers, "--format", "sarif")
    jsonschema.validate(json.loads(out), SCHEMA)
    assert json.loads(out)["runs"][0]["results"][0]["suppressions"][0]["kind"] == "external"


def test_unused_waivers_become_notes(capsys, tmp_path):
    path = board(tmp_path, "* drc-waive led-reverse: never reversed here")
    waivers = tmp_path / "waivers.toml"
    waivers.write_text('[[waiver]]\nrule = "led-overcurrent"\nelement = "XOK.DL"\nreason = "ok"\n\n'
                       '[[waiver]]\nrule = "led-overcurrent"\nelement = "XHOT.DL"\nreason = "hot"\n'
                       'netlist = "other.cir"\n')
    status, report = findings(capsys, path, "--waivers", waivers)
    assert status == 1                                   # notes do not fail; the error does
    unused = [f for f in report["findings"] if f["rule"] == "waiver-unused"]
    assert sorted((Path(f["location"]["path"]).name, f["location"]["line"]) for f in unused) == [
        ("lamps.cir", 9), ("waivers.toml", 1), ("waivers.toml", 6)]
    assert all(f["severity"] == "note" for f in unused)
    assert any("element xok.dl" in f["message"] for f in unused)


@pytest.mark.parametrize("above, wanted", [
    ("* drc-waive led-overcurrent", "lamps.cir:9:3: error: drc-waive led-overcurrent has no reason"),
    ("* drc-waive led-overcurrent:   ", "lamps.cir:9:3: error: drc-waive led-overcurrent has no reason"),
    ("* drc-waive: why", "lamps.cir:9:3: error: drc-waive names no rule"),
    ("* drc-waive led-overcurent: typo", "did you mean 'led-overcurrent'"),
    ("* drc-waive led-overcurrent until soon: x", "is not a date"),
])
def test_malformed_inline_waivers_are_status_2(capsys, tmp_path, above, wanted):
    out_file = tmp_path / "report.json"
    out_file.write_text("earlier\n")
    status, out, err = check(capsys, board(tmp_path, above), "--output", out_file)
    assert status == 2 and len(err.splitlines()) == 1 and wanted in err
    assert out_file.read_text() == "earlier\n"


@pytest.mark.parametrize("text, wanted", [
    ('[[waiver]]\nrule = "led-overcurrent"\nelement = "XHOT.DL"\n', ":1:1: error: [[waiver]] for led-overcurrent has no reason"),
    ('[[waiver]]\nrule = "led-overcurrent"\nelement = "XHOT.DL"\nreason = ""\n', "has no reason"),
    ('[[waiver]\n', ":1:"),
    ('[[waiver]]\nrule = "led-overcurrent"\nreason = "x"\n', "names no element"),
    ('[[waiver]]\nrule = "led-overcurrent"\nelement = "D1"\nreason = "x"\ncolour = "red"\n', "unknown key 'colour'"),
    ('[[waiver]]\nrule = "led-overcurrent"\nelement = "D1"\nreason = "x"\nuntil = "next year"\n', "is not a date"),
    ('title = "mine"\n', "unknown key 'title'"),
])
def test_malformed_waiver_files_are_status_2(capsys, tmp_path, text, wanted):
    waivers = tmp_path / "waivers.toml"
    waivers.write_text(text)
    status, out, err = check(capsys, board(tmp_path), "--waivers", waivers)
    assert status == 2 and out == "" and wanted in err
    assert err.startswith(str(waivers)) and len(err.splitlines()) == 1


def test_waiver_inside_the_subcircuit_covers_every_instance(capsys, tmp_path):
    path = board(tmp_path, inline="")
    text = path.read_text().replace("DL k 0 LRED", "DL k 0 LRED ; drc-waive led-overcurrent: lab fixture")
    path.write_text(text.replace("XOK vdd lamp", "XOK vdd lamp rlim=10"))
    status, report = findings(capsys, path)
    assert status == 0
    assert [f["rule"] for f in report["findings"]] == ["led-overcurrent", "led-overcurrent"]
    assert all(f["waiver"]["reason"] == "lab fixture" for f in report["findings"])


def test_same_through_jobs(capsys, tmp_path):
    one = tmp_path / "a"
    one.mkdir()
    board(one, "* drc-waive led-overcurrent: prototype")
    shutil.copytree(one, tmp_path / "b")
    outs = [check(capsys, tmp_path, "--format", "json", "--jobs", n)[1] for n in ("1", "2")]
    assert outs[0] == outs[1] and '"waived": 2' in outs[0]
