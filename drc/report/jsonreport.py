"""The JSON report: fingerprints, summary counts, byte-stable text in the contract's key order."""

from __future__ import annotations

import functools
import hashlib
import json
import math
import posixpath
from typing import Any

import orjson

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
BRANCH_KEYS = ("led", "drive", "source", "elements", "current_A", "forward_V")
PUMP_KEYS = ("id", "topology", "stages", "elements", "output_net", "peak_V", "average_V")
_SPREAD_KEYS = ("low", "nominal", "high")
_SUMMARY_KEYS = ("error", "warning", "note", "waived", "known")


def fingerprint(finding: dict) -> str:
    """A stable id for a finding: the same rule on the same parts in the same file.

    It hashes the rule, the location's path and the sorted lower-case element and net names,
    and leaves out line, column and message, so moving lines or a changed number keeps it.
    """
    location = finding.get("location") or {}
    key = [
        str(finding.get("rule", "")),
        _fingerprint_path(str(location.get("path", ""))),
        sorted([str(name).lower() for name in finding.get("elements") or ()]),
        sorted([str(name).lower() for name in finding.get("nets") or ()]),
    ]
    # JSON of a list keeps field boundaries unambiguous ("a","bc" differs from "ab","c").
    text = _key_json(key)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()[:32]


_ascii_str = json.encoder.encode_basestring_ascii     # a str as ensure_ascii=True writes it


def _key_json(key: list) -> str:
    """json.dumps(key, ensure_ascii=True, separators=(",", ":")) for the fingerprint's key (two
    strings, then two lists of strings), written directly: the encoder json.dumps sets up
    for each call cost more than the writing, once per finding."""
    rule, path, elements, nets = key
    return (f"[{_ascii_str(rule)},{_ascii_str(path)},[{','.join(map(_ascii_str, elements))}],"
            f"[{','.join(map(_ascii_str, nets))}]]")


@functools.lru_cache(maxsize=1024)
def _fingerprint_path(path: str) -> str:
    """The path as the fingerprint holds it: forward slashes, and "./a/b.cir" and "a/b.cir"
    as one file. A pure function of the text, remembered because a report has many findings
    in few files."""
    path = path.replace("\\", "/")
    return posixpath.normpath(path) if path else path


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


class FinalEntries(list):
    """A list of report entries (findings, branches or pumps) that their maker, drc.engine,
    built in their final JSON form: the contract's keys in order, then the others sorted,
    every value plain (what _ordered and plain() would give back unchanged).

    render_json writes such a list as it is, without checking each entry (_is_final): at a
    hundred thousand elements the check costs about a third of the JSON report. The promise
    is held by tests/test_speed_report.py, which checks every entry the engine marks, on the
    samples and on a generated board, so an edit that breaks it fails there. A plain list
    (a report made by hand or read back from JSON) is checked entry by entry as before.
    """

    __slots__ = ()


def prepare(report: dict) -> dict:
    """A copy of the report with a fingerprint on every finding and the summary recounted.

    The summary is derived from the findings, so every format agrees with the findings it
    lists; keys of the given summary other than the four counts are kept. Findings marked
    FinalEntries stay marked when none needed a fingerprint added (a copy of a final entry
    is final; one with a fingerprint appended may not be, if it has a waiver).
    """
    findings = []
    added = False
    for finding in report.get("findings") or ():
        finding = dict(finding)
        if "fingerprint" not in finding:        # the engine's findings carry theirs
            finding["fingerprint"] = fingerprint(finding)
            added = True
        findings.append(finding)
    if type(report.get("findings")) is FinalEntries and not added:
        findings = FinalEntries(findings)
    prepared = dict(report)
    prepared["findings"] = findings
    summary = dict(report.get("summary") or {})
    summary.update(count_findings(findings))
    prepared["summary"] = summary
    return prepared


def render_json(report: dict) -> str:
    """The report as JSON text: contract key order, indent 2, trailing newline, byte-stable."""
    return render_json_bytes(report).decode("utf-8")


