"""drc check in CI: formats through the command line against outside references (the OASIS
SARIF schema, xml.etree), exit statuses, atomic --output, --jobs, the progress line, the text
report's layout, drc rules and drc explain."""

from __future__ import annotations

import io
import json
import os
import shutil
import subprocess
import sys
import xml.etree.ElementTree as ET
from pathlib import Path

import jsonschema
import pytest

from drc.cli import _Progress, main

HERE = Path(__file__).resolve().parent
BRANCHES = HERE / "netlists" / "branches"
SCHEMA = json.loads((HERE.parents[1] / "shared/schemas/sarif-schema-2.1.0.json").read_text())


def run(capsys, *argv):
    status = main(list(argv))
    out, err = capsys.readouterr()
    return status, out, err


def sarif_valid(text: str) -> dict:
    log = json.loads(text)
    jsonschema.validate(log, SCHEMA)
    return log


@pytest.fixture
def boards(tmp_path):
    """A folder of our sample netlists with their contexts."""
    folder = tmp_path / "boards"
    folder.mkdir()
    for name in ("headroom_coin", "overcurrent_rail", "floating_open", "pin_overcurrent",
                 "subckt_twice", "pulse_pin", "rail_resistor"):
        for suffix in (".cir", ".toml"):
            shutil.copy(BRANCHES / f"{name}{suffix}", folder / f"{name}{suffix}")
    return folder


def test_text_report_layout(capsys, boards, monkeypatch):
    monkeypatch.chdir(boards)
    status, out, err = run(capsys, "check", "headroom_coin.cir")
    assert status == 1 and err == ""
    lines = out.splitlines()
    assert lines[0] == "-- headroom_coin.cir: 1 finding --"
    assert lines[1].startswith("headroom_coin.cir:6:1: error: D1 needs")
    assert lines[1].endswith("[led-headroom]")
    assert lines[2] == "  6 | D1 a 0 LRED"
    assert lines[3] == "    | ^^"
    assert lines[4].startswith("  fix: ")
    table = lines.index("Indicators (1): average current over all corners")
    assert lines[table + 1].split() == ["LED", "drive", "from", "I", "low", "I", "nominal",
                                        "I", "high", "Vf", "nominal"]
    assert lines[table + 3].split()[:3] == ["D1", "rail", "VCELL"]
    assert "\x1b[" not in out                      # captured: not a terminal
    assert lines[-1] == "1 error, 0 warnings, 0 notes in 1 file; FAILS (something at or above error)"


def test_quiet_is_for_logs(capsys, boards):
    status, out, _ = run(capsys, "check", str(boards), "-q")
    assert status == 1
    lines = out.splitlines()
    assert lines and all(line.startswith(str(boards)) for line in lines[:-1])
    assert "Indicators" not in out and "|" not in out
    assert "FAILS" in lines[-1] and " in 7 files" in lines[-1]


def test_colour_only_on_a_terminal_and_never_with_no_color(capsys, boards, monkeypatch):
    class Tty(io.StringIO):
        def isatty(self):
            return True
    monkeypatch.delenv("NO_COLOR", raising=False)
    fake = Tty()
    monkeypatch.setattr(sys, "stdout", fake)
    main(["check", str(boards / "headroom_coin.cir")])
    assert "\x1b[1;31m" in fake.getvalue()
    monkeypatch.setenv("NO_COLOR", "1")
    fake = Tty()
    monkeypatch.setattr(sys, "stdout", fake)
    main(["check", str(boards / "headroom_coin.cir")])
    assert "\x1b[" not in fake.getvalue()


@pytest.mark.parametrize("fail_on, expected", [("error", 1), ("warning", 1), ("note", 1),
                                                ("never", 0)])
def test_fail_on(capsys, boards, fail_on, expected):
    assert run(capsys, "check", str(boards), "--fail-on", fail_on, "-q")[0] == expected


def test_fail_on_warning_only_file(capsys, boards):
    path = str(boards / "floating_open.cir")        # warnings, no errors
    assert run(capsys, "check", path, "-q")[0] == 0
    assert run(capsys, "check", path, "-q", "--fail-on", "warning")[0] == 1


