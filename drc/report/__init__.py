"""The report formatters: text for a person, and JSON, SARIF and JUnit XML for machines."""

from __future__ import annotations

from drc.errors import InputError
from drc.report.jsonreport import (check_fail_on, count_findings, fingerprint, prepare,
                                   render_json, render_json_bytes)
from drc.report.junit import render_junit
from drc.report.output import should_color, write_atomic
from drc.report.sarif import render_sarif, render_sarif_bytes
from drc.report.text import render_text

FORMATS = ("text", "json", "sarif", "junit")


def render(report: dict, fmt: str, *, sources: dict[str, list[str]] | None = None,
           rules: list[dict] | None = None, color: bool = False, quiet: bool = False,
           fail_on: str = "error") -> str:
    """The report in one of FORMATS; an unknown format or fail_on level is an InputError."""
    check_fail_on(fail_on)
    if fmt == "text":
        return render_text(report, sources or {}, color=color, quiet=quiet, fail_on=fail_on)
    if fmt == "json":
        return render_json(report)
    if fmt == "sarif":
        return render_sarif(report, rules or [])
    if fmt == "junit":
        return render_junit(report, rules or [], fail_on=fail_on)
    raise InputError(None, f"unknown report format {fmt!r}: use one of {', '.join(FORMATS)}")


def render_bytes(report: dict, fmt: str, *, sources: dict[str, list[str]] | None = None,
                 rules: list[dict] | None = None, color: bool = False, quiet: bool = False,
                 fail_on: str = "error") -> bytes:
    """render()'s text as UTF-8 bytes, as drc writes it: the JSON formats are made as bytes
    (see drc.report.jsonreport.json_bytes), without a str of the whole report between.
    Text that cannot be UTF-8 (a lone surrogate a house rule put in a message) is an
    InputError."""
    check_fail_on(fail_on)
    try:
        if fmt == "json":
            return render_json_bytes(report)
        if fmt == "sarif":
            return render_sarif_bytes(report, rules or [])
        return render(report, fmt, sources=sources, rules=rules, color=color, quiet=quiet,
                      fail_on=fail_on).encode("utf-8")
    except UnicodeError as error:
        raise InputError(None, f"the report cannot be written as UTF-8: {error}") from None


__all__ = ["FORMATS", "render", "render_bytes", "render_text", "render_json", "render_sarif", "render_junit",
           "fingerprint", "prepare", "count_findings", "write_atomic", "should_color"]
