"""The public rule API (drc.api) and the runner (drc.running): every built-in rule uses the
API alone; settings, severities and isolation of house rules, unit by unit."""

from __future__ import annotations

import ast
import sys
import textwrap
import threading
import types
from pathlib import Path

import pytest

import drc.api as api
from drc.api import Finding, Location, Rule, Setting, finding
from drc.context import load_context
from drc.errors import InputError, InputErrors
from drc import registry, running
from drc.registry import LoadedRule

ROOT = Path(__file__).resolve().parents[1]
RULE_FILES = sorted(p for p in (ROOT / "rules").glob("*.py") if not p.name.startswith("_"))


def _imports(path: Path) -> list[tuple[str, int]]:
    """Every module a file imports (relative imports as '.name'), with its line."""
    out = []
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"), str(path))):
        if isinstance(node, ast.Import):
            out += [(alias.name, node.lineno) for alias in node.names]
        elif isinstance(node, ast.ImportFrom):
            base = "." * node.level + (node.module or "")
            if node.module == "drc" and node.level == 0:      # from drc import x: drc.x
                out += [(f"drc.{alias.name}", node.lineno) for alias in node.names]
            else:
                out.append((base, node.lineno))
    return out


@pytest.mark.parametrize("path", RULE_FILES, ids=lambda p: p.name)
def test_built_in_rules_import_only_the_api(path):
    for name, line in _imports(path):
        top = name.split(".")[0]
        if name.startswith(".") or top == "drc":
            assert name == "drc.api", f"{path.name}:{line} imports {name}: rules use drc.api alone"
        else:
            # the brief: numpy and the standard library (Python's own list of its modules)
            assert top == "numpy" or top in sys.stdlib_module_names, f"{path.name}:{line} imports {name}"


def test_the_import_check_can_fail(tmp_path):
    bad = tmp_path / "bad.py"
    bad.write_text("import numpy\nfrom drc.analysis import Design\nfrom drc import diode\nfrom . import x\n")
    # each of the three drc imports is caught, numpy is not
    assert [n for n, _ in _imports(bad) if n != "drc.api" and (n.startswith(".") or n.startswith("drc"))] \
        == ["drc.analysis", "drc.diode", "."]


def test_every_built_in_rule_is_documented_and_contract_names_present():
    rules, failures = registry.load_rules([])
    assert failures == []
    ids = [r.id for r in rules]
    assert len(ids) == len(set(ids))
    # the contract's rule table
    contract = {"led-headroom", "led-unlimited", "led-overcurrent", "led-reverse", "boost-inadequate",
                "pin-overcurrent", "reverse-leak", "flicker", "suffix-ambiguity", "net-floating",
                "house-rule-failed"}
    assert contract <= set(ids)
    for r in rules:
        assert r.help.startswith("What it finds"), r.path
        assert r.origin == registry.BUILT_IN and not r.house


def test_every_exported_name_resolves():
    for name in api.__all__:
        assert getattr(api, name) is not None, name
    with pytest.raises(AttributeError):
        api.no_such_name


def test_design_protocol_matches_the_analysed_design():
    from drc.analysis import Design
    declared = {n for n in vars(api.Design) if not n.startswith("_")} | set(api.Design.__annotations__)
    missing = [n for n in declared if not hasattr(Design, n) and n not in Design.__dataclass_fields__]
    assert missing == []


def test_rule_and_setting_validate():
    with pytest.raises(ValueError, match="lower-case"):
        Rule(id="House Rule", severity="error", summary="x")
    with pytest.raises(ValueError, match="severity"):
        Rule(id="house-x", severity="fatal", summary="x")
    with pytest.raises(ValueError, match="runner"):
        Rule(id="house-x", severity="note", summary="x", settings={"enabled": True})
    with pytest.raises(ValueError, match="unit"):
        Setting(1.0, unit="parsec")
    rule = Rule(id="house-x", severity="note", summary="x", sources="one source",
                settings={"least": Setting(100.0, unit="ohm"), "share": 0.5})
    assert rule.sources == ("one source",)
    assert rule.defaults() == {"least": 100.0, "share": 0.5}


def test_finding_at_an_element_takes_its_card():
    element = types.SimpleNamespace(name="R1", location=Location("a.cir", 7, 1))
    f = finding(element, "too small", values={"resistance_ohm": 90.0})
    assert (f.location, f.elements, f.severity) == (Location("a.cir", 7, 1), ["R1"], None)
    g = finding(Location("a.cir", 3, 2), "here", elements=["D1"], severity="note")
    assert (g.location.line, g.elements, g.severity) == (3, ["D1"], "note")


# ---------------------------------------------------------------------------- settings

