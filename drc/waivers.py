"""Waivers: a reviewed decision that a finding is accepted, with the reason, and perhaps an end.

Two places say so:

* in the netlist, a comment on the element's own line or in the comment lines just above it:

      R1 vcell a 4.7k ; drc-waive led-headroom until 2026-06-30: tag is retired by then
      * drc-waive led-reverse, net-floating: test point, probed by hand only
      D1 a 0 LRED

  The words are `drc-waive RULE[, RULE...] [until YYYY-MM-DD]: REASON`. A comment block
  waives the next card below it; an inline comment waives its own card. A finding is waived
  when its location is that card, or when the card is an X line the finding's element came
  through (a waiver on `X2 ...` covers that instance's elements; one on the card inside
  the .subckt covers every instance).

* in a waiver file given with `--waivers FILE` (TOML, repeatable):

      [[waiver]]
      rule = "led-headroom"
      element = "X2.Dled"          # an element path the finding names (or net = "vbat")
      netlist = "boards/*.cir"     # optional: a pattern for the netlist's path or file name
      reason = "a reviewed exception, in words"
      until = 2026-06-30           # optional: a TOML date or "YYYY-MM-DD"

A waiver needs a reason. After its `until` date the finding comes back, with a note saying
that its waiver ran out. A waiver that matches no finding becomes a note of its own
(`waiver-unused`), so stale waivers do not pile up.
"""

from __future__ import annotations

import datetime as _dt
import fnmatch
import re
import tomllib
from dataclasses import dataclass

from drc.errors import InputError, InputErrors, Location

WORD = "drc-waive"
UNUSED_RULE = "waiver-unused"
UNUSED_SUMMARY = "a waiver, in a netlist comment or a waiver file, that matches no finding"
UNUSED_HELP = (
    "What it finds: a waiver, in a `drc-waive` netlist comment or in a waiver file given "
    "with --waivers, that matched no finding of this run.\n\n"
    "Why it matters: a waiver outlives the problem it excused. Left in place it would "
    "silently hide the next finding of the same rule on that part, one nobody reviewed.\n\n"
    "How it is computed: after every rule has run, each waiver is compared with every finding "
    "(rule, and the card or element path it names); a waiver that matched none is reported "
    "at its own line. A waiver past its end date that still matches counts as used: its "
    "finding comes back with a note instead.\n\n"
    "Example: `R1 vcell a 4.7k ; drc-waive led-headroom: tag retired in 2026` after R1 was "
    "changed to 150 ohm and the headroom finding went away.\n\n"
    "Fix: delete the waiver, or correct its rule id or element path.")
HOUSE_FAILED_RULE = "house-rule-failed"
HOUSE_FAILED_SUMMARY = ("a house rule that could not be loaded, raised, or ran past its time "
                        "limit (the other rules still ran)")

_DATE = re.compile(r"\d{4}-\d{2}-\d{2}\Z")
_RULE_ID = re.compile(r"[a-z0-9][a-z0-9-]*\Z")
_INLINE = re.compile(
    r"(?P<rules>[^:]*?)"                         # rule ids, comma separated
    r"(?:\s+until\s+(?P<until>[^\s:]+))?"            # an optional end date
    r"\s*(?::(?P<reason>.*))?\Z", re.IGNORECASE)
_FILE_KEYS = ("rule", "element", "net", "netlist", "reason", "until")


@dataclass
class Waiver:
    rule: str
    reason: str
    until: _dt.date | None
    source: str                     # "inline" or "file"
    at: Location                    # where the waiver is written
    path: str | None = None         # inline: the file of the card it waives
    target: int | None = None       # inline: the card's first line
    element: str | None = None      # file: lower-case element path
    net: str | None = None          # file: lower-case net name
    netlist: str | None = None      # file: a pattern for the netlist path
    used: bool = False

    def describe(self) -> str:
        if self.source == "inline":
            return f"the {WORD} comment for {self.rule}"
        what = f"element {self.element}" if self.element else f"net {self.net}"
        return f"the waiver of {self.rule} for {what}"

    def record(self) -> dict:
        return {"reason": self.reason, "source": self.source,
                "expires": self.until.isoformat() if self.until else None, "at": str(self.at)}


# ---------------------------------------------------------------- inline comments

def _comment(line: str) -> tuple[str, int] | None:
    """The comment part of a netlist line and the 0-based column where it starts."""
    stripped = line.lstrip()
    if not stripped:
        return None
    if stripped[0] in "*;":
        return line, 0
    at = line.find(";")
    return (line[at:], at) if at >= 0 else None


def _is_comment_or_blank(line: str) -> bool:
    s = line.strip()
    return not s or s[0] in "*;"


