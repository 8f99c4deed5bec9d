"""One check from paths to a report: find the netlists, and for each read its context,
expand it, analyse it and run every rule; then gather the report the formatters print."""

from __future__ import annotations

import difflib
import math
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from drc import __version__
from drc.advice import EYE_CAUTION, LITHIUM_CAUTION
from drc.analysis import Design, analyse, low_nominal_high
from drc.api import SEVERITIES, Finding
from drc.context import Context, load_context
from drc.design import FlatDesign
from drc.errors import InputError, InputErrors, Location
from drc.expand import Limits, expand
from drc.registry import LoadedRule, load_rules
from drc.report.jsonreport import (BRANCH_KEYS, PUMP_KEYS, FinalEntries, fingerprint,
                                   in_key_order, plain)
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


def read_design(path: str, config: str | None) -> tuple[Context, FlatDesign]:
    """The design context for `path` and the netlist read, expanded and flattened under
    the context's limits: the part of a check before its analysis."""
    context = load_context(Path(path), Path(config) if config else None, rule_ids=None)
    limits = Limits(max_elements=context.limits.max_elements,
                    max_file_bytes=context.limits.max_file_bytes,
                    include_folders=tuple(context.limits.include_folders))
    return context, expand(path, limits)


def check_file(path: str, config: str | None, rules: list[LoadedRule]) -> FileResult:
    """Everything about one netlist; InputError(s) when it cannot be read."""
    context, flat = read_design(path, config)
    design = analyse(flat, context)
    findings, ran = run_rules(design, rules, context)
    cautions = _cautions(design, findings)
    spreads: list = []                 # (entry, key, per-corner array), filled in at once
    branches = [_branch_json(b, design, spreads) for b in design.branches]
    pumps = [_pump_json(p, design, spreads) for p in design.pumps]
    _fill_spreads(spreads, design.corners.nominal)
    return FileResult(path, design, findings, _inputs(design, context), design.assumptions,
                      cautions, branches, pumps, flat.sources, ran)


def _inputs(design: Design, context: Context) -> dict:
    entry = {"path": design.path, "elements": len(design.elements), "nets": len(design.nets)}
    if context.files:
        entry["config"] = context.files[-1] if len(context.files) == 1 else context.files
    if len(design.flat.files) > 1:
        entry["includes"] = design.flat.files[1:]
    return entry


def _branch_json(b, design: Design, spreads: list | None = None) -> list[dict]:
    """The report's entries for one branch, one per LED, made in their final JSON form: the
    contract's keys in order, then the others sorted, every value plain (see
    drc.report.jsonreport.FinalEntries), so the JSON report writes them as they are.

    A spread's key is set to None here, in its place in the key order, and (entry, key,
    array) appended to spreads for _fill_spreads to fill in; with no spreads list given,
    they are filled in before it returns."""
    if spreads is None:
        own: list = []
        out = _branch_json(b, design, own)
        _fill_spreads(own, design.corners.nominal)
        return out
    elements = [e.name for e in b.elements]
    if b.drive == "pin" and b.pin is not None:
        elements = [b.pin.source or b.pin.label] + elements
    string = [l.name for l in b.leds] if len(b.leds) > 1 else None
    out = []
    for led in b.leds:
        entry = {"led": led.name, "drive": b.drive, "source": b.source,
                 "elements": list(elements)}
        entry["current_A"] = None
        entry["forward_V"] = None
        if b.current_A:
            spreads.append((entry, "current_A", b.current_A[led.name]))
            spreads.append((entry, "forward_V", b.forward_V[led.name]))
        entry["colour"] = led.colour           # the rest in sorted order
        entry["nets"] = list(b.nets)
        if b.note:
            entry["note"] = b.note
        if string is not None:
            entry["string"] = list(string)
        out.append(entry)
    return out


def _spread(values, nominal: int) -> dict:
    """analysis.low_nominal_high of a per-corner array, with a NaN or infinity as None
    (JSON's null), as the report writes it."""
    return {key: _finite(x) for key, x in low_nominal_high(values, nominal).items()}


def _put_spread(entry: dict, key: str, low, middle, high) -> None:
    """entry[key] = the spread, in the contract's key order, or sorted where the entry holds
    SORTED_SPREAD there (as plain() writes a dict of unnamed keys)."""
    if entry.get(key) is SORTED_SPREAD:
        entry[key] = {"high": high, "low": low, "nominal": middle}
    else:
        entry[key] = {"low": low, "nominal": middle, "high": high}


def _finite(x: float) -> float | None:
    return x if math.isfinite(x) else None


