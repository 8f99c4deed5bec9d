"""The command line: `drc check`, `drc rules`, `drc explain` (see the contract)."""

from __future__ import annotations

import argparse
import gc
import json
import sys

from drc.errors import InputError, InputErrors

FAIL_LEVELS = ("error", "warning", "note", "never")
EXIT_CLEAN, EXIT_FINDINGS, EXIT_UNUSABLE, EXIT_INTERNAL = 0, 1, 2, 3


class _Parser(argparse.ArgumentParser):
    def error(self, message):
        sys.stderr.write(f"drc: error: {message} (see 'drc {self.prog.split()[-1]} --help')\n"
                         if " " in self.prog else f"drc: error: {message} (see 'drc --help')\n")
        raise SystemExit(EXIT_UNUSABLE)


def _parser() -> argparse.ArgumentParser:
    top = _Parser(prog="drc", description="Design-rule checks for indicator-LED circuits on "
                  "low-voltage rails, from a SPICE-style netlist.")
    sub = top.add_subparsers(dest="command", parser_class=_Parser, required=True)
    check = sub.add_parser("check", help="check netlists and report findings")
    check.add_argument("paths", nargs="+", metavar="PATH", help="a netlist file, or a folder to search")
    check.add_argument("--config", metavar="FILE", help="the design-context TOML file")
    check.add_argument("--format", default="text", choices=("text", "json", "sarif", "junit"))
    check.add_argument("--output", metavar="FILE", help="write the report here (atomically)")
    check.add_argument("--fail-on", default="error", choices=FAIL_LEVELS)
    check.add_argument("--rules", action="append", default=[], metavar="DIR",
                       help="a folder of house rules (repeatable)")
    check.add_argument("--jobs", type=int, default=1, metavar="N")
    check.add_argument("--quiet", "-q", action="store_true", help="only the findings' first lines and the summary")
    rules = sub.add_parser("rules", help="list every rule")
    rules.add_argument("--format", default="text", choices=("text", "json"))
    rules.add_argument("--rules", action="append", default=[], metavar="DIR")
    explain = sub.add_parser("explain", help="explain one rule")
    explain.add_argument("rule")
    explain.add_argument("--rules", action="append", default=[], metavar="DIR")
    return top


def main(argv: list[str] | None = None) -> int:
    try:
        args = _parser().parse_args(argv)
    except SystemExit as stop:
        return int(stop.code or 0)
    try:
        if args.command == "check":
            return _check(args)
        if args.command == "rules":
            return _rules(args)
        return _explain(args)
    except InputErrors as many:
        for e in many.errors:
            sys.stderr.write(f"{e}\n")
        return EXIT_UNUSABLE
    except InputError as one:
        sys.stderr.write(f"{one}\n")
        return EXIT_UNUSABLE
    except KeyboardInterrupt:
        sys.stderr.write("drc: interrupted\n")
        return 130
    except Exception as error:   # a fault of drc's own: one line, never a traceback
        sys.stderr.write(f"drc: internal error: {type(error).__name__}: {error} "
                         "(a bug in drc: please report it with the netlist)\n")
        return EXIT_INTERNAL


def _check(args) -> int:
    from drc.engine import run_check
    from drc.report import render
    from drc.report.output import should_color, write_atomic
    from drc.engine import rule_metadata
    if args.jobs < 1:
        raise InputError(None, "--jobs wants a whole number of at least 1")
    gc.disable()      # hundreds of thousands of small objects, none of them cyclic garbage
    report, sources, rules = run_check(args.paths, args.config, args.rules)
    color = args.output is None and args.format == "text" and should_color(sys.stdout)
    text = render(report, args.format, sources=sources, rules=rule_metadata(rules),
                  color=color, quiet=args.quiet, fail_on=args.fail_on)
    if args.output:
        write_atomic(args.output, text)
    else:
        sys.stdout.write(text)
    return EXIT_FINDINGS if _fails(report, args.fail_on) else EXIT_CLEAN


def _fails(report: dict, fail_on: str) -> bool:
    if fail_on == "never":
        return False
    order = {"error": 0, "warning": 1, "note": 2}
    return any(order[f["severity"]] <= order[fail_on] for f in report["findings"]
               if not f.get("waiver"))


def _rules(args) -> int:
    from drc.registry import load_rules
    from pathlib import Path
    rules, _ = load_rules([Path(f) for f in args.rules])
    if args.format == "json":
        sys.stdout.write(json.dumps([{"id": r.id, "severity": r.rule.severity, "summary": r.rule.summary,
                                      "origin": r.origin} for r in rules], indent=2) + "\n")
        return EXIT_CLEAN
    width = max(len(r.id) for r in rules)
    for r in rules:
        sys.stdout.write(f"{r.id:<{width}}  {r.rule.severity:<7}  {r.rule.summary}  [{r.origin}]\n")
    return EXIT_CLEAN


def _explain(args) -> int:
    from drc.engine import closest_rule
    from drc.registry import load_rules
    from pathlib import Path
    rules, _ = load_rules([Path(f) for f in args.rules])
    match = [r for r in rules if r.id == args.rule.lower()]
    if not match:
        raise InputError(None, f"unknown rule '{args.rule}'{closest_rule(args.rule, rules)} "
                         "(drc rules lists them)")
    r = match[0]
    sys.stdout.write(f"{r.id} ({r.rule.severity}, {r.origin})\n{r.rule.summary}\n\n{r.help}\n")
    if r.rule.sources:
        sys.stdout.write("\nSources:\n" + "".join(f"  - {s}\n" for s in r.rule.sources))
    return EXIT_CLEAN