def _target(lines: list[str], index: int) -> int | None:
    """The 1-based first line of the card a waiver on lines[index] belongs to."""
    if _is_comment_or_blank(lines[index]):
        j = index + 1                     # a comment block: the next card below it
        while j < len(lines) and _is_comment_or_blank(lines[j]):
            j += 1
        if j >= len(lines) or lines[j].lstrip().startswith("+"):
            return None
        return j + 1
    j = index                              # inline: its own card, from a '+' line up to the card
    while j > 0 and (lines[j].lstrip().startswith("+") or _is_comment_or_blank(lines[j])):
        j -= 1
    return j + 1


def mentions_waiver(sources: dict[str, list[str]]) -> bool:
    """True when any line of the files read holds the waiver word (in any case), as
    inline_waivers looks for it: without one, there is no inline waiver to match."""
    return any(WORD in "\n".join(lines).lower() for lines in sources.values())


def inline_waivers(sources: dict[str, list[str]], known_rules: set[str],
                   top_files: set[str] = frozenset()) -> list[Waiver]:
    """Every `drc-waive` comment in the files read; InputErrors for the malformed ones."""
    found: list[Waiver] = []
    errors: list[InputError] = []
    for path in sorted(sources):
        lines = sources[path]
        for index, line in enumerate(lines):
            if index == 0 and path in top_files:
                continue                      # a netlist's first line is its title
            if WORD not in line.lower():
                continue
            part = _comment(line.rstrip("\r\n"))
            if part is None:
                continue
            text, start = part
            at_word = text.lower().find(WORD)
            if at_word < 0:
                continue
            column = start + at_word + 1
            where = Location(path, index + 1, column)
            try:
                rules, until, reason = _parse_inline(text[at_word + len(WORD):], known_rules, where)
            except InputError as error:
                errors.append(error)
                continue
            target = _target(lines, index)
            for rule in rules:
                found.append(Waiver(rule, reason, until, "inline", where, path=path, target=target))
    if errors:
        raise InputErrors(errors)
    return found


def _parse_inline(rest: str, known_rules: set[str], where: Location):
    syntax = f"write '{WORD} RULE [until YYYY-MM-DD]: REASON'"
    match = _INLINE.match(rest.strip().rstrip(";").strip())
    if not match or not match.group("rules").strip():
        raise InputError(where, f"{WORD} names no rule: {syntax}")
    rules = [r.strip().lower() for r in match.group("rules").split(",")]
    for rule in rules:
        _check_rule(rule, known_rules, where)
    until = _parse_date(match.group("until"), where) if match.group("until") else None
    reason = (match.group("reason") or "").strip()
    if not reason:
        raise InputError(where, f"{WORD} {', '.join(rules)} has no reason: {syntax}")
    return rules, until, reason


def _check_rule(rule: str, known_rules: set[str], where: Location) -> None:
    if not _RULE_ID.match(rule) or rule not in known_rules or rule == UNUSED_RULE:
        import difflib
        close = difflib.get_close_matches(rule, sorted(known_rules - {UNUSED_RULE}), n=1)
        hint = f"; did you mean '{close[0]}'?" if close else " (drc rules lists them)"
        raise InputError(where, f"a waiver names unknown rule '{rule}'{hint}")


def _parse_date(value, where: Location) -> _dt.date:
    if isinstance(value, _dt.datetime):
        return value.date()
    if isinstance(value, _dt.date):
        return value
    text = str(value).strip()
    if _DATE.match(text):
        try:
            return _dt.date.fromisoformat(text)
        except ValueError:
            pass
    raise InputError(where, f"waiver end date '{text}' is not a date: write YYYY-MM-DD")


# ---------------------------------------------------------------- waiver files

def file_waivers(path: str, known_rules: set[str]) -> list[Waiver]:
    """The [[waiver]] tables of a TOML waiver file; InputErrors when it is unusable."""
    try:
        with open(path, "rb") as stream:
            data = stream.read()
    except OSError as error:
        raise InputError(Location(path, 1, 1),
                         f"cannot read waiver file {path}: {error.strerror or error}") from None
    try:
        text = data.decode("utf-8")
        table = tomllib.loads(text)
    except UnicodeDecodeError:
        raise InputError(Location(path, 1, 1), f"waiver file {path} is not UTF-8 text") from None
    except tomllib.TOMLDecodeError as error:
        found = re.search(r"\(at line (\d+), column (\d+)\)", str(error))
        where = Location(path, int(found.group(1)), int(found.group(2))) if found else Location(path, 1, 1)
        message = re.sub(r"\s*\(at line \d+, column \d+\)", "", str(error))
        raise InputError(where, f"waiver file is not valid TOML: {message}") from None
    headers = [i + 1 for i, line in enumerate(text.splitlines())
               if re.match(r"\s*\[\[\s*waiver\s*\]\]", line)]
    errors: list[InputError] = []
    for key in table:
        if key != "waiver":
            errors.append(InputError(Location(path, 1, 1),
                                     f"unknown key '{key}' in a waiver file: it holds [[waiver]] tables"))
    entries = table.get("waiver", [])
    if not isinstance(entries, list):
        errors.append(InputError(Location(path, 1, 1), "'waiver' must be [[waiver]] tables"))
        entries = []
    out: list[Waiver] = []
    for n, entry in enumerate(entries):
        where = Location(path, headers[n] if n < len(headers) else 1, 1)
        try:
            out.append(_file_entry(entry, known_rules, where))
        except InputError as error:
            errors.append(error)
    if errors:
        raise InputErrors(errors)
    return out