def _loaded(source: str, tmp_path: Path, name: str = "house_rule.py") -> LoadedRule:
    folder = tmp_path / "rules"
    folder.mkdir(exist_ok=True)
    (folder / name).write_text(textwrap.dedent(source))
    loaded, failed = registry.folder_rules(folder)
    assert failed == [], failed
    return [r for r in loaded if Path(r.path).name == name][0]


RESISTOR_RULE = '''\
    """What it finds: a test rule."""
    from drc.api import Rule, Setting, finding, Location

    RULE = Rule(id="house-least", severity="warning", summary="x",
                settings={"least": Setting(100.0, unit="ohm"), "label": "R", "count": 2,
                          "strict": False, "share": 0.5})

    def check(design, settings):
        yield finding(Location("a.cir", 1, 1), repr(settings))
    '''


def _context(tmp_path: Path, toml: str, ids):
    (tmp_path / "a.cir").write_text("* x\nR1 a 0 1k\n.end\n")
    (tmp_path / "drc.toml").write_text(textwrap.dedent(toml))
    return load_context(tmp_path / "a.cir", rule_ids=ids)


def test_quantity_settings_arrive_as_si_floats(tmp_path):
    rule = _loaded(RESISTOR_RULE, tmp_path)
    context = _context(tmp_path, '[rule."house-least"]\nleast = "4.7 kohm"\ncount = 3\nshare = 1\n',
                       [rule.id])
    enabled, severity, settings = running.rule_settings(rule, context)
    # SI: 4.7 kΩ is 4700 Ω; an int given for a float setting is that float
    assert settings["least"] == pytest.approx(4700.0)
    assert settings["count"] == 3 and settings["share"] == 1.0 and isinstance(settings["share"], float)
    assert (enabled, severity, settings["label"]) == (True, "warning", "R")


@pytest.mark.parametrize("toml, words, line", [
    ('[rule."house-least"]\nleats = "1 ohm"\n', ["unknown setting 'leats'", "did you mean 'least'?"], 2),
    ('[rule."house-least"]\n\nleast = 100\n', ["least", "unit"], 3),
    ('[rule."house-least"]\nleast = "100 mA"\n', ["least"], 2),
    ('[rule."house-least"]\ncount = "three"\n', ["count wants a whole number"], 2),
    ('[rule."house-least"]\nstrict = 1\n', ["true or false"], 2),
])
def test_bad_settings_are_errors_at_their_key(tmp_path, toml, words, line):
    rule = _loaded(RESISTOR_RULE, tmp_path)
    context = _context(tmp_path, toml, [rule.id])
    with pytest.raises(InputError) as caught:
        running.rule_settings(rule, context)
    for w in words:
        assert w in caught.value.message
    assert caught.value.location.line == line and caught.value.location.path.endswith("drc.toml")


def test_unknown_rule_in_the_config_suggests_the_closest(tmp_path):
    rule = _loaded(RESISTOR_RULE, tmp_path)
    context = _context(tmp_path, '[rule."house-leest"]\nseverity = "note"\n', None)
    with pytest.raises(InputError) as caught:
        running.rules_for([rule], context)
    assert "did you mean 'house-least'?" in caught.value.message
    assert caught.value.location.line == 1


def test_severity_and_enabled_from_the_config(tmp_path):
    rule = _loaded(RESISTOR_RULE, tmp_path)
    context = _context(tmp_path, '[rule."house-least"]\nseverity = "error"\n', [rule.id])
    found, ran = running.run_rules(None, [rule], context)
    assert ran == ["house-least"] and [f.severity for f in found] == ["error"]
    context = _context(tmp_path, '[rule."house-least"]\nenabled = false\n', [rule.id])
    assert running.run_rules(None, [rule], context) == ([], [])


# ---------------------------------------------------------------------------- isolation

def _run(rules, tmp_path, seconds: float = 10.0):
    context = _context(tmp_path, f'[limits]\nhouse_rule_time = "{seconds} s"\n', [r.id for r in rules])
    return running.run_rules(types.SimpleNamespace(path="a.cir"), rules, context)


GOOD = '''\
    from drc.api import Rule, finding, Location
    RULE = Rule(id="house-good", severity="note", summary="x")
    def check(design):
        yield finding(Location("a.cir", 2, 1), "good one")
    '''


def test_a_raising_rule_becomes_one_failure_and_the_others_run(tmp_path):
    good = _loaded(GOOD, tmp_path, "good.py")
    bad = _loaded('''\
        from drc.api import Rule
        RULE = Rule(id="house-bad", severity="error", summary="x")

        def check(design, settings):
            for branch in design.branches:   # line 5: no such attribute
                yield branch
        ''', tmp_path, "bad.py")
    found, ran = _run([bad, good], tmp_path)
    failed = [f for f in found if f.rule == "house-rule-failed"]
    assert len(failed) == 1 and failed[0].severity == "error"
    assert failed[0].location == Location(bad.path, 5, 1)
    assert "AttributeError" in failed[0].message and "house-bad" in failed[0].message
    assert [f.message for f in found if f.rule == "house-good"] == ["good one"]
    assert ran == ["house-bad", "house-good"]


