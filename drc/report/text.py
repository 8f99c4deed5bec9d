"""The report for a person: findings quoted against their source, the indicator and pump
tables, what was assumed, the cautions, and one closing count."""

from __future__ import annotations

import re
import textwrap

from drc.report.jsonreport import (SEVERITIES, check_fail_on, is_failing, is_known, is_waived,
                                   prepare)
from drc.units import format_si

WIDTH = 100

# Our own scheme: errors bold red, warnings yellow, notes cyan, waived findings dim.
_ESC = "\x1b["
_STYLE = {
    "error": "1;31",
    "warning": "33",
    "note": "36",
    "waived": "2",
    "header": "1",
    "dim": "2",
    "fail": "1;31",
    "pass": "1;32",
}

REVIEW_REMINDER = ("A clean check is not a sign-off: a qualified engineer reviews the design, "
                   "and the parts' datasheets (absolute maximum ratings first) govern over "
                   "every default used here.")


def render_text(report: dict, sources: dict[str, list[str]] | None = None, *,
                color: bool = False, quiet: bool = False, fail_on: str = "error") -> str:
    """The report as text for a terminal or a log; ANSI colour only when color is True."""
    check_fail_on(fail_on)
    report = prepare(report)
    paint = _painter(color)
    sources = sources or {}
    findings = report["findings"]
    out: list[str] = []

    for path, group in _by_file(report, findings):
        if quiet:
            out.extend(_first_line(f, paint) for f in group
                       if not is_waived(f) and not is_known(f))
            continue
        out.append(paint("header", f"-- {path}: {_findings_phrase(group)} --"))
        for finding in group:
            out.append(_first_line(finding, paint))
            out.extend(_quote(finding, sources, paint))
            out.extend(_details(finding))
        out.append("")

    if not quiet:
        out.extend(_indicators(report.get("branches") or ()))
        out.extend(_pumps(report.get("pumps") or ()))
        out.extend(_bullets("Assumed (no setting said otherwise)", report.get("assumptions")))
        cautions = list(report.get("cautions") or ())
        if not any("not a sign-off" in c for c in cautions):
            cautions.append(REVIEW_REMINDER)      # the report always says it, once
        out.extend(_bullets("Cautions", cautions))
    out.append(summary_line(report, fail_on, paint))
    return "\n".join(out) + "\n"


def summary_line(report: dict, fail_on: str = "error", paint=None) -> str:
    """'2 errors, 1 warning, 0 notes in 3 files (1 waived); verdict: ...'"""
    paint = paint or _painter(False)
    counts = report["summary"]
    parts = [_plural(counts.get(severity, 0), severity) for severity in SEVERITIES]
    files = len(report.get("inputs") or ()) or len(
        {str((f.get("location") or {}).get("path", "")) for f in report["findings"]})
    line = f"{', '.join(parts)} in {_plural(files, 'file')}"
    apart = []
    if counts.get("waived"):
        apart.append(f"{counts['waived']} waived")
    if counts.get("known"):
        apart.append(f"{counts['known']} known from the baseline")
    if apart:
        line += f" ({', '.join(apart)})"
    failing = any(is_failing(f, fail_on) for f in report["findings"])
    if fail_on == "never":
        verdict = paint("pass", "passes") + " (--fail-on never)"
    elif failing:
        verdict = paint("fail", "FAILS") + f" (something at or above {fail_on})"
    else:
        verdict = paint("pass", "passes") + f" (nothing at or above {fail_on})"
    return f"{line}; {verdict}"


def _painter(color: bool):
    if not color:
        return lambda style, text: text
    return lambda style, text: f"{_ESC}{_STYLE[style]}m{text}{_ESC}0m" if text else text


def _plural(count: int, word: str) -> str:
    return f"{count} {word}{'' if count == 1 else 's'}"


def _findings_phrase(group: list[dict]) -> str:
    waived = sum(1 for f in group if is_waived(f))
    known = sum(1 for f in group if is_known(f))
    phrase = _plural(len(group) - waived - known, "finding")
    return (phrase + (f", {waived} waived" if waived else "")
            + (f", {known} known" if known else ""))