def _file_entry(entry, known_rules: set[str], where: Location) -> Waiver:
    if not isinstance(entry, dict):
        raise InputError(where, "a [[waiver]] must be a table")
    for key in entry:
        if key not in _FILE_KEYS:
            raise InputError(where, f"unknown key '{key}' in [[waiver]]: use {', '.join(_FILE_KEYS)}")
    for key in ("rule", "element", "net", "netlist", "reason"):
        if key in entry and not isinstance(entry[key], str):
            raise InputError(where, f"[[waiver]] {key} must be a string")
    rule = str(entry.get("rule", "")).strip().lower()
    if not rule:
        raise InputError(where, "[[waiver]] has no rule")
    _check_rule(rule, known_rules, where)
    element = entry.get("element", "").strip().lower() or None
    net = entry.get("net", "").strip().lower() or None
    if not element and not net:
        raise InputError(where, f"[[waiver]] for {rule} names no element (or net)")
    reason = entry.get("reason", "").strip()
    if not reason:
        raise InputError(where, f"[[waiver]] for {rule} has no reason: add reason = \"...\"")
    until = _parse_date(entry["until"], where) if "until" in entry else None
    netlist = entry.get("netlist", "").strip().replace("\\", "/") or None
    return Waiver(rule, reason, until, "file", where, element=element, net=net, netlist=netlist)


# ---------------------------------------------------------------- applying them

def _matches(w: Waiver, finding: dict, anchors) -> bool:
    if w.rule != finding.get("rule"):
        return False
    if w.source == "inline":
        return w.target is not None and (w.path, w.target) in anchors
    path = str((finding.get("location") or {}).get("path", "")).replace("\\", "/")
    if w.netlist and not (fnmatch.fnmatchcase(path, w.netlist)
                          or fnmatch.fnmatchcase(path.rsplit("/", 1)[-1], w.netlist)):
        return False
    elements = [str(e).lower() for e in finding.get("elements") or ()]
    nets = [str(n).lower() for n in finding.get("nets") or ()]
    if w.element:
        return w.element in elements
    return w.net in nets


def apply_waivers(findings: list[dict], anchors: list[set], waivers: list[Waiver],
                  today: _dt.date) -> list[dict]:
    """Mark waived findings (in place) and return the notes for waivers that matched nothing.

    anchors[i] holds the (path, line) cards finding i is reachable from: its own location
    and the X lines its element came through. Inline waivers are tried before file ones.
    """
    ordered = [w for w in waivers if w.source == "inline"] + [w for w in waivers if w.source == "file"]
    for finding, where in zip(findings, anchors):
        if finding.get("waiver"):
            continue
        expired = None
        for w in ordered:
            if not _matches(w, finding, where):
                continue
            w.used = True
            if w.until is not None and today > w.until:
                expired = expired or w
                continue
            finding["waiver"] = w.record()
            finding.pop("waiver_expired", None)
            break
        else:
            if expired is not None:
                finding["waiver_expired"] = expired.record()
    notes = []
    for w in waivers:
        if w.used:
            continue
        ran_out = f" (it ran out on {w.until.isoformat()})" if w.until and today > w.until else ""
        notes.append({
            "rule": UNUSED_RULE, "severity": "note",
            "message": f"{w.describe()} matches no finding{ran_out}: remove it, "
                       "or correct its rule or element",
            "location": {"path": w.at.path, "line": w.at.line, "column": w.at.column},
            "elements": [w.element] if w.element else [], "nets": [w.net] if w.net else [],
            "corner": None, "values": {}, "fix": "delete the waiver", "caution": ""})
    return notes


HOW_TO_WAIVE = f"""How to waive: when a reviewed design keeps a finding on purpose, say so
where the next reader looks, with the reason. In the netlist, on the element's line or in
a comment line just above it:

    R1 vcell a 4.7k ; {WORD} RULE until YYYY-MM-DD: REASON
    * {WORD} RULE: REASON

(`until` is optional; after that day the finding comes back, with a note.) For a board you
do not edit, a TOML waiver file passed with --waivers FILE:

    [[waiver]]
    rule = "RULE"
    element = "X2.Dled"        # an element path the finding names (or net = "...")
    reason = "REASON"
    until = 2026-06-30         # optional

A waived finding stays in the JSON report (its "waiver" key) and in SARIF (a suppression
with the reason), never fails the run, and is counted apart; a waiver that matches nothing
is reported as {UNUSED_RULE}."""