def render_json_bytes(report: dict) -> bytes:
    """render_json's text as UTF-8 bytes, as drc writes it (a board's report is tens of
    megabytes: making a str of it and encoding that again costs more than writing it)."""
    prepared = prepare(report)
    try:
        return _json_bytes(_ordered(prepared, _TOP_KEYS, _top_children, reuse=True))
    except ValueError:
        # a NaN or infinity in an entry taken as it was, where the standard library writes
        # it (see json_bytes): the full walk writes it as null, as plain() does everywhere
        return _json_bytes(_ordered(prepared, _TOP_KEYS, _top_children, reuse=False))


LARGE_REPORT = 5000


def _json_bytes(ordered: dict) -> bytes:
    # indented for a person up to a few thousand entries; past that, compact: a board's
    # report is then a third smaller and written in half the time
    size = len(ordered.get("findings") or ()) + len(ordered.get("branches") or ())
    return json_bytes(ordered, indent=size <= LARGE_REPORT)


_ORJSON_INDENT = orjson.OPT_INDENT_2 | orjson.OPT_APPEND_NEWLINE
_ORJSON_COMPACT = orjson.OPT_APPEND_NEWLINE


def json_bytes(value: Any, indent: bool = True) -> bytes:
    """value as JSON text in UTF-8 with a trailing newline: indented by two spaces (the
    layout of json.dumps(indent=2)), or compact (separators "," and ":"); strings as they
    are (ensure_ascii=False), dicts in their own order.

    orjson writes it, some ten times as fast as the standard library's encoder on a board's
    report (measured: 0.14 s against 1.25 s for 32 MB). It writes each float as the
    shortest text that reads back as the same number, as repr() does, but without an
    exponent down to 1e-5 and with no "+" or leading zero in one ("0.00001567988530824327"
    for repr's "1.567988530824327e-05", "1e16" for "1e+16"): the same numbers to any JSON
    reader. NaN and the infinities it writes as null, as plain() makes them.

    What orjson refuses (an int past 64 bits, a key that is not a str, a numpy number, a
    value nested past 255 levels) is written by the standard library's rules instead, as
    before (indented_json, or json.dumps): a NaN there raises ValueError.
    """
    try:
        return orjson.dumps(value, option=_ORJSON_INDENT if indent else _ORJSON_COMPACT)
    except TypeError:               # orjson.JSONEncodeError is a TypeError
        pass
    if indent:
        text = indented_json(value)
    else:
        # check_circular=False: a value holding itself (never the engine's report) ends in
        # RecursionError instead of ValueError; it saves a lookup per list and dict
        text = json.dumps(value, ensure_ascii=False, allow_nan=False, check_circular=False,
                          separators=(",", ":"))
    return (text + "\n").encode("utf-8")


def indented_json(value: Any) -> str:
    """json.dumps(value, indent=2, ensure_ascii=False, allow_nan=False), the same text made
    several times faster for a big report (the standard library writes indented JSON in
    Python, through a generator per nesting level).

    It follows json's encoder rule for rule: what each type is written as, which keys are
    allowed (and how non-str ones are written), the separators "," and ": ", and "[]" and
    "{}" for empty ones; NaN and infinities raise ValueError, other types TypeError. The one
    difference: a value that contains itself ends in RecursionError, not ValueError.
    """
    out: list[str] = []
    _write_indented(value, "\n", out)
    return "".join(out)


def _write_indented(value: Any, pad: str, out: list[str]) -> None:
    """value appended to out as indented JSON; pad is a newline and the current indent."""
    if isinstance(value, str):
        out.append(_encode_str(value))
    elif value is None:
        out.append("null")
    elif value is True:
        out.append("true")
    elif value is False:
        out.append("false")
    elif isinstance(value, int):
        out.append(int.__repr__(value))
    elif isinstance(value, float):
        out.append(_float_text(value))
    elif isinstance(value, (list, tuple)):
        if not value:
            out.append("[]")
            return
        inner = pad + "  "
        lead = "[" + inner
        for item in value:
            _write_item(lead, item, inner, out)
            lead = "," + inner
        out.append(pad + "]")
    elif isinstance(value, dict):
        if not value:
            out.append("{}")
            return
        inner = pad + "  "
        lead = "{" + inner
        for key, item in value.items():
            _write_item(lead + _encode_str(_key_text(key)) + ": ", item, inner, out)
            lead = "," + inner
        out.append(pad + "}")
    else:
        raise TypeError(f"Object of type {value.__class__.__name__} is not JSON serializable")