def _fill_spreads(spreads: list, nominal: int) -> None:
    """entry[key] = _spread(values, nominal) for each (entry, key, values) of spreads, the
    same numbers, with one numpy reduction for a block of arrays of one length instead of
    two per array: a reduction costs about 3 µs of call overhead, and a board of 100k
    elements has some 70k spreads. The blocks are small (SPREAD_BLOCK arrays) so that the
    copy numpy reduces stays in the processor's cache: with hundreds of corners, one table
    of every array would be hundreds of megabytes.

    An entry whose key holds SORTED_SPREAD (pin_currents' spreads, as plain() writes
    analysis.low_nominal_high's dict) gets the same numbers with the keys sorted.

    A minimum or maximum is one of the row's values, so it is the same whichever order
    numpy compares them in; but for 0.0 and -0.0, which compare equal, which one comes back
    depends on that order, so a zero result is taken again from the array alone, as
    _spread takes it. Anything but a 1-D float64 array long enough for the nominal index
    goes through _spread itself (which raises for it as it always did).

    Identical cells share their solutions' arrays (a board of 100k elements: some 80k
    spreads of about a thousand arrays), so each distinct array object is reduced once;
    every entry still gets a dict of its own. The list holds every array while this runs,
    so no two of them can share an id."""
    rows: dict[int, list] = {}
    done: dict[int, tuple] = {}           # id(array) -> (low, nominal, high)
    waiting: list = []                    # items whose array is reduced for another item
    for item in spreads:
        values = item[2]
        if (type(values) is np.ndarray and values.ndim == 1 and values.dtype == np.float64
                and nominal < len(values)):
            if id(values) in done:
                waiting.append(item)
                continue
            done[id(values)] = None
            rows.setdefault(len(values), []).append(item)
        else:
            spread = _spread(values, nominal)
            _put_spread(item[0], item[1], spread["low"], spread["nominal"], spread["high"])
    for same in rows.values():
        for start in range(0, len(same), SPREAD_BLOCK):
            items = same[start:start + SPREAD_BLOCK]
            table = np.array([values for _, _, values in items])
            lows, highs, nominals = table.min(axis=1), table.max(axis=1), table[:, nominal]
            finite = bool(np.isfinite(lows).all() and np.isfinite(highs).all()
                          and np.isfinite(nominals).all())
            for (entry, key, values), low, middle, high in zip(
                    items, lows.tolist(), nominals.tolist(), highs.tolist()):
                if low == 0.0:
                    low = float(values.min())
                if high == 0.0:
                    high = float(values.max())
                if not finite:
                    low, middle, high = _finite(low), _finite(middle), _finite(high)
                done[id(values)] = (low, middle, high)
                _put_spread(entry, key, low, middle, high)
    for entry, key, values in waiting:
        _put_spread(entry, key, *done[id(values)])


SPREAD_BLOCK = 64       # arrays per numpy reduction in _fill_spreads (measured: 16 to 128 alike)
# The placeholder _pump_json leaves for a spread _fill_spreads writes with its keys sorted.
SORTED_SPREAD = object()


def _pump_json(p, design: Design, spreads: list | None = None) -> dict:
    """The report's entry for one pump, in its final JSON form (as _branch_json's), its
    spreads left to _fill_spreads (as _branch_json's)."""
    if spreads is None:
        own: list = []
        entry = _pump_json(p, design, own)
        _fill_spreads(own, design.corners.nominal)
        return entry
    entry = {"id": p.id, "topology": p.topology, "stages": p.stages,
             "elements": [e.name for e in p.elements], "output_net": p.output_net}
    r = p.result
    if r is None:
        entry["note"] = (p.region.note if p.region is not None and p.region.note else
                         "not solved: see the branch's note")
        entry["pins"] = plain(p.pins)
        return entry
    for key, values in (("peak_V", r.peak_V), ("average_V", r.average_V)):
        entry[key] = None
        spreads.append((entry, key, values))
    led = p.region.leds[0]                  # the rest in sorted order
    entry["led"] = led.name
    for key, values in (("led_current_A", r.load_average_A), ("led_peak_A", r.load_peak_A)):
        entry[key] = None
        spreads.append((entry, key, values))
    # not a spread key: every dict inside is sorted, as plain() sorts it, the spreads too
    # ({"high", "low", "nominal"}: SORTED_SPREAD)
    currents = {}
    for label in sorted((label for label in p.pins if label in r.pin_high_peak_A), key=str):
        phases = currents[str(label)] = {}
        for key, table in (("high_phase_peak_A", r.pin_high_peak_A),
                           ("low_phase_peak_A", r.pin_low_peak_A),
                           ("startup_surge_A", r.startup_surge_A)):
            phases[key] = SORTED_SPREAD
            spreads.append((phases, key, table[label]))
    entry["pin_currents"] = currents
    entry["pins"] = plain(p.pins)
    for key, values in (("ripple_V", r.ripple_V), ("time_to_visible_s", r.time_to_visible_s)):
        entry[key] = None
        spreads.append((entry, key, values))
    return entry