def test_a_rule_yielding_other_than_findings_fails(tmp_path):
    odd = _loaded('''\
        from drc.api import Rule
        RULE = Rule(id="house-odd", severity="error", summary="x")
        def check(design):
            yield "R1 is wrong"
        ''', tmp_path, "odd.py")
    found, _ = _run([odd], tmp_path)
    assert [f.rule for f in found] == ["house-rule-failed"] and "not a Finding" in found[0].message


SPINNER = '''\
    from drc.api import Rule
    RULE = Rule(id="house-spin", severity="error", summary="x")
    def check(design):
        while True:
            try:
                n = sum(range(1000))           # line 6
            except Exception:
                pass                           # a rule that swallows errors is still stopped
        yield
    '''


def test_a_rule_past_its_time_limit_is_stopped(tmp_path):
    import time
    spin = _loaded(SPINNER, tmp_path, "spin.py")
    good = _loaded(GOOD, tmp_path, "good.py")
    started = time.monotonic()
    found, _ = _run([spin, good], tmp_path, seconds=0.3)
    assert time.monotonic() - started < 5
    failed = [f for f in found if f.rule == "house-rule-failed"]
    assert len(failed) == 1 and "time limit of 0.3 s" in failed[0].message
    assert failed[0].location.path == spin.path and failed[0].location.line in (4, 5, 6, 7, 8)
    assert any(f.rule == "house-good" for f in found)


def test_the_time_limit_outside_the_main_thread(tmp_path):
    spin = _loaded(SPINNER, tmp_path, "spin.py")
    out = {}

    def work():
        try:
            running.run_isolated(spin, None, {}, 0.3)
        except running.RuleFault as fault:
            out["fault"] = fault

    worker = threading.Thread(target=work)
    worker.start()
    worker.join(10)
    assert "time limit" in out["fault"].message and "stopped" in out["fault"].message
    # the overrunning rule's own thread is stopped, not left spinning on the interpreter lock
    assert not [t for t in threading.enumerate() if t.name == "drc-rule-house-spin"]


def test_built_in_rules_are_not_isolated(tmp_path):
    rule = Rule(id="own-bug", severity="error", summary="x")

    def check(design, settings):
        raise ZeroDivisionError("drc's own bug")
        yield

    built_in = LoadedRule(rule, check, "x", registry.BUILT_IN, "rules/own_bug.py", 1)
    with pytest.raises(ZeroDivisionError):
        _run([built_in], tmp_path)


# ---------------------------------------------------------------------------- packs

class _FakePoint:
    def __init__(self, name, value, target=None, error=None):
        self.name, self.value, self._target, self._error = name, value, target, error
        self.dist = types.SimpleNamespace(name="acme-drc-rules")

    def load(self):
        if self._error is not None:
            raise self._error
        return self._target


def _module(rule_id: str) -> types.ModuleType:
    module = types.ModuleType(f"acme_{rule_id.replace('-', '_')}")
    module.__doc__ = "What it finds: a pack rule."
    module.RULE = Rule(id=rule_id, severity="note", summary="from a pack")
    module.check = lambda design: ()
    return module


def test_pack_rules_from_entry_points(monkeypatch):
    import importlib.metadata as metadata
    points = [_FakePoint("one", "acme:one", _module("acme-one")),
              _FakePoint("many", "acme:rules", lambda: [_module("acme-two"), _module("acme-three")]),
              _FakePoint("broken", "acme_broken", error=ImportError("no module named acme_broken"))]
    seen = {}

    def fake_entry_points(**kwargs):
        seen.update(kwargs)
        return points

    monkeypatch.setattr(metadata, "entry_points", fake_entry_points)
    loaded, failed = registry.pack_rules()
    assert seen == {"group": "drc.rules"}
    assert sorted(r.id for r in loaded) == ["acme-one", "acme-three", "acme-two"]
    assert all(r.origin == "pack acme-drc-rules" and r.house for r in loaded)
    assert len(failed) == 1 and "ImportError" in failed[0].message
    rules, failures = registry.load_rules([])
    assert {"acme-one", "led-headroom"} <= {r.id for r in rules} and len(failures) == 1


def test_a_pack_rule_with_a_built_in_id_is_status_2(monkeypatch):
    import importlib.metadata as metadata
    monkeypatch.setattr(metadata, "entry_points",
                        lambda **kw: [_FakePoint("dup", "acme:dup", _module("flicker"))])
    with pytest.raises(InputError) as caught:
        registry.load_rules([])
    assert "'flicker' is defined twice" in caught.value.message
    assert "rules/flicker.py" in caught.value.message.replace("\\", "/")