def _by_file(report: dict, findings: list[dict]):
    order: list[str] = [str(entry["path"]) for entry in report.get("inputs") or ()
                        if entry.get("path")]
    groups: dict[str, list[dict]] = {}
    for finding in findings:
        path = str((finding.get("location") or {}).get("path", ""))
        groups.setdefault(path, []).append(finding)
        if path not in order:
            order.append(path)
    return [(path, groups[path]) for path in dict.fromkeys(order) if path in groups]


def _where(finding: dict) -> tuple[str, int, int]:
    location = finding.get("location") or {}
    return (str(location.get("path", "")), int(location.get("line") or 1),
            int(location.get("column") or 1))


def _first_line(finding: dict, paint) -> str:
    path, line, column = _where(finding)
    severity = str(finding.get("severity", ""))
    rule = paint("dim", f"[{finding.get('rule', '')}]")
    if is_waived(finding):
        label = paint("waived", f"{severity} (waived)")
    elif is_known(finding):
        label = paint("waived", f"{severity} (known)")
    else:
        label = paint(severity if severity in SEVERITIES else "dim", severity)
    return f"{path}:{line}:{column}: {label}: {finding.get('message', '')} {rule}"


QUOTE_WIDTH = 120


def _quote(finding: dict, sources: dict[str, list[str]], paint) -> list[str]:
    """The source line under a line-number gutter, and a run of ^ under the element's name."""
    path, line, column = _where(finding)
    lines = sources.get(path)
    if lines is None:
        lines = sources.get(path.replace("\\", "/"))
    if not lines or not 1 <= line <= len(lines):
        return []
    text = lines[line - 1].rstrip("\r\n")
    start = min(column - 1, len(text))
    # a long line is quoted as a window around the element, so the report stays linear in
    # the input however wide a card is
    if len(text) > QUOTE_WIDTH:
        left = max(start - QUOTE_WIDTH // 3, 0)
        right = min(left + QUOTE_WIDTH, len(text))
        head = "…" if left > 0 else ""
        text = head + text[left:right] + ("…" if right < len(text) else "")
        start = start - left + len(head)
    end = start
    while end < len(text) and not text[end].isspace():
        end += 1
    width = max(end - start, 1)
    # Keep the source's tabs in the pad so the marker lines up however tabs are shown.
    pad = "".join(ch if ch == "\t" else " " for ch in text[:start])
    gutter = len(str(line))
    severity = ("waived" if is_waived(finding) or is_known(finding)
                else str(finding.get("severity", "dim")))
    style = severity if severity in _STYLE else "dim"
    return [f"  {line:>{gutter}} | {text}",
            f"  {'':>{gutter}} | {pad}{paint(style, '^' * width)}"]


def _details(finding: dict) -> list[str]:
    out: list[str] = []
    for label in ("fix", "caution"):
        if finding.get(label):
            out.extend(_wrapped(f"  {label}: ", str(finding[label])))
    waiver = finding.get("waiver")
    if waiver:
        where = "in the netlist" if waiver.get("source") == "inline" else "in the waiver file"
        until = f", until {waiver['expires']}" if waiver.get("expires") else ", no end date"
        out.extend(_wrapped("  waived: ", f"{waiver.get('reason', '')} ({where}{until})"))
    expired = finding.get("waiver_expired")
    if expired:
        out.extend(_wrapped("  note: ", f"its waiver ran out on {expired.get('expires')} "
                                        f"({expired.get('at', '')}: {expired.get('reason', '')}); "
                                        "renew it with a new date, or fix the design"))
    if is_known(finding):
        out.append("  known: in the baseline, so it does not fail the run")
    return out


def _wrapped(lead: str, text: str) -> list[str]:
    """text wrapped to WIDTH after lead, the lines after the first indented to match."""
    if _ONE_SPACED.fullmatch(text):
        return _wrapped_words(lead, text.split(" "))
    return textwrap.wrap(text, WIDTH, initial_indent=lead,
                         subsequent_indent=" " * len(lead),
                         break_long_words=False, break_on_hyphens=False) or [lead.rstrip()]


# Words of no white space, one space between each: nearly every message, fix and caution.
_ONE_SPACED = re.compile(r"\S+(?: \S+)*")


def _wrapped_words(lead: str, words: list[str]) -> list[str]:
    """What textwrap.wrap gives in _wrapped for words joined by single spaces, with no
    textwrap.TextWrapper: its greedy filling of each line, word by word, is the same but
    costs several times as much on a big board's thousands of fixes. A word longer than a
    line stands on a line of its own, unbroken (break_long_words=False)."""
    width = WIDTH - len(lead)
    lines: list[str] = []
    line = ""
    for word in words:
        if not line:
            line = word
        elif len(line) + 1 + len(word) <= width:
            line += " " + word
            continue
        else:
            lines.append(line)
            line = word
        if len(word) > width:             # too long for any line: alone on its own
            lines.append(line)
            line = ""
    if line:
        lines.append(line)
    indent = " " * len(lead)
    return [lead + lines[0]] + [indent + rest for rest in lines[1:]]


def _table(title: str, headers: list[str], rows: list[list[str]], right: set[int]) -> list[str]:
    widths = [max(len(cell) for cell in column) for column in zip(headers, *rows)]

    def cells(row):
        return "  ".join(cell.rjust(w) if i in right else cell.ljust(w)
                         for i, (cell, w) in enumerate(zip(row, widths))).rstrip()

    rule = "  ".join("-" * w for w in widths)
    return [title, "  " + cells(headers), "  " + rule, *("  " + cells(r) for r in rows), ""]


def _spread(obj: dict | None, unit: str) -> list[str]:
    obj = obj or {}
    return [format_si(obj.get(key), unit) for key in ("low", "nominal", "high")]


def _indicators(branches) -> list[str]:
    if not branches:
        return ["Indicators: none found", ""]
    headers = ["LED", "drive", "from", "I low", "I nominal", "I high", "Vf nominal"]
    several = any("path" in b for b in branches)
    rows = []
    for branch in branches:
        current = _spread(branch.get("current_A"), "A")
        forward = format_si((branch.get("forward_V") or {}).get("nominal"), "V")
        row = [str(branch.get("led", "?")), str(branch.get("drive", "?")),
               str(branch.get("source") or "-"), *current, forward]
        rows.append(([str(branch.get("path", ""))] if several else []) + row)
    right = {3, 4, 5, 6}
    if several:
        headers = ["netlist"] + headers
        right = {k + 1 for k in right}
    return _table(f"Indicators ({len(rows)}): average current over all corners",
                  headers, rows, right=right)


def _pumps(pumps) -> list[str]:
    if not pumps:
        return []
    headers = ["pump", "topology", "stages", "output", "peak low", "peak nom", "peak high",
               "mean low", "mean nom", "mean high"]
    several = any("path" in p for p in pumps)
    rows = []
    for pump in pumps:
        row = [str(pump.get("id", "?")), str(pump.get("topology", "?")),
               str(pump.get("stages", "?")), str(pump.get("output_net", "?")),
               *_spread(pump.get("peak_V"), "V"), *_spread(pump.get("average_V"), "V")]
        rows.append(([str(pump.get("path", ""))] if several else []) + row)
    right = set(range(2, 10)) - {3}
    if several:
        headers = ["netlist"] + headers
        right = {k + 1 for k in right}
    return _table(f"Pumps ({len(rows)}): output against ground in steady state",
                  headers, rows, right=right)


def _bullets(title: str, items) -> list[str]:
    if not items:
        return []
    out = [f"{title}:"]
    for item in items:
        out.extend(_wrapped("  - ", str(item)))
    out.append("")
    return out


__all__ = ["render_text", "summary_line"]