def _cautions(design: Design, findings: list[Finding]) -> list[str]:
    out = [GENERAL_CAUTION]
    if any(s.lithium for s in design.supplies.values()):
        out.append(CAUTIONS["lithium"])
    # a pin toggling in the band may flash an LED, unless every LED is infrared (unseen)
    seen = any(l.colour != "infrared" for l in design.leds.values())
    if any(f.rule == "flicker" and 3 <= f.values.get("frequency_Hz", 0) <= 60 for f in findings) or seen and any(
            p.drive == "toggle" and p.frequency_Hz and 3 <= p.frequency_Hz <= 60 for p in design.pins.values()):
        out.append(CAUTIONS["flashing"])
    if any(l.eye_safety for l in design.leds.values()):
        out.append(CAUTIONS["eye"])
    if any(max(abs(s.low_V), abs(s.high_V)) > SELV_DC_V for s in design.supplies.values()):
        out.append(CAUTIONS["mains"])
    return out


def run_check(paths: list[str], config: str | None, rule_folders: list[str], *, jobs: int = 1,
              waiver_files: list[str] = (), baseline: str | None = None, progress=None,
              today=None, keep: list | None = None) -> tuple[dict, dict, list[LoadedRule]]:
    """The report dict (the contract's shape), the sources for quoting, and the rules.

    jobs > 1 checks the files in a process pool; the report is the same whatever jobs.
    waiver_files are TOML waiver files; baseline a file written by --write-baseline.
    progress(done, total) is called as files finish. Every input problem (netlists,
    waivers, baseline) raises InputErrors before anything is written.

    keep, a list, is for a caller about to end its process (drc.cli.run): it is left
    holding the last file's whole result, its Design, which is otherwise freed as soon as
    the report's part is taken, object by object (about 0.2 s at 100k elements), where
    the end of the process frees it at once. Earlier files are freed as before.
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
    for outcome in _check_all(files, config, rule_folders, rules, jobs, progress, keep):
        if isinstance(outcome, FileResult):
            results.append(outcome)
        else:
            errors.extend(outcome)
    multiple = len(results) > 1
    # findings, branches and pumps are made in their final JSON form (_finding_json,
    # _branch_json, _pump_json, and the two kinds of finding made below), and marked so
    findings, branches, pumps = FinalEntries(), FinalEntries(), FinalEntries()
    anchors, assumptions, cautions, inputs = [], [], [], []
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


def _check_all(files, config, rule_folders, rules, jobs, progress, keep=None):
    """A FileResult, or a list of InputErrors, per file, in the order of files; keep, if a
    list, left holding the last full result checked here (see run_check)."""
    total = len(files)
    if jobs <= 1 or total <= 1:
        for n, path in enumerate(files, 1):
            try:
                result = check_file(path, config, rules)
                if keep is not None:
                    keep[:] = [result]
                slim = _slim(result)
                del result          # the Design goes now, not when the next file is done
                yield slim
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
    with sorted keys, as the JSON report writes them (see FinalEntries). A house rule may
    put anything in a Finding, so what is not an exact str (or int) already goes through
    plain(), as the report's full walk would take it."""
    values = _plain_floats(f.values)
    if values is None:
        values = plain({k: (float(v) if isinstance(v, (int, float)) or hasattr(v, "item") else v)
                        for k, v in f.values.items()})
    corner = _plain_corner(f.corner) if type(f.corner) is dict else None
    if corner is None:
        corner = plain(f.corner)
    location = f.location
    return {"rule": _leaf(f.rule), "severity": _leaf(f.severity), "message": _leaf(f.message),
            "location": {"path": _leaf(location.path), "line": _leaf(location.line),
                         "column": _leaf(location.column)},
            "elements": _names(f.elements), "nets": _names(f.nets),
            "corner": corner, "values": values, "fix": _leaf(f.fix),
            "caution": _leaf(f.caution)}


def _plain_floats(values) -> dict | None:
    """plain() of a finding's values made floats, for the usual dict of str keys and exact
    floats: the same dict, keys sorted, a NaN or infinity as None; None for anything else
    (which takes the general path)."""
    if type(values) is not dict or not _STR_ONLY.issuperset(map(type, values)):
        return None
    out = {}
    for key in sorted(values):
        value = values[key]
        if type(value) is not float:
            return None
        out[key] = value if math.isfinite(value) else None
    return out


def _plain_corner(corner: dict) -> dict | None:
    """plain(corner) for a corner as drc.advice.corner makes it (str keys; exact str,
    float, int or None values, or such a dict one level down); None for anything else."""
    if not _STR_ONLY.issuperset(map(type, corner)):
        return None
    out = {}
    for key in sorted(corner):
        value = corner[key]
        kind = type(value)
        if kind is float:
            value = value if math.isfinite(value) else None
        elif kind is dict:
            value = _plain_floats(value)
            if value is None:
                return None
        elif not (kind is str or kind is int or value is None):
            return None
        out[key] = value
    return out


def _leaf(value):
    """value as plain() gives it, the common exact str and int passed without a call."""
    kind = type(value)
    return value if kind is str or kind is int else plain(value)


def _names(names) -> list:
    """A list of names as plain() gives it: a copy when all are exact str (the usual)."""
    out = list(names)
    return out if _STR_ONLY.issuperset(map(type, out)) else [_leaf(name) for name in out]


_STR_ONLY = frozenset((str,))


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
