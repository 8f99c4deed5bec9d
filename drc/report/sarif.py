"""The SARIF 2.1.0 report: one run, every rule that ran, one result per finding."""

from __future__ import annotations

import re
from urllib.parse import quote

from drc.report.jsonreport import SEVERITIES, FinalEntries, json_bytes, plain, prepare

SARIF_VERSION = "2.1.0"
SARIF_SCHEMA_URI = ("https://docs.oasis-open.org/sarif/sarif/v2.1.0/errata01/os/schemas/"
                    "sarif-schema-2.1.0.json")
FINGERPRINT_KEY = "drcFinding/v1"

_MARKDOWN_LINK = re.compile(r"\[([^\]]*)\]\([^)]*\)")
_ANGLE_LINK = re.compile(r"<[a-zA-Z][a-zA-Z0-9+.-]*://[^>\s]*>")
_BARE_LINK = re.compile(r"\(?\b[a-zA-Z][a-zA-Z0-9+.-]*://\S+")
# Characters a URI reference allows unescaped in a path (RFC 3986 pchar plus "/").
_URI_SAFE = "/-._~!$&'()*+,;=:@"


def render_sarif(report: dict, rules: list[dict] | None = None) -> str:
    """The report as a SARIF 2.1.0 log (JSON text with a trailing newline), byte-stable."""
    return render_sarif_bytes(report, rules).decode("utf-8")


def render_sarif_bytes(report: dict, rules: list[dict] | None = None) -> bytes:
    """render_sarif's text as UTF-8 bytes, as drc writes it."""
    report = prepare(report)
    descriptors, index_of = _descriptors(rules or [], report["findings"])
    tool = report.get("tool") or {}
    driver = {"name": "drc"}
    if tool.get("version"):
        driver["version"] = str(tool["version"])
    driver["rules"] = descriptors

    run: dict = {"tool": {"driver": driver}}
    artifacts = [{"location": {"uri": artifact_uri(entry["path"])}}
                 for entry in report.get("inputs") or () if entry.get("path")]
    if artifacts:
        run["artifacts"] = artifacts
    final = type(report["findings"]) is FinalEntries
    run["results"] = [_result(finding, index_of, final) for finding in report["findings"]]
    run["columnKind"] = "unicodeCodePoints"
    run_properties = {}
    for key in ("assumptions", "cautions"):
        if report.get(key):
            run_properties[key] = plain(report[key])
    run_properties["summary"] = plain(report["summary"])
    run["properties"] = run_properties

    log = {"$schema": SARIF_SCHEMA_URI, "version": SARIF_VERSION, "runs": [run]}
    return json_bytes(log, indent=True)


def artifact_uri(path: str) -> str:
    """A path as given, with forward slashes, escaped only where a URI reference needs it."""
    return quote(str(path).replace("\\", "/"), safe=_URI_SAFE)


def first_paragraph(help_text: str) -> str:
    """The first paragraph of a rule's help with links removed and whitespace folded."""
    for paragraph in re.split(r"\n\s*\n", help_text or ""):
        lines = [line for line in paragraph.strip().splitlines()
                 if not line.lstrip().startswith("#")]
        text = " ".join(" ".join(lines).split())
        text = _MARKDOWN_LINK.sub(r"\1", text)
        text = _ANGLE_LINK.sub("", text)
        text = _BARE_LINK.sub("", text)
        text = " ".join(text.split())
        text = re.sub(r"\s+([.,;:])", r"\1", text)
        if text:
            return text
    return ""


def _descriptors(rules: list[dict], findings: list[dict]) -> tuple[list[dict], dict]:
    descriptors: list[dict] = []
    index_of: dict[str, int] = {}
    for rule in rules:
        rule_id = str(rule["id"])
        if rule_id in index_of:
            continue
        index_of[rule_id] = len(descriptors)
        descriptors.append(_descriptor(rule))
    # A finding whose rule was not listed still needs a descriptor for its ruleIndex.
    for finding in findings:
        rule_id = str(finding.get("rule", ""))
        if rule_id and rule_id not in index_of:
            index_of[rule_id] = len(descriptors)
            descriptors.append(_descriptor({"id": rule_id}))
    return descriptors, index_of


def _descriptor(rule: dict) -> dict:
    descriptor: dict = {"id": str(rule["id"])}
    if rule.get("summary"):
        descriptor["shortDescription"] = {"text": str(rule["summary"])}
    full = first_paragraph(rule.get("help") or "")
    if full:
        descriptor["fullDescription"] = {"text": full}
    if rule.get("help"):
        descriptor["help"] = {"text": str(rule["help"])}
    if rule.get("severity") in SEVERITIES:
        descriptor["defaultConfiguration"] = {"level": rule["severity"]}
    properties = {}
    if "sources" in rule:
        properties["sources"] = plain(list(rule.get("sources") or ()))
    if "origin" in rule:
        properties["origin"] = str(rule["origin"])
    if properties:
        descriptor["properties"] = properties
    return descriptor


# A finding's keys copied into its result's properties. In a FinalEntries finding all but
# waiver_expired are plain already (the engine made them so; a waiver's record keeps the
# report's key order, which plain() sorts), so they are taken as they are.
_PROPERTY_KEYS = ("elements", "nets", "corner", "values", "caution", "waiver_expired")
_PLAIN_WHEN_FINAL = frozenset(("elements", "nets", "corner", "values", "caution"))


def _result(finding: dict, index_of: dict[str, int], final: bool = False) -> dict:
    rule_id = str(finding.get("rule", ""))
    text = str(finding.get("message", ""))
    if finding.get("fix"):
        text = f"{text} Fix: {finding['fix']}"
    result: dict = {"ruleId": rule_id}
    if rule_id in index_of:
        result["ruleIndex"] = index_of[rule_id]
    severity = finding.get("severity")
    result["level"] = severity if severity in SEVERITIES else "warning"
    result["message"] = {"text": text}

    location = finding.get("location") or {}
    if location.get("path"):
        region = {"startLine": max(int(location.get("line") or 1), 1),
                  "startColumn": max(int(location.get("column") or 1), 1)}
        result["locations"] = [{"physicalLocation": {
            "artifactLocation": {"uri": artifact_uri(location["path"])},
            "region": region}}]
    result["partialFingerprints"] = {FINGERPRINT_KEY: finding["fingerprint"]}

    waiver = finding.get("waiver")
    if waiver:
        suppression = {"kind": "inSource" if waiver.get("source") == "inline" else "external",
                       "status": "accepted",
                       "justification": str(waiver.get("reason", ""))}
        if waiver.get("expires"):
            suppression["properties"] = {"expires": str(waiver["expires"])}
        result["suppressions"] = [suppression]

    if finding.get("baseline") in ("known", "new"):
        result["baselineState"] = "unchanged" if finding["baseline"] == "known" else "new"

    properties = {}
    for key in _PROPERTY_KEYS:
        value = finding.get(key)
        if value is not None:
            properties[key] = value if final and key in _PLAIN_WHEN_FINAL else plain(value)
    if properties:
        result["properties"] = properties
    return result