def _write_item(head: str, item: Any, pad: str, out: list[str]) -> None:
    """One member of a list or dict after its head (its comma or "key": ): the common leaves
    on the same line, anything else through _write_indented at `pad`."""
    kind = type(item)
    if kind is str:
        out.append(head + _encode_str(item))
    elif kind is int:
        out.append(head + int.__repr__(item))
    else:
        out.append(head)
        _write_indented(item, pad, out)


_encode_str = json.encoder.encode_basestring      # what ensure_ascii=False writes strings with


def _float_text(value: float) -> str:
    if value != value or value in (math.inf, -math.inf):
        raise ValueError("Out of range float values are not JSON compliant: " + repr(value))
    return float.__repr__(value)


def _key_text(key: Any) -> str:
    """A dict key as json writes it: str as it is; float, bool, None and int as JSON text."""
    if isinstance(key, str):
        return key
    if isinstance(key, float):
        return _float_text(key)
    if key is True:
        return "true"
    if key is False:
        return "false"
    if key is None:
        return "null"
    if isinstance(key, int):
        return int.__repr__(key)
    raise TypeError(f"keys must be str, int, float, bool or None, not {key.__class__.__name__}")


def plain(value: Any) -> Any:
    """A value as plain JSON data: numpy scalars to Python numbers, tuples to lists,
    non-finite floats to null (JSON has no NaN), dicts of unnamed keys sorted."""
    kind = type(value)
    if kind is str or kind is int or kind is bool or value is None:
        return value                    # the common leaves first, as they are
    if kind is float:
        return value if math.isfinite(value) else None
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


def _ordered(obj: Any, keys: tuple[str, ...], children=None, reuse: bool = False) -> Any:
    """A dict with the named keys first, in order, then the others sorted; values made plain.

    With reuse, an entry of a list (a finding, a branch, a pump) that is already in that
    form (_is_final) is kept as it is instead of being rebuilt: the engine makes its entries
    so, and walking some hundred thousand values again is most of a big report's time. A
    FinalEntries list is kept whole, unchecked (see FinalEntries).
    """
    if not isinstance(obj, dict):
        return plain(obj)
    children = children or _no_children
    out = {}
    rest = sorted((key for key in obj if key not in keys), key=str)
    for key in [k for k in keys if k in obj] + rest:
        shape = children(key)
        value = obj[key]
        if shape is None:
            out[str(key)] = plain(value)
        elif shape[0] == "list":
            if reuse and type(value) is FinalEntries:
                out[str(key)] = value           # made final by the engine: as it is
                continue
            out[str(key)] = [item if reuse and _is_final(item, shape[1], shape[2])
                             else _ordered(item, shape[1], shape[2])
                             for item in value or ()]
        else:
            out[str(key)] = _ordered(value, shape[1], shape[2])
    return out


def _no_children(key: str):
    return None


# The types plain() gives back as they are (a float only when finite).
_LEAF_TYPES = frozenset((str, int, float, bool, type(None)))
_STR_ONLY = frozenset((str,))


