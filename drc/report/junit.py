"""The JUnit XML report: a test suite per input file, a test case per rule that ran on it."""

from __future__ import annotations

import re
import xml.etree.ElementTree as ET

from drc.report.jsonreport import check_fail_on, is_failing, is_waived, prepare

# XML 1.0 allows tab, newline, carriage return and the printable ranges only.
_NOT_XML = re.compile("[^\t\n\r\u0020-\ud7ff\ue000-\ufffd\U00010000-\U0010ffff]")


def render_junit(report: dict, rules: list[dict] | None = None, fail_on: str = "error") -> str:
    """JUnit XML text: a case fails when its rule has an unwaived finding at or above fail_on."""
    check_fail_on(fail_on)
    report = prepare(report)
    findings = report["findings"]
    rule_ids = _rule_ids(rules or [], findings)
    paths = _paths(report, findings)

    # each (rule, path)'s findings, in report order, gathered in one pass
    by_case: dict[tuple, list[dict]] = {}
    for f in findings:
        by_case.setdefault((f.get("rule"), _path_of(f)), []).append(f)

    root = ET.Element("testsuites", {"name": "drc"})
    total_tests = total_failures = 0
    for path in paths:
        suite = ET.SubElement(root, "testsuite", {"name": _clean(path)})
        tests = failures = 0
        for rule_id in rule_ids:
            mine = by_case.get((rule_id, path), [])
            case = ET.SubElement(suite, "testcase",
                                 {"classname": _clean(path), "name": _clean(rule_id)})
            tests += 1
            failing = [f for f in mine if is_failing(f, fail_on)]
            if failing:
                failures += 1
                count = len(failing)
                failure = ET.SubElement(case, "failure", {
                    "message": f"{count} finding{'s' if count != 1 else ''}"
                               f" at or above {fail_on}",
                    "type": rule_id})
                failure.text = _clean("\n".join(_line(f) for f in failing))
            # the rest of its findings (a finding equal to a failing one fails too)
            passing = [f for f in mine if not is_failing(f, fail_on)]
            if passing:
                out = ET.SubElement(case, "system-out")
                out.text = _clean("\n".join(_note(f) for f in passing))
        suite.set("tests", str(tests))
        suite.set("failures", str(failures))
        suite.set("errors", "0")
        suite.set("skipped", "0")
        total_tests += tests
        total_failures += failures
    root.set("tests", str(total_tests))
    root.set("failures", str(total_failures))
    root.set("errors", "0")
    ET.indent(root)
    return '<?xml version="1.0" encoding="UTF-8"?>\n' + ET.tostring(root, encoding="unicode") + "\n"


def _rule_ids(rules: list[dict], findings: list[dict]) -> list[str]:
    ids: list[str] = []
    for rule in rules:
        if str(rule["id"]) not in ids:
            ids.append(str(rule["id"]))
    for finding in findings:
        if finding.get("rule") and str(finding["rule"]) not in ids:
            ids.append(str(finding["rule"]))
    return ids


def _paths(report: dict, findings: list[dict]) -> list[str]:
    paths: list[str] = []
    for entry in report.get("inputs") or ():
        if entry.get("path") and str(entry["path"]) not in paths:
            paths.append(str(entry["path"]))
    for finding in findings:
        path = _path_of(finding)
        if path and path not in paths:
            paths.append(path)
    return paths


def _path_of(finding: dict) -> str:
    return str((finding.get("location") or {}).get("path", ""))


def _where(finding: dict) -> str:
    location = finding.get("location") or {}
    return f"{location.get('path', '')}:{location.get('line', 1)}:{location.get('column', 1)}"


def _line(finding: dict) -> str:
    return f"{_where(finding)}: {finding.get('message', '')}"


def _note(finding: dict) -> str:
    if is_waived(finding):
        waiver = finding["waiver"]
        return (f"{_where(finding)}: {finding.get('severity')} waived "
                f"({waiver.get('reason', '')}): {finding.get('message', '')}")
    if finding.get("baseline") == "known":
        return (f"{_where(finding)}: {finding.get('severity')} known (in the baseline): "
                f"{finding.get('message', '')}")
    return (f"{_where(finding)}: {finding.get('severity')} below the threshold: "
            f"{finding.get('message', '')}")


def _clean(text: str) -> str:
    return _NOT_XML.sub("\ufffd", text)
