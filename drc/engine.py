"""One check from paths to a report: find the netlists, and for each read its context,
expand it, analyse it and run every rule; then gather the report the formatters print."""

from __future__ import annotations

import difflib
import math
import os
from dataclasses import dataclass, field
from pathlib import Path

from drc import __version__
from drc.advice import EYE_CAUTION, LITHIUM_CAUTION
from drc.analysis import Design, analyse, low_nominal_high
from drc.api import SEVERITIES, Finding
from drc.context import Context, load_context
from drc.errors import InputError, InputErrors, Location
from drc.expand import Limits, expand
from drc.registry import LoadedRule, load_rules
from drc.report.jsonreport import BRANCH_KEYS, PUMP_KEYS, fingerprint, in_key_order, plain
from drc.running import run_rules

NETLIST_PATTERNS = ("*.cir", "*.sp", "*.net", "*.spice")
GENERAL_CAUTION = ("A clean report is not a sign-off: a qualified engineer reviews the design, "
                   "and the parts' datasheets (absolute maximum ratings first) govern over every "
                   "default used here.")
CAUTIONS = {
    "lithium": LITHIUM_CAUTION,
    "flashing": "Flashing indicators in the 3 to 60 Hz band can trouble photosensitive people.",
    "eye": EYE_CAUTION,
    "mains": "Anything tied to mains, or above safety extra-low voltage, is outside this tool: "
             "follow local codes and licensed practice.",
}
SELV_DC_V = 60.0        # safety extra-low voltage, DC (IEC 61140 band I limit; from memory)


def find_netlists(paths: list[str]) -> list[str]:
    """Every netlist named or found below the folders named, in a stable order."""
    found: list[str] = []
    for p in paths:
        path = Path(p)
        if path.is_dir():
            below = sorted({str(f) for pattern in NETLIST_PATTERNS for f in path.rglob(pattern)
                            if f.is_file()})
            if not below:
                raise InputError(Location(p, 1, 1), f"no netlists (*.cir, *.sp, *.net, *.spice) in {p}")
            found.extend(below)
        elif path.exists():
            found.append(p)
        else:
            raise InputError(Location(p, 1, 1), f"no such file or folder: {p}")
    seen = set()
    return [f for f in found if not (f in seen or seen.add(f))]


@dataclass
class FileResult:
    path: str
    design: Design | None
    findings: list[Finding]
    inputs: dict
    assumptions: list[str]
    cautions: list[str]
    branches: list[dict]
    pumps: list[dict]
    sources: dict[str, list[str]]
    rules_ran: list[str] = field(default_factory=list)
    anchors: list[set] = field(default_factory=list)   # per finding: (path, line) cards


def check_file(path: str, config: str | None, rules: list[LoadedRule]) -> FileResult:
    """Everything about one netlist; InputError(s) when it cannot be read."""
    rule_ids = [r.id for r in rules]
    context = load_context(Path(path), Path(config) if config else None, rule_ids=None)
    limits = Limits(max_elements=context.limits.max_elements,
                    max_file_bytes=context.limits.max_file_bytes,
                    include_folders=tuple(context.limits.include_folders))
    flat = expand(path, limits)
    design = analyse(flat, context)
    findings, ran = run_rules(design, rules, context)
    cautions = _cautions(design, findings)
    return FileResult(path, design, findings, _inputs(design, context), design.assumptions,
                      cautions, [_branch_json(b, design) for b in design.branches],
                      [_pump_json(p, design) for p in design.pumps],
                      flat.sources, ran)


def _inputs(design: Design, context: Context) -> dict:
    entry = {"path": design.path, "elements": len(design.elements), "nets": len(design.nets)}
    if context.files:
        entry["config"] = context.files[-1] if len(context.files) == 1 else context.files
    if len(design.flat.files) > 1:
        entry["includes"] = design.flat.files[1:]
    return entry