def test_sarif_and_junit_through_the_cli(capsys, boards, tmp_path):
    status, out, _ = run(capsys, "check", str(boards), "--format", "sarif")
    log = sarif_valid(out)
    run_ = log["runs"][0]
    ids = [r["id"] for r in run_["tool"]["driver"]["rules"]]
    assert {"led-headroom", "waiver-unused", "house-rule-failed"} <= set(ids)
    for rule in run_["tool"]["driver"]["rules"]:
        assert rule["fullDescription"]["text"] and "://" not in rule["fullDescription"]["text"]
        assert rule["help"]["text"]
    assert run_["results"] and all(r["partialFingerprints"] for r in run_["results"])
    status, out, _ = run(capsys, "check", str(boards), "--format", "junit")
    root = ET.fromstring(out)
    assert root.tag == "testsuites"
    suites = root.findall("testsuite")
    assert len(suites) == 7
    assert root.findall("testsuite/testcase")
    assert root.findall("testsuite/testcase/failure")
    names = [(c.get("classname"), c.get("name")) for c in root.iter("testcase")]
    assert len(names) == len(set(names))               # one case per file and rule


def test_fingerprints_survive_inserted_lines(capsys, boards):
    path = boards / "headroom_coin.cir"
    _, before, _ = run(capsys, "check", str(path), "--format", "sarif")
    lines = path.read_text().splitlines(keepends=True)
    path.write_text(lines[0] + "* a note\n* and another\n* and a third\n" + "".join(lines[1:]))
    _, after, _ = run(capsys, "check", str(path), "--format", "sarif")
    a, b = (sarif_valid(t)["runs"][0]["results"] for t in (before, after))
    assert [r["partialFingerprints"] for r in a] == [r["partialFingerprints"] for r in b]
    assert ([r["locations"][0]["physicalLocation"]["region"]["startLine"] + 3 for r in a]
            == [r["locations"][0]["physicalLocation"]["region"]["startLine"] for r in b])


@pytest.mark.parametrize("fmt", ["json", "sarif"])
def test_jobs_do_not_change_a_byte(capsys, boards, tmp_path, fmt):
    one, two = tmp_path / f"one.{fmt}", tmp_path / f"two.{fmt}"
    assert run(capsys, "check", str(boards), "--format", fmt, "--jobs", "1", "--output", str(one))[0] == 1
    assert run(capsys, "check", str(boards), "--format", fmt, "--jobs", "2", "--output", str(two))[0] == 1
    assert one.read_bytes() == two.read_bytes()
    if fmt == "sarif":
        sarif_valid(one.read_text())


def test_jobs_report_input_errors_like_one_job(capsys, boards):
    (boards / "broken.cir").write_text("title\nR1 a\n.end\n")
    a = run(capsys, "check", str(boards), "--jobs", "1")
    b = run(capsys, "check", str(boards), "--jobs", "3")
    assert a[0] == b[0] == 2 and a[2] == b[2] and "broken.cir:2:" in a[2]
    assert "Traceback" not in a[2] + b[2]


def test_output_is_atomic_and_kept_on_status_2(capsys, boards, tmp_path):
    report = tmp_path / "report.json"
    assert run(capsys, "check", str(boards), "--format", "json", "--output", str(report))[0] == 1
    first = report.read_bytes()
    assert json.loads(first)["schema"] == "drc-report/1"
    (boards / "broken.cir").write_text("title\nR1 a\n.end\n")
    status, out, err = run(capsys, "check", str(boards), "--format", "json", "--output", str(report))
    assert status == 2 and out == "" and len(err.splitlines()) == 1
    assert report.read_bytes() == first
    assert [p.name for p in tmp_path.iterdir() if p.name.endswith(".tmp")] == []


