"""Baselines through the command line: written, read back, matched by fingerprint and not by
line, and refused when a file is not one."""

from __future__ import annotations

import json
import shutil
from pathlib import Path

import jsonschema
import pytest

from drc.cli import main

HERE = Path(__file__).resolve().parent
BRANCHES = HERE / "netlists" / "branches"
SCHEMA = json.loads((HERE.parents[1] / "shared/schemas/sarif-schema-2.1.0.json").read_text())


def check(capsys, *argv):
    status = main(["check", *map(str, argv)])
    out, err = capsys.readouterr()
    return status, out, err


@pytest.fixture
def boards(tmp_path):
    folder = tmp_path / "boards"
    folder.mkdir()
    for name in ("headroom_coin", "floating_open", "overcurrent_rail"):
        for suffix in (".cir", ".toml"):
            shutil.copy(BRANCHES / f"{name}{suffix}", folder / f"{name}{suffix}")
    return folder


def test_write_then_use(capsys, boards, tmp_path):
    base = tmp_path / "baseline.json"
    status, _, err = check(capsys, boards, "-q", "--write-baseline", base)
    assert status == 1 and err == ""
    data = json.loads(base.read_text())
    assert data["schema"] == "drc-baseline/1"
    assert {"fingerprint", "rule", "severity", "path", "line", "elements", "message"} <= set(data["findings"][0])
    status, out, _ = check(capsys, boards, "--baseline", base, "--format", "json", "--fail-on", "note")
    report = json.loads(out)
    assert status == 0
    assert report["findings"] and all(f["baseline"] == "known" for f in report["findings"])
    assert report["summary"]["known"] == len(report["findings"])
    assert report["summary"]["error"] == report["summary"]["warning"] == 0
    status, out, _ = check(capsys, boards, "--baseline", base, "--format", "sarif")
    log = json.loads(out)
    jsonschema.validate(log, SCHEMA)
    assert {r["baselineState"] for r in log["runs"][0]["results"]} == {"unchanged"}
    status, out, _ = check(capsys, boards, "--baseline", base)
    assert "known from the baseline" in out.splitlines()[-1] and "(known)" in out


def test_a_new_finding_fails_and_moved_lines_do_not(capsys, boards, tmp_path):
    base = tmp_path / "baseline.json"
    check(capsys, boards / "headroom_coin.cir", "--write-baseline", base)
    for name in ("headroom_coin", "overcurrent_rail"):
        shutil.copy(BRANCHES / f"{name}.toml", boards / f"{name}.toml")
    path = boards / "headroom_coin.cir"
    lines = path.read_text().splitlines(keepends=True)
    path.write_text(lines[0] + "* moved\n* down\n" + "".join(lines[1:]))
    status, out, _ = check(capsys, path, "--baseline", base, "--format", "json")
    report = json.loads(out)
    assert status == 0 and report["findings"][0]["location"]["line"] == 8
    assert report["findings"][0]["baseline"] == "known"
    status, out, _ = check(capsys, boards, "--baseline", base, "--format", "json")
    report = json.loads(out)
    assert status == 1
    new = [f for f in report["findings"] if f["baseline"] == "new"]
    assert new and all(not f["location"]["path"].endswith("headroom_coin.cir") for f in new)
    sarif = json.loads(check(capsys, boards, "--baseline", base, "--format", "sarif")[1])
    jsonschema.validate(sarif, SCHEMA)
    assert {r["baselineState"] for r in sarif["runs"][0]["results"]} == {"new", "unchanged"}


@pytest.mark.parametrize("text, wanted", [
    ('{"findings": []}', 'is not a drc baseline: no "schema"'),
    ("not json", "not JSON"),
    ('{"schema": "drc-baseline/1", "findings": [{"rule": "x"}]}', "finding 1 has no fingerprint"),
    ('{"schema": "drc-baseline/1", "findings": {}}', '"findings" is not a list'),
    ('[1, 2]', "is not a drc baseline"),
])
def test_not_a_baseline_is_status_2_and_keeps_the_report(capsys, boards, tmp_path, text, wanted):
    base = tmp_path / "baseline.json"
    base.write_text(text)
    report = tmp_path / "report.sarif"
    report.write_text("earlier\n")
    status, out, err = check(capsys, boards, "--baseline", base, "--output", report)
    assert status == 2 and out == "" and wanted in err and len(err.splitlines()) == 1
    assert err.startswith(str(base))
    assert report.read_text() == "earlier\n"
