"""House rules through the command line: --rules DIR, a config's [house_rules] folders, the
sample pack, per-rule settings, duplicate ids, isolation, and the tutorial's code as written."""

from __future__ import annotations

import json
import re
import shutil
import subprocess
import sys
import textwrap
from pathlib import Path

import jsonschema
import pytest

ROOT = Path(__file__).resolve().parents[1]
SAMPLE = ROOT / "samples" / "house_rules"
SARIF_SCHEMA = ROOT.parent / "shared" / "schemas" / "sarif-schema-2.1.0.json"
# IEC 60063:2015, table 1: the E24 series (typed from the standard, not from drc)
E24 = (1.0, 1.1, 1.2, 1.3, 1.5, 1.6, 1.8, 2.0, 2.2, 2.4, 2.7, 3.0,
       3.3, 3.6, 3.9, 4.3, 4.7, 5.1, 5.6, 6.2, 6.8, 7.5, 8.2, 9.1)
BUILT_IN = {"led-headroom", "pin-overcurrent"}


def drc(*args, cwd=ROOT):
    return subprocess.run([sys.executable, "-m", "drc", *map(str, args)], cwd=cwd,
                          capture_output=True, text=True, timeout=120)


def in_e24(ohm: float) -> bool:
    mantissa = ohm / 10 ** int(f"{ohm:e}".split("e")[1])
    return any(abs(mantissa - v) < 1e-9 for v in E24)


@pytest.fixture
def board(tmp_path):
    """The sample netlist and config in a folder of its own (models beside, as in samples)."""
    shutil.copytree(ROOT / "samples" / "models", tmp_path / "models")
    (tmp_path / "house").mkdir()
    shutil.copy(SAMPLE / "hive_scale.cir", tmp_path / "house")
    toml = (SAMPLE / "hive_scale.toml").read_text()
    toml = toml.replace('[house_rules]\nfolders = ["checks"]', "")
    (tmp_path / "house" / "hive_scale.toml").write_text(toml)
    return tmp_path / "house" / "hive_scale.cir"


def _json(result):
    assert result.returncode in (0, 1), result.stderr
    return json.loads(result.stdout)


def test_the_sample_pack_trips_each_house_rule_beside_the_built_in_ones():
    report = _json(drc("check", SAMPLE / "hive_scale.cir", "--format", "json"))
    by_rule = {}
    for f in report["findings"]:
        by_rule.setdefault(f["rule"], []).append(f)
    assert BUILT_IN <= set(by_rule)
    assert [f["elements"][0] for f in by_rule["house-preferred-resistor"]] == ["R1"]
    resistor = by_rule["house-preferred-resistor"][0]["values"]["resistance_ohm"]
    # R1 is 90 ohm in the netlist; IEC 60063: 90 is not an E24 value, 91 is
    assert resistor == 90.0 and not in_e24(resistor) and in_e24(91.0)
    derating = by_rule["house-led-derating"][0]
    # half of D1's 20 mA rating, from hive_scale.toml
    assert derating["elements"][-1] == "D1" and derating["values"]["allowed_A"] == pytest.approx(0.010)
    assert derating["values"]["current_A"] > 0.010
    assert [f["elements"][0] for f in by_rule["house-pump-charge-resistor"]] == ["DCH"]
    assert all(f["severity"] == "warning" for r in by_rule if r.startswith("house-") for f in by_rule[r])


def test_sarif_has_house_and_built_in_results_and_validates():
    result = drc("check", SAMPLE / "hive_scale.cir", "--rules", SAMPLE / "checks", "--format", "sarif")
    assert result.returncode == 1, result.stderr
    sarif = json.loads(result.stdout)
    jsonschema.validate(sarif, json.loads(SARIF_SCHEMA.read_text()))
    run = sarif["runs"][0]
    ids = {r["ruleId"] for r in run["results"]}
    assert {"house-preferred-resistor", "house-led-derating", "house-pump-charge-resistor"} | BUILT_IN <= ids
    listed = {r["id"] for r in run["tool"]["driver"]["rules"]}
    assert {"house-preferred-resistor", "led-headroom", "house-rule-failed"} <= listed


def test_rules_lists_house_rules_and_house_rule_failed():
    listing = json.loads(drc("rules", "--format", "json", "--rules", SAMPLE / "checks").stdout)
    origin = {r["id"]: r["origin"] for r in listing}
    assert origin["house-rule-failed"] == "built-in"
    assert origin["house-led-derating"] == str(SAMPLE / "checks")
    explained = drc("explain", "house-pump-charge-resistor", "--rules", SAMPLE / "checks")
    assert explained.returncode == 0 and "What it finds" in explained.stdout


