"""Baselines: the findings a project has accepted for now, so CI fails only on new ones.

`--write-baseline FILE` writes the run's unwaived findings as JSON (schema
"drc-baseline/1"): each one's fingerprint, which hashes the rule, the netlist path and
the element and net names but not the line, and a little context for the person reading
the file. `--baseline FILE` marks every finding whose fingerprint is in it as known: it is
reported, marked, and does not fail the run. Each baseline entry accounts for one finding,
so a second copy of the same problem is new.
"""

from __future__ import annotations

import json
import re
from collections import Counter

from drc.errors import InputError, Location

SCHEMA = "drc-baseline/1"
_FINGERPRINT = re.compile(r"[0-9a-f]{16,64}\Z")


def render_baseline(report: dict) -> str:
    """The baseline file's text for a prepared report (fingerprints already on the findings)."""
    entries = []
    for f in report["findings"]:
        if f.get("waiver"):
            continue
        location = f.get("location") or {}
        entries.append({"fingerprint": f["fingerprint"], "rule": f.get("rule"),
                        "severity": f.get("severity"), "path": location.get("path"),
                        "line": location.get("line"), "elements": list(f.get("elements") or ()),
                        "message": f.get("message")})
    data = {"schema": SCHEMA, "tool": dict(report.get("tool") or {}), "findings": entries}
    return json.dumps(data, indent=2, ensure_ascii=False) + "\n"


def load_baseline(path: str) -> Counter:
    """The fingerprints of a baseline file, counted; InputError when it is not a baseline."""
    where = Location(path, 1, 1)
    try:
        with open(path, encoding="utf-8") as stream:
            text = stream.read()
    except OSError as error:
        raise InputError(where, f"cannot read baseline {path}: {error.strerror or error}") from None
    except UnicodeDecodeError:
        raise InputError(where, f"{path} is not a drc baseline: not UTF-8 text") from None
    try:
        data = json.loads(text)
    except json.JSONDecodeError as error:
        raise InputError(Location(path, error.lineno, error.colno),
                         f"{path} is not a drc baseline: not JSON ({error.msg})") from None
    if not isinstance(data, dict) or data.get("schema") != SCHEMA:
        raise InputError(where, f"{path} is not a drc baseline: no \"schema\": \"{SCHEMA}\" "
                                "(write one with --write-baseline)")
    entries = data.get("findings")
    if not isinstance(entries, list):
        raise InputError(where, f"{path} is not a drc baseline: \"findings\" is not a list")
    counts: Counter = Counter()
    for n, entry in enumerate(entries):
        fp = entry.get("fingerprint") if isinstance(entry, dict) else None
        if not isinstance(fp, str) or not _FINGERPRINT.match(fp):
            raise InputError(where, f"{path} is not a drc baseline: finding {n + 1} has no "
                                    "fingerprint")
        counts[fp] += 1
    return counts


def apply_baseline(findings: list[dict], known: Counter) -> int:
    """Mark each unwaived finding "known" or "new" (in place); the number of baseline entries
    that matched nothing (problems fixed since)."""
    left = Counter(known)
    for f in findings:
        if f.get("waiver"):
            continue
        fp = f["fingerprint"]
        if left[fp] > 0:
            left[fp] -= 1
            f["baseline"] = "known"
        else:
            f["baseline"] = "new"
    return sum(left.values())