def _branch_json(b, design: Design) -> list[dict]:
    """The report's entries for one branch, one per LED, made in their final JSON form: the
    contract's keys in order, then the others sorted, every value plain (see
    drc.report.jsonreport._is_final), so the JSON report writes them as they are."""
    n = design.corners.nominal
    elements = [e.name for e in b.elements]
    if b.drive == "pin" and b.pin is not None:
        elements = [b.pin.source or b.pin.label] + elements
    string = [l.name for l in b.leds] if len(b.leds) > 1 else None
    out = []
    for led in b.leds:
        entry = {"led": led.name, "drive": b.drive, "source": b.source,
                 "elements": list(elements)}
        if b.current_A:
            entry["current_A"] = _spread(b.current_A[led.name], n)
            entry["forward_V"] = _spread(b.forward_V[led.name], n)
        else:
            entry["current_A"] = None
            entry["forward_V"] = None
        entry["colour"] = led.colour           # the rest in sorted order
        entry["nets"] = list(b.nets)
        if b.note:
            entry["note"] = b.note
        if string is not None:
            entry["string"] = list(string)
        out.append(entry)
    return out


def _spread(values, nominal: int) -> dict:
    """The contract's {low, nominal, high} of a per-corner array, as analysis.low_nominal_high
    gives it, with a NaN or infinity as None (JSON's null), as the report writes it."""
    return {"low": _finite(float(values.min())), "nominal": _finite(float(values[nominal])),
            "high": _finite(float(values.max()))}


def _finite(x: float) -> float | None:
    return x if math.isfinite(x) else None


def _pump_json(p, design: Design) -> dict:
    """The report's entry for one pump, in its final JSON form (as _branch_json's)."""
    n = design.corners.nominal
    entry = {"id": p.id, "topology": p.topology, "stages": p.stages,
             "elements": [e.name for e in p.elements], "output_net": p.output_net}
    r = p.result
    if r is None:
        entry["note"] = (p.region.note if p.region is not None and p.region.note else
                         "not solved: see the branch's note")
        entry["pins"] = plain(p.pins)
        return entry
    entry["peak_V"] = _spread(r.peak_V, n)
    entry["average_V"] = _spread(r.average_V, n)
    led = p.region.leds[0]                  # the rest in sorted order
    entry["led"] = led.name
    entry["led_current_A"] = _spread(r.load_average_A, n)
    entry["led_peak_A"] = _spread(r.load_peak_A, n)
    # not a spread key: every dict inside is sorted, as plain() sorts it
    entry["pin_currents"] = plain(
        {label: {"high_phase_peak_A": low_nominal_high(r.pin_high_peak_A[label], n),
                 "low_phase_peak_A": low_nominal_high(r.pin_low_peak_A[label], n),
                 "startup_surge_A": low_nominal_high(r.startup_surge_A[label], n)}
         for label in p.pins if label in r.pin_high_peak_A})
    entry["pins"] = plain(p.pins)
    entry["ripple_V"] = _spread(r.ripple_V, n)
    entry["time_to_visible_s"] = _spread(r.time_to_visible_s, n)
    return entry


def _cautions(design: Design, findings: list[Finding]) -> list[str]:
    out = [GENERAL_CAUTION]
    if any(s.lithium for s in design.supplies.values()):
        out.append(CAUTIONS["lithium"])
    if any(f.rule == "flicker" and 3 <= f.values.get("frequency_Hz", 0) <= 60 for f in findings) or any(
            p.drive == "toggle" and p.frequency_Hz and 3 <= p.frequency_Hz <= 60 for p in design.pins.values()):
        out.append(CAUTIONS["flashing"])
    if any(l.eye_safety for l in design.leds.values()):
        out.append(CAUTIONS["eye"])
    if any(max(abs(s.low_V), abs(s.high_V)) > SELV_DC_V for s in design.supplies.values()):
        out.append(CAUTIONS["mains"])
    return out