def test_settings_from_the_config_change_what_a_house_rule_finds(board):
    checks = SAMPLE / "checks"
    before = _json(drc("check", board, "--rules", checks, "--format", "json"))
    assert any(f["rule"] == "house-led-derating" for f in before["findings"])
    toml = board.with_suffix(".toml")
    toml.write_text(toml.read_text() + textwrap.dedent('''
        [rule."house-led-derating"]
        share = "90 %"
        [rule."house-preferred-resistor"]
        least = "47 ohm"
        series = "E12"
        severity = "error"
        [rule."house-pump-charge-resistor"]
        enabled = false
        '''))
    after = _json(drc("check", board, "--rules", checks, "--format", "json"))
    rules = [f["rule"] for f in after["findings"]]
    assert "house-led-derating" not in rules and "house-pump-charge-resistor" not in rules
    r1 = [f for f in after["findings"] if f["rule"] == "house-preferred-resistor"]
    # 90 ohm is above 47 ohm now, but still not an E12 value (IEC 60063): one problem, an error
    assert len(r1) == 1 and "below" not in r1[0]["message"] and r1[0]["severity"] == "error"


@pytest.mark.parametrize("added, pattern", [
    ('[rule."house-led-derating"]\nshrae = "40 %"\n', r"unknown setting 'shrae'.*did you mean 'share'"),
    ('[rule."house-led-deratin"]\nseverity = "note"\n', r"unknown rule 'house-led-deratin'.*did you mean "
                                                        r"'house-led-derating'"),
])
def test_unknown_settings_and_rules_are_status_2_with_a_suggestion(board, added, pattern):
    toml = board.with_suffix(".toml")
    lines_before = toml.read_text().count("\n")
    toml.write_text(toml.read_text() + "\n" + added)
    result = drc("check", board, "--rules", SAMPLE / "checks")
    assert result.returncode == 2 and "Traceback" not in result.stderr
    # the key's (or the table's) line: the table header is the first added line
    line = lines_before + 2 + (1 if "setting" in pattern else 0)
    assert re.fullmatch(rf"\S*hive_scale\.toml:{line}:1: error: .*{pattern}.*\n", result.stderr), result.stderr


def test_a_setting_without_its_unit_is_status_2(board):
    toml = board.with_suffix(".toml")
    toml.write_text(toml.read_text() + '\n[rule."house-preferred-resistor"]\nleast = 100\n')
    result = drc("check", board, "--rules", SAMPLE / "checks")
    assert result.returncode == 2 and "least" in result.stderr and "unit" in result.stderr


def test_two_rules_with_one_id_name_both_files(tmp_path, board):
    for name in ("a", "b"):
        folder = tmp_path / name
        folder.mkdir()
        (folder / "same.py").write_text('from drc.api import Rule\n\nRULE = Rule(id="house-same", '
                                        'severity="note", summary="x")\n\ndef check(design):\n    return ()\n')
    result = drc("check", board, "--rules", tmp_path / "a", "--rules", tmp_path / "b")
    assert result.returncode == 2 and "Traceback" not in result.stderr
    assert str(tmp_path / "a" / "same.py") in result.stderr and str(tmp_path / "b" / "same.py") in result.stderr
    assert re.match(r".*same\.py:3:1: error: rule id 'house-same' is defined twice", result.stderr)


def test_failing_house_rules_are_findings_and_the_report_is_complete(tmp_path, board):
    folder = tmp_path / "broken"
    folder.mkdir()
    (folder / "syntax.py").write_text("from drc.api import Rule\n\ndef check(design:\n    pass\n")
    (folder / "raises.py").write_text(textwrap.dedent('''\
        from drc.api import Rule
        RULE = Rule(id="house-raises", severity="note", summary="x")

        def check(design):
            return [1 / 0 for b in design.branches]
        '''))
    (folder / "slow.py").write_text(textwrap.dedent('''\
        import time
        from drc.api import Rule
        RULE = Rule(id="house-slow", severity="note", summary="x")

        def check(design):
            time.sleep(30)
            return ()
        '''))
    toml = board.with_suffix(".toml")
    toml.write_text(toml.read_text().replace("[limits]\n", '[limits]\nhouse_rule_time = "0.5 s"\n'))
    result = drc("check", board, "--rules", folder, "--rules", SAMPLE / "checks", "--format", "json")
    report = _json(result)
    failed = {Path(f["location"]["path"]).name: f for f in report["findings"] if f["rule"] == "house-rule-failed"}
    assert set(failed) == {"syntax.py", "raises.py", "slow.py"}
    assert failed["syntax.py"]["location"]["line"] == 3          # the unclosed parenthesis
    assert failed["raises.py"]["location"]["line"] == 5 and "ZeroDivisionError" in failed["raises.py"]["message"]
    assert failed["slow.py"]["location"]["line"] == 6 and "time limit of 0.5 s" in failed["slow.py"]["message"]
    assert all(f["severity"] == "error" for f in failed.values())
    rules = {f["rule"] for f in report["findings"]}
    assert BUILT_IN | {"house-preferred-resistor", "house-pump-charge-resistor"} <= rules
    assert report["branches"] and report["pumps"]


