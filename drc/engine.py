"""One check from paths to a report: find the netlists, and for each read its context,
expand it, analyse it and run every rule; then gather the report the formatters print."""

from __future__ import annotations

import difflib
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


def check_file(path: str, config: str | None, rules: list[LoadedRule], extra_folders=()) -> FileResult:
    """Everything about one netlist; InputError(s) when it cannot be read."""
    rule_ids = [r.id for r in rules]
    context = load_context(Path(path), Path(config) if config else None, rule_ids=rule_ids)
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
    n = design.corners.nominal
    out = []
    for led in b.leds:
        entry = {"led": led.name, "drive": b.drive, "source": b.source,
                 "elements": [e.name for e in b.elements] if b.drive != "pin" or b.pin is None
                 else [b.pin.source or b.pin.label] + [e.name for e in b.elements],
                 "colour": led.colour}
        if b.current_A:
            entry["current_A"] = low_nominal_high(b.current_A[led.name], n)
            entry["forward_V"] = low_nominal_high(b.forward_V[led.name], n)
        else:
            entry["current_A"] = None
            entry["forward_V"] = None
        entry["nets"] = b.nets
        if len(b.leds) > 1:
            entry["string"] = [l.name for l in b.leds]
        if b.note:
            entry["note"] = b.note
        out.append(entry)
    return out


def _pump_json(p, design: Design) -> dict:
    n = design.corners.nominal
    entry = {"id": p.id, "topology": p.topology, "stages": p.stages,
             "elements": [e.name for e in p.elements], "output_net": p.output_net,
             "pins": p.pins}
    r = p.result
    if r is None:
        entry["note"] = (p.region.note if p.region is not None and p.region.note else
                         "not solved: see the branch's note")
        return entry
    entry["peak_V"] = low_nominal_high(r.peak_V, n)
    entry["average_V"] = low_nominal_high(r.average_V, n)
    entry["ripple_V"] = low_nominal_high(r.ripple_V, n)
    led = p.region.leds[0]
    entry["led"] = led.name
    entry["led_current_A"] = low_nominal_high(r.load_average_A, n)
    entry["led_peak_A"] = low_nominal_high(r.load_peak_A, n)
    entry["time_to_visible_s"] = low_nominal_high(r.time_to_visible_s, n)
    entry["pin_currents"] = {label: {"high_phase_peak_A": low_nominal_high(r.pin_high_peak_A[label], n),
                                     "low_phase_peak_A": low_nominal_high(r.pin_low_peak_A[label], n),
                                     "startup_surge_A": low_nominal_high(r.startup_surge_A[label], n)}
                             for label in p.pins if label in r.pin_high_peak_A}
    return entry


def _cautions(design: Design, findings: list[Finding]) -> list[str]:
    out = [GENERAL_CAUTION]
    if any(s.lithium for s in design.supplies.values()):
        out.append(CAUTIONS["lithium"])
    if any(f.rule == "flicker" for f in findings) or any(
            p.drive == "toggle" and p.frequency_Hz and 3 <= p.frequency_Hz <= 60 for p in design.pins.values()):
        out.append(CAUTIONS["flashing"])
    if any(l.eye_safety for l in design.leds.values()):
        out.append(CAUTIONS["eye"])
    if any(max(abs(s.low_V), abs(s.high_V)) > SELV_DC_V for s in design.supplies.values()):
        out.append(CAUTIONS["mains"])
    return out


def run_check(paths: list[str], config: str | None, rule_folders: list[str]) -> tuple[dict, dict, list[LoadedRule]]:
    """The report dict (the contract's shape), the sources for quoting, and the rules."""
    files = find_netlists(paths)
    rules, failures = load_rules([Path(f) for f in rule_folders])
    errors: list[InputError] = []
    results: list[FileResult] = []
    for path in files:
        try:
            results.append(check_file(path, config, rules))
        except InputErrors as many:
            errors.extend(many.errors)
        except InputError as one:
            errors.append(one)
    if errors:
        raise InputErrors(errors)
    multiple = len(results) > 1
    findings, assumptions, cautions, branches, pumps, inputs = [], [], [], [], [], []
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
                    entry = {"path": r.path, **entry}
                branches.append(entry)
        pumps.extend(r.pumps)
        findings.extend(_finding_json(f) for f in r.findings)
        sources.update(r.sources)
    for failure in failures:
        findings.append({"rule": "house-rule-failed", "severity": "error",
                         "message": f"house rule {failure.path} could not be loaded: {failure.message}",
                         "location": {"path": failure.path, "line": failure.line, "column": 1},
                         "elements": [], "nets": [], "corner": None, "values": {},
                         "fix": "fix the rule module; the other rules ran", "caution": ""})
    findings.sort(key=lambda f: (f["location"]["path"], f["location"]["line"],
                                 f["location"]["column"], f["rule"], f["message"]))
    summary = {s: sum(1 for f in findings if f["severity"] == s) for s in SEVERITIES}
    report = {"schema": "drc-report/1", "tool": {"name": "drc", "version": __version__},
              "inputs": inputs, "assumptions": assumptions, "findings": findings,
              "branches": branches, "pumps": pumps, "cautions": cautions, "summary": summary}
    return report, sources, rules


def _finding_json(f: Finding) -> dict:
    return {"rule": f.rule, "severity": f.severity, "message": f.message,
            "location": {"path": f.location.path, "line": f.location.line, "column": f.location.column},
            "elements": list(f.elements), "nets": list(f.nets), "corner": f.corner,
            "values": {k: (float(v) if isinstance(v, (int, float)) or hasattr(v, "item") else v)
                       for k, v in f.values.items()},
            "fix": f.fix, "caution": f.caution}


def rule_metadata(rules: list[LoadedRule]) -> list[dict]:
    return [{"id": r.id, "severity": r.rule.severity, "summary": r.rule.summary, "help": r.help,
             "sources": list(r.rule.sources), "origin": r.origin} for r in rules]


def closest_rule(name: str, rules: list[LoadedRule]) -> str:
    close = difflib.get_close_matches(name.lower(), [r.id for r in rules], n=1)
    return f"; did you mean '{close[0]}'?" if close else ""
