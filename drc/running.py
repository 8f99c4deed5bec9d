"""Running the rules on an analysed design: each rule's settings from the config, its
severity, and its findings stamped with its id."""

from __future__ import annotations

from drc.api import SEVERITIES, Finding


def run_rules(design, rules, context) -> tuple[list[Finding], list[str]]:
    """Every enabled rule's findings, and the ids of the rules that ran."""
    findings: list[Finding] = []
    ran = []
    for rule in rules:
        settings = dict(rule.rule.settings)
        own = context.rules.get(rule.id, {})
        if own.get("enabled", True) is False:
            continue
        settings.update({k: v for k, v in own.items() if k not in ("enabled", "severity")})
        severity = own.get("severity", rule.rule.severity)
        ran.append(rule.id)
        for f in rule.check(design, settings) or ():
            f.rule = rule.id
            f.severity = f.severity if (f.severity in SEVERITIES and "severity" not in own) else severity
            findings.append(f)
    return findings, ran