def test_config_folders_are_loaded_once_for_every_netlist_they_apply_to(tmp_path):
    shutil.copytree(ROOT / "samples" / "models", tmp_path / "models")
    work = tmp_path / "boards"
    (work / "checks").mkdir(parents=True)
    log = tmp_path / "imports.log"
    (work / "checks" / "counted.py").write_text(textwrap.dedent(f'''\
        from drc.api import Rule, finding
        with open({str(log)!r}, "a") as handle:
            handle.write("imported\\n")
        RULE = Rule(id="house-counted", severity="note", summary="one per LED")

        def check(design):
            for led in design.leds.values():
                yield finding(led.element, f"{{led.name}} seen")
        '''))
    source = (SAMPLE / "hive_scale.cir").read_text()
    for name in ("one", "two"):
        (work / f"{name}.cir").write_text(source)
    (work / "drc.toml").write_text('[house_rules]\nfolders = ["checks"]\n[limits]\ninclude_folders = ["../models"]\n')
    report = _json(drc("check", work, "--format", "json"))
    seen = [(Path(f["location"]["path"]).name, f["elements"][0]) for f in report["findings"]
            if f["rule"] == "house-counted"]
    assert sorted(seen) == [("one.cir", "D1"), ("one.cir", "D2"), ("two.cir", "D1"), ("two.cir", "D2")]
    assert log.read_text().count("imported") == 1
    # a netlist outside that config's reach does not get the rule
    other = tmp_path / "elsewhere"
    other.mkdir()
    shutil.copy(work / "one.cir", other / "one.cir")
    (other / "drc.toml").write_text('[limits]\ninclude_folders = ["../models"]\n')
    report = _json(drc("check", work / "one.cir", other / "one.cir", "--format", "json"))
    paths = {f["location"]["path"] for f in report["findings"] if f["rule"] == "house-counted"}
    assert paths == {str(Path("boards") / "one.cir")} or all("boards" in p for p in paths)


def test_a_config_folder_rule_takes_settings_from_that_config(tmp_path):
    """Needs engine.check_file to let drc.running check [rule."ID"] ids (see the reply)."""
    shutil.copytree(ROOT / "samples" / "models", tmp_path / "models")
    shutil.copytree(SAMPLE, tmp_path / "house_rules")
    toml = tmp_path / "house_rules" / "hive_scale.toml"
    toml.write_text(toml.read_text() + '\n[rule."house-led-derating"]\nshare = "95 %"\n')
    report = _json(drc("check", tmp_path / "house_rules" / "hive_scale.cir", "--format", "json"))
    rules = {f["rule"] for f in report["findings"]}
    assert "house-led-derating" not in rules and "house-preferred-resistor" in rules


# ---------------------------------------------------------------------------- the tutorial

TUTORIAL_HEADING = "Your first house rule"


def tutorial_code() -> str:
    developers = ROOT / "DEVELOPERS.md"
    text = developers.read_text(encoding="utf-8") if developers.exists() else ""
    match = re.search(rf"^#+ {TUTORIAL_HEADING}\s*$(.*?)(?=^#+ |\Z)", text, re.M | re.S)
    assert match, f"DEVELOPERS.md has no section '{TUTORIAL_HEADING}' (the lead pastes it in)"
    code = re.search(r"```python\n(.*?)```", match.group(1), re.S)
    assert code, "the tutorial section has no python code block"
    return code.group(1)


@pytest.mark.parametrize("form", ["text", "json", "sarif"])
def test_the_tutorial_rule_runs_as_written(tmp_path, board, form):
    checks = tmp_path / "checks"
    checks.mkdir()
    (checks / "min_resistor.py").write_text(tutorial_code())
    result = drc("check", board, "--rules", checks, "--format", form)
    assert result.returncode == 1, result.stderr
    if form == "text":
        assert re.search(r"hive_scale\.cir:\d+:1: warning: R1 is 90.0 ohm, below 100 ohm \[house-min-resistor\]",
                         result.stdout), result.stdout
        assert "[led-headroom]" in result.stdout
    elif form == "json":
        rules = {f["rule"]: f for f in json.loads(result.stdout)["findings"]}
        assert rules["house-min-resistor"]["elements"] == ["R1"] and "led-headroom" in rules
    else:
        sarif = json.loads(result.stdout)
        jsonschema.validate(sarif, json.loads(SARIF_SCHEMA.read_text()))
        ids = {r["ruleId"] for r in sarif["runs"][0]["results"]}
        assert {"house-min-resistor", "led-headroom"} <= ids