def run_check(paths: list[str], config: str | None, rule_folders: list[str], *, jobs: int = 1,
              waiver_files: list[str] = (), baseline: str | None = None, progress=None,
              today=None) -> tuple[dict, dict, list[LoadedRule]]:
    """The report dict (the contract's shape), the sources for quoting, and the rules.

    jobs > 1 checks the files in a process pool; the report is the same whatever jobs.
    waiver_files are TOML waiver files; baseline a file written by --write-baseline.
    progress(done, total) is called as files finish. Every input problem (netlists,
    waivers, baseline) raises InputErrors before anything is written.
    """
    import datetime as _dt
    from drc import waivers as _waivers
    from drc.baseline import apply_baseline, load_baseline

    files = find_netlists(paths)
    rules, failures = load_rules([Path(f) for f in rule_folders])
    known_rules = {r.id for r in rules} | {_waivers.HOUSE_FAILED_RULE}
    errors: list[InputError] = []
    # the waiver files and the baseline first: a mistake there is found before a long run
    file_waivers = []
    for wf in waiver_files:
        try:
            file_waivers.extend(_waivers.file_waivers(wf, known_rules))
        except InputErrors as many:
            errors.extend(many.errors)
        except InputError as one:
            errors.append(one)
    known = None
    if baseline is not None:
        try:
            known = load_baseline(baseline)
        except InputError as one:
            errors.append(one)
    results: list[FileResult] = []
    for outcome in _check_all(files, config, rule_folders, rules, jobs, progress):
        if isinstance(outcome, FileResult):
            results.append(outcome)
        else:
            errors.extend(outcome)
    multiple = len(results) > 1
    findings, anchors, assumptions, cautions, branches, pumps, inputs = [], [], [], [], [], [], []
    sources: dict[str, list[str]] = {}
    for r in results:
        inputs.append(r.inputs)
        for a in r.assumptions:
            line = f"{r.path}: {a}" if multiple else a
            if line not in assumptions:
                assumptions.append(line)
        for c in r.cautions:
            if c not in cautions:
                cautions.append(c)
        for b in r.branches:
            for entry in b:
                if multiple:
                    entry = in_key_order({"path": r.path, **entry}, BRANCH_KEYS)
                branches.append(entry)
        pumps.extend((in_key_order({"path": r.path, **p}, PUMP_KEYS) if multiple else p)
                     for p in r.pumps)
        findings.extend(r.findings)
        anchors.extend(r.anchors)
        sources.update(r.sources)
    try:
        inline = _waivers.inline_waivers(sources, known_rules, {r.path for r in results})
    except InputErrors as many:
        errors.extend(many.errors)
        inline = []
    if errors:
        raise InputErrors(errors)
    for failure in failures:
        findings.append({"rule": _waivers.HOUSE_FAILED_RULE, "severity": "error",
                         "message": f"house rule {failure.path} could not be loaded: {failure.message}",
                         "location": {"path": failure.path, "line": failure.line, "column": 1},
                         "elements": [], "nets": [], "corner": None, "values": {},
                         "fix": "fix the rule module; the other rules ran", "caution": ""})
        anchors.append({(failure.path, failure.line)})
    # each finding's fingerprint once, before a waiver is added: its place in the key order
    for f in findings:
        f["fingerprint"] = fingerprint(f)
    notes = _waivers.apply_waivers(findings, anchors, inline + file_waivers,
                                   today or _dt.date.today())
    for f in notes:
        f["fingerprint"] = fingerprint(f)
    findings.extend(notes)
    findings.sort(key=lambda f: (f["location"]["path"], f["location"]["line"],
                                 f["location"]["column"], f["rule"], f["message"]))
    if known is not None:
        apply_baseline(findings, known)
    summary = {s: sum(1 for f in findings if f["severity"] == s) for s in SEVERITIES}
    report = {"schema": "drc-report/1", "tool": {"name": "drc", "version": __version__},
              "inputs": inputs, "assumptions": assumptions, "findings": findings,
              "branches": branches, "pumps": pumps, "cautions": cautions, "summary": summary}
    return report, sources, rules


def _slim(result: FileResult) -> FileResult:
    """What the report needs from one file, as plain picklable data: findings as JSON dicts,
    each with the cards it can be waived at, and no Design."""
    from drc.waivers import mentions_waiver
    design = result.design
    by_key = design.flat.by_key if design is not None else {}
    # The X lines a finding came through matter only to a drc-waive comment, and such a
    # comment can only name a card of the files this netlist read: without one, each
    # finding's own card is all its anchors need to hold.
    through = mentions_waiver(result.sources)
    anchors = []
    for f in result.findings:
        where = {(f.location.path, f.location.line)}
        if through:
            named = [e for e in (by_key.get(n.lower()) for n in f.elements) if e is not None]
            # the element whose card the finding points at, and the X lines it came through
            at = [e for e in named if e.location == f.location] or named[:1]
            for e in at:
                where.update((i.path, i.line) for i in e.instances)
        anchors.append(where)
    slim = FileResult(result.path, None, [_finding_json(f) for f in result.findings],
                      result.inputs, list(result.assumptions), result.cautions, result.branches,
                      result.pumps, result.sources, result.rules_ran)
    slim.anchors = anchors
    return slim


def _errors_as_data(error: Exception) -> list[tuple]:
    many = error.errors if isinstance(error, InputErrors) else [error]
    return [(tuple(e.location) if e.location is not None else None, e.message) for e in many]