@pytest.mark.parametrize("argv, wanted", [
    (["--format", "xml"], "invalid choice"),
    (["--output", "/no/such/folder/r.json"], "folder /no/such/folder does not exist"),
    (["--jobs", "0"], "--jobs"),
    (["--baseline", "missing.json"], "cannot read baseline"),
    (["--waivers", "missing.toml"], "cannot read waiver file"),
])
def test_bad_command_lines_give_one_line_and_status_2(capsys, boards, monkeypatch, argv, wanted):
    monkeypatch.chdir(boards)
    keep = boards / "keep.json"
    keep.write_text("earlier\n")
    status, out, err = run(capsys, "check", "headroom_coin.cir", *argv)
    assert status == 2 and out == ""
    assert len(err.strip().splitlines()) == 1 and wanted in err
    assert "Traceback" not in err
    assert keep.read_text() == "earlier\n"


def test_unwritable_output_folder(capsys, boards, tmp_path):
    if os.geteuid() == 0:
        pytest.skip("root writes anywhere")
    locked = tmp_path / "locked"
    locked.mkdir()
    (locked / "r.json").write_text("earlier\n")
    locked.chmod(0o500)
    try:
        status, _, err = run(capsys, "check", str(boards / "headroom_coin.cir"), "--format",
                             "json", "--output", str(locked / "r.json"))
    finally:
        locked.chmod(0o700)
    assert status == 2 and "cannot write" in err and len(err.splitlines()) == 1
    assert (locked / "r.json").read_text() == "earlier\n"


def test_progress_only_on_a_terminal(capsys, boards):
    class Tty(io.StringIO):
        def isatty(self):
            return True
    tty = Tty()
    p = _Progress(tty)
    p(1, 3), p(3, 3), p.clear()
    assert tty.getvalue().startswith("\rchecked 1/3 files\rchecked 3/3 files")
    assert tty.getvalue().endswith("\r")
    plain = io.StringIO()
    q = _Progress(plain)
    q(1, 3), q.clear()
    assert plain.getvalue() == ""
    status, _, err = run(capsys, "check", str(boards), "-q", "--jobs", "2")
    assert "checked" not in err                       # pytest's stderr is not a terminal


def test_python_dash_m_and_no_traceback(boards):
    done = subprocess.run([sys.executable, "-m", "drc", "check", str(boards / "nope.cir")],
                          capture_output=True, text=True)
    assert done.returncode == 2 and done.stderr.count("\n") == 1 and "no such file" in done.stderr


def test_a_reader_that_goes_away_is_not_a_fault(boards, tmp_path):
    # `drc check ... | head` closes the pipe early (POSIX: the writer gets EPIPE): the check's
    # verdict stands as the exit status, the baseline is still written, and nothing is said
    baseline = tmp_path / "known.json"
    proc = subprocess.Popen([sys.executable, "-m", "drc", "check", str(boards),
                             "--write-baseline", str(baseline)],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    proc.stdout.close()
    err = proc.stderr.read().decode()
    proc.stderr.close()
    assert proc.wait() == 1, err
    assert err == ""
    assert json.loads(baseline.read_text())


def test_rules_lists_every_rule_with_its_origin(capsys):
    status, out, _ = run(capsys, "rules", "--format", "json")
    rules = json.loads(out)
    ids = [r["id"] for r in rules]
    assert {"led-headroom", "flicker", "waiver-unused", "house-rule-failed"} <= set(ids)
    assert all(set(r) == {"id", "severity", "summary", "origin"} for r in rules)
    assert all(r["severity"] in ("error", "warning", "note") and r["summary"] for r in rules)
    status, out, _ = run(capsys, "rules")
    assert out.splitlines()[0].split()[:3] == ["rule", "severity", "from"]
    assert len(out.splitlines()) == len(rules) + 1


def test_explain_has_every_part(capsys):
    status, out, _ = run(capsys, "explain", "LED-HEADROOM")
    assert status == 0
    for part in ("Why it matters", "How it is computed", "Sources", "Example", "Fix",
                 "How to waive", "drc-waive", "[[waiver]]"):
        assert part in out
    assert out.count("Sources:") == 1
    status, _, err = run(capsys, "explain", "led-headrom")
    assert status == 2 and "did you mean 'led-headroom'" in err
