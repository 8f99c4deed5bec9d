"""The JSON report: fingerprints, summary counts, byte-stable text in the contract's key order."""

from __future__ import annotations

import hashlib
import json
import math
import posixpath
from typing import Any

SEVERITIES = ("error", "warning", "note")
# Rank of each severity and of each --fail-on threshold; "never" is above everything.
SEVERITY_RANK = {"note": 1, "warning": 2, "error": 3}
FAIL_ON_RANK = {"note": 1, "warning": 2, "error": 3, "never": 4}

# Key order of each object the contract shows; keys it does not name follow, sorted.
_TOP_KEYS = ("schema", "tool", "inputs", "assumptions", "findings", "branches", "pumps",
             "cautions", "summary")
_TOOL_KEYS = ("name", "version")
_INPUT_KEYS = ("path", "elements", "nets", "config")
_FINDING_KEYS = ("rule", "severity", "message", "location", "elements", "nets", "corner",
                 "values", "fix", "caution", "fingerprint", "waiver", "waiver_expired",
                 "baseline")
_LOCATION_KEYS = ("path", "line", "column")
_WAIVER_KEYS = ("reason", "source", "expires", "at")
_BRANCH_KEYS = ("led", "drive", "source", "elements", "current_A", "forward_V")
_PUMP_KEYS = ("id", "topology", "stages", "elements", "output_net", "peak_V", "average_V")
_SPREAD_KEYS = ("low", "nominal", "high")
_SUMMARY_KEYS = ("error", "warning", "note", "waived", "known")


def fingerprint(finding: dict) -> str:
    """A stable id for a finding: the same rule on the same parts in the same file.

    It hashes the rule, the location's path and the sorted lower-case element and net names,
    and leaves out line, column and message, so moving lines or a changed number keeps it.
    """
    location = finding.get("location") or {}
    path = str(location.get("path", "")).replace("\\", "/")
    if path:
        path = posixpath.normpath(path)       # "./a/b.cir" and "a/b.cir" are one file
    key = [
        str(finding.get("rule", "")),
        path,
        sorted(str(name).lower() for name in finding.get("elements") or ()),
        sorted(str(name).lower() for name in finding.get("nets") or ()),
    ]
    # JSON of a list keeps field boundaries unambiguous ("a","bc" differs from "ab","c").
    text = json.dumps(key, ensure_ascii=True, separators=(",", ":"))
    return hashlib.sha256(text.encode("utf-8")).hexdigest()[:32]


def is_waived(finding: dict) -> bool:
    """True when the finding carries a waiver."""
    return bool(finding.get("waiver"))


def is_known(finding: dict) -> bool:
    """True when a baseline holds the finding (reported, but it does not fail the run)."""
    return finding.get("baseline") == "known"


def is_failing(finding: dict, fail_on: str) -> bool:
    """True when an unwaived finding, not in the baseline, is at or above --fail-on."""
    if is_waived(finding) or is_known(finding):
        return False
    return SEVERITY_RANK.get(finding.get("severity"), 0) >= FAIL_ON_RANK[fail_on]


def check_fail_on(fail_on: str) -> str:
    """The threshold itself, or an InputError naming the allowed ones."""
    if fail_on not in FAIL_ON_RANK:
        from drc.errors import InputError

        raise InputError(None, f"unknown --fail-on level {fail_on!r}: "
                               f"use one of {', '.join(FAIL_ON_RANK)}")
    return fail_on


def count_findings(findings: list[dict]) -> dict:
    """Unwaived findings per severity, and the waived ones apart; with a baseline, the known
    ones apart too."""
    counts = {severity: 0 for severity in SEVERITIES}
    counts["waived"] = 0
    if any("baseline" in finding for finding in findings):
        counts["known"] = 0
    for finding in findings:
        if is_waived(finding):
            counts["waived"] += 1
        elif is_known(finding):
            counts["known"] += 1
        elif finding.get("severity") in counts:
            counts[finding["severity"]] += 1
    return counts


def prepare(report: dict) -> dict:
    """A copy of the report with a fingerprint on every finding and the summary recounted.

    The summary is derived from the findings, so every format agrees with the findings it
    lists; keys of the given summary other than the four counts are kept.
    """
    findings = []
    for finding in report.get("findings") or ():
        finding = dict(finding)
        finding.setdefault("fingerprint", fingerprint(finding))
        findings.append(finding)
    prepared = dict(report)
    prepared["findings"] = findings
    summary = dict(report.get("summary") or {})
    summary.update(count_findings(findings))
    prepared["summary"] = summary
    return prepared


def render_json(report: dict) -> str:
    """The report as JSON text: contract key order, indent 2, trailing newline, byte-stable."""
    ordered = _ordered(prepare(report), _TOP_KEYS, _top_children)
    # indented for a person up to a few thousand entries; past that, Python's C encoder
    # (which only writes unindented JSON) keeps a whole board's report fast
    size = len(ordered.get("findings") or ()) + len(ordered.get("branches") or ())
    if size <= LARGE_REPORT:
        return json.dumps(ordered, indent=2, ensure_ascii=False, allow_nan=False) + "\n"
    return json.dumps(ordered, ensure_ascii=False, allow_nan=False, separators=(",", ":")) + "\n"


LARGE_REPORT = 5000


def plain(value: Any) -> Any:
    """A value as plain JSON data: numpy scalars to Python numbers, tuples to lists,
    non-finite floats to null (JSON has no NaN), dicts of unnamed keys sorted."""
    if isinstance(value, dict):
        return {str(key): plain(value[key]) for key in sorted(value, key=str)}
    if isinstance(value, (list, tuple)):
        return [plain(item) for item in value]
    if isinstance(value, bool) or value is None or isinstance(value, str):
        return value
    if isinstance(value, int):
        return int(value)
    if isinstance(value, float):
        return float(value) if math.isfinite(value) else None
    # numpy scalars and arrays, without importing numpy here
    if hasattr(value, "tolist"):
        return plain(value.tolist())
    if hasattr(value, "item"):
        return plain(value.item())
    return str(value)


def _ordered(obj: Any, keys: tuple[str, ...], children=None) -> Any:
    """A dict with the named keys first, in order, then the others sorted; values made plain."""
    if not isinstance(obj, dict):
        return plain(obj)
    children = children or (lambda key: None)
    out = {}
    rest = sorted((key for key in obj if key not in keys), key=str)
    for key in [k for k in keys if k in obj] + rest:
        shape = children(key)
        value = obj[key]
        if shape is None:
            out[str(key)] = plain(value)
        elif shape[0] == "list":
            out[str(key)] = [_ordered(item, shape[1], shape[2]) for item in value or ()]
        else:
            out[str(key)] = _ordered(value, shape[1], shape[2])
    return out


def _top_children(key: str):
    return {
        "tool": ("obj", _TOOL_KEYS, None),
        "inputs": ("list", _INPUT_KEYS, None),
        "findings": ("list", _FINDING_KEYS, _finding_children),
        "branches": ("list", _BRANCH_KEYS, _spread_children),
        "pumps": ("list", _PUMP_KEYS, _spread_children),
        "summary": ("obj", _SUMMARY_KEYS, None),
    }.get(key)


def _finding_children(key: str):
    return {
        "location": ("obj", _LOCATION_KEYS, None),
        "waiver": ("obj", _WAIVER_KEYS, None),
        "waiver_expired": ("obj", _WAIVER_KEYS, None),
    }.get(key)


def _spread_children(key: str):
    if key.endswith(("_V", "_A", "_s", "_ohm", "_F", "_Hz", "_C")):
        return ("obj", _SPREAD_KEYS, None)
    return None