_WORKER_RULES: dict = {}


def _check_in_worker(path: str, config: str | None, rule_folders: tuple[str, ...]):
    """One file in a pool process: ("ok", slim result) or ("errors", [(location, message)])."""
    rules = _WORKER_RULES.get(rule_folders)
    if rules is None:
        rules = _WORKER_RULES[rule_folders] = load_rules([Path(f) for f in rule_folders])[0]
    try:
        return "ok", _slim(check_file(path, config, rules))
    except (InputError, InputErrors) as error:
        return "errors", _errors_as_data(error)


def _check_all(files, config, rule_folders, rules, jobs, progress):
    """A FileResult, or a list of InputErrors, per file, in the order of files."""
    total = len(files)
    if jobs <= 1 or total <= 1:
        for n, path in enumerate(files, 1):
            try:
                yield _slim(check_file(path, config, rules))
            except (InputError, InputErrors) as error:
                yield error.errors if isinstance(error, InputErrors) else [error]
            if progress:
                progress(n, total)
        return
    import multiprocessing
    from concurrent.futures import ProcessPoolExecutor, as_completed
    method = "fork" if "fork" in multiprocessing.get_all_start_methods() else None
    context = multiprocessing.get_context(method) if method else None
    outcomes: list = [None] * total
    with ProcessPoolExecutor(max_workers=min(jobs, total), mp_context=context) as pool:
        futures = {pool.submit(_check_in_worker, path, config, tuple(rule_folders)): i
                   for i, path in enumerate(files)}
        for done, future in enumerate(as_completed(futures), 1):
            outcomes[futures[future]] = future.result()
            if progress:
                progress(done, total)
    for kind, value in outcomes:
        if kind == "ok":
            yield value
        else:
            yield [InputError(Location(*loc) if loc else None, message) for loc, message in value]


def _finding_json(f: Finding) -> dict:
    """A finding as the report's dict, in its final JSON form but for the fingerprint (added
    by run_check): the contract's keys in order and every value plain, the corner and values
    with sorted keys, as the JSON report writes them."""
    values = {k: (float(v) if isinstance(v, (int, float)) or hasattr(v, "item") else v)
              for k, v in f.values.items()}
    return {"rule": f.rule, "severity": f.severity, "message": f.message,
            "location": {"path": f.location.path, "line": f.location.line, "column": f.location.column},
            "elements": list(f.elements), "nets": list(f.nets), "corner": plain(f.corner),
            "values": plain(values), "fix": f.fix, "caution": f.caution}


def rule_metadata(rules: list[LoadedRule]) -> list[dict]:
    """Every rule that can report: the loaded ones, then the engine's own two."""
    from drc import waivers as _waivers
    out = [{"id": r.id, "severity": r.rule.severity, "summary": r.rule.summary, "help": r.help,
            "sources": list(r.rule.sources), "origin": r.origin} for r in rules]
    ids = {r["id"] for r in out}
    for rule_id, summary, help_text in (
            (_waivers.HOUSE_FAILED_RULE, _waivers.HOUSE_FAILED_SUMMARY, HOUSE_FAILED_HELP),
            (_waivers.UNUSED_RULE, _waivers.UNUSED_SUMMARY, _waivers.UNUSED_HELP)):
        if rule_id not in ids:
            out.append({"id": rule_id, "severity": "error" if rule_id == _waivers.HOUSE_FAILED_RULE
                        else "note", "summary": summary, "help": help_text, "sources": [],
                        "origin": "built-in"})
    return out


HOUSE_FAILED_HELP = (
    "What it finds: a house rule (from --rules DIR or an installed pack) that could not be "
    "loaded, raised an exception, or ran past its time limit.\n\n"
    "Why it matters: a check the team relies on did not run, so a clean report would say "
    "less than it seems to. The other rules still ran.\n\n"
    "How it is computed: each house rule module is imported and its check run under a time "
    "limit; a failure becomes this finding at the module's file.\n\n"
    "Example: a house rule module with a syntax error, reported at its line.\n\n"
    "Fix: fix the rule module (its message says what went wrong).")


def closest_rule(name: str, rules: list[LoadedRule]) -> str:
    close = difflib.get_close_matches(name.lower(), [r.id for r in rules], n=1)
    return f"; did you mean '{close[0]}'?" if close else ""