def _is_final(obj: Any, keys: tuple[str, ...], children=None) -> bool:
    """True when _ordered(obj, keys, children) would give obj itself, so it can be written
    as it is: a dict with str keys in the report's order, named children final in turn, and
    every other value plain (_is_plain).

    Only exact built-in types pass (a numpy number, a tuple or a str subclass takes the full
    walk). Non-finite floats are not looked for here: json.dumps(allow_nan=False) refuses
    them, and render_json then takes the full walk.
    """
    if type(obj) is not dict or not _STR_ONLY.issuperset(map(type, obj)):
        return False
    shapes = _shapes(tuple(obj), keys, children)
    if shapes is None:                       # keys out of order
        return False
    for value, shape in zip(obj.values(), shapes):
        kind = type(value)
        if shape is None:
            # inline for the common values: a leaf, or a list of leaves (names, nets)
            if kind in _LEAF_TYPES or (kind is list and _LEAF_TYPES.issuperset(map(type, value))):
                continue
            if not _is_plain(value):
                return False
        elif shape[0] == "list":
            if kind is not list or not all(_is_final(item, shape[1], shape[2])
                                           for item in value):
                return False
        elif kind is dict:
            if not (_is_final_flat(value, shape[1]) if shape[2] is None
                    else _is_final(value, shape[1], shape[2])):
                return False
        elif kind not in _LEAF_TYPES and not _is_plain(value):
            return False
    return True


def _is_final_flat(obj: dict, keys: tuple[str, ...]) -> bool:
    """_is_final for a dict without named children (a spread, a location): its keys in
    order, its values plain."""
    present = tuple(obj)
    if not _STR_ONLY.issuperset(map(type, present)) or (
            present != keys and _shapes(present, keys, None) is None):
        return False
    values = obj.values()
    return _LEAF_TYPES.issuperset(map(type, values)) or all(map(_is_plain, values))


@functools.lru_cache(maxsize=256)
def _shapes(present: tuple[str, ...], keys: tuple[str, ...], children) -> tuple | None:
    """The shape children() gives each key present, in order; None when the keys are not in
    the order _ordered gives (the named keys first, in order, then the others sorted).

    A pure function of its arguments (children is one of this module's fixed functions of a
    key), and a report has only a few shapes of entry, so it is remembered.
    """
    rest = sorted(key for key in present if key not in keys)
    if present != tuple(key for key in keys if key in present) + tuple(rest):
        return None
    return tuple(children(key) if children else None for key in present)


def _is_plain(value: Any) -> bool:
    """True when plain(value) would give value itself (a NaN aside: see _is_final): exact
    str, int, float, bool or None, or lists of them, or dicts with sorted str keys."""
    kind = type(value)
    if kind is dict:
        if not _STR_ONLY.issuperset(map(type, value)) or list(value) != sorted(value):
            return False
        items = value.values()
    elif kind is list:
        items = value
    else:
        return kind in _LEAF_TYPES
    return _LEAF_TYPES.issuperset(map(type, items)) or all(map(_is_plain, items))


def in_key_order(entry: dict, keys: tuple[str, ...]) -> dict:
    """The entry's keys in the report's order (the named keys first, in order, then the
    others sorted), its values as they are: for a key added to an entry already in final
    form, such as "path" on a branch of a report of several files."""
    rest = sorted(key for key in entry if key not in keys)
    return {key: entry[key] for key in [k for k in keys if k in entry] + rest}


def _top_children(key: str):
    return _TOP_CHILDREN.get(key)


def _spread_children(key: str):
    if key.endswith(_SPREAD_SUFFIXES):
        return ("obj", _SPREAD_KEYS, None)
    return None


_SPREAD_SUFFIXES = ("_V", "_A", "_s", "_ohm", "_F", "_Hz", "_C")
_FINDING_CHILDREN = {
    "location": ("obj", _LOCATION_KEYS, None),
    "waiver": ("obj", _WAIVER_KEYS, None),
    "waiver_expired": ("obj", _WAIVER_KEYS, None),
}
_finding_children = _FINDING_CHILDREN.get
_TOP_CHILDREN = {
    "tool": ("obj", _TOOL_KEYS, None),
    "inputs": ("list", _INPUT_KEYS, None),
    "findings": ("list", _FINDING_KEYS, _finding_children),
    "branches": ("list", BRANCH_KEYS, _spread_children),
    "pumps": ("list", PUMP_KEYS, _spread_children),
    "summary": ("obj", _SUMMARY_KEYS, None),
}
