"""The command line: `drc check`, `drc rules`, `drc explain` (see the contract)."""

from __future__ import annotations

import argparse
import gc
import json
import os
import sys
import threading

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
    check.add_argument("--quiet", "-q", action="store_true",
                       help="text: only the failing findings' first lines and the summary")
    check.add_argument("--waivers", action="append", default=[], metavar="FILE",
                       help="a TOML file of [[waiver]] tables (repeatable)")
    check.add_argument("--baseline", metavar="FILE",
                       help="findings in this baseline are reported as known and do not fail")
    check.add_argument("--write-baseline", metavar="FILE",
                       help="write this run's findings as a baseline (atomically)")
    rules = sub.add_parser("rules", help="list every rule")
    rules.add_argument("--format", default="text", choices=("text", "json"))
    rules.add_argument("--rules", action="append", default=[], metavar="DIR")
    explain = sub.add_parser("explain", help="explain one rule")
    explain.add_argument("rule")
    explain.add_argument("--rules", action="append", default=[], metavar="DIR")
    return top


def main(argv: list[str] | None = None) -> int:
    """The command line's exit status for argv (default: sys.argv[1:]); see the contract."""
    return _main(argv, None)


def run() -> None:
    """The `drc` program: main() on sys.argv, then the process ends with its status.

    A check of a big board leaves about a million small objects (the last file's Design,
    the report, its text), and an ordinary exit frees them one by one, then tears down the
    interpreter, before the process ends: at 100k elements about 0.2 s for the Design,
    0.1 s for the report and 0.4 s of teardown (measured), for memory the system takes
    back at once anyway.
    So run() keeps them (main's keep list), does what an ordinary exit does that matters
    here - flush stdout and stderr, run the atexit handlers (logging's, a house rule's) -
    and ends the process with os._exit(status). The report file is already written and
    closed by then (write_atomic). When anything is not plain - another thread still
    running, a flush that fails (a closed pipe) - it takes the ordinary sys.exit(status),
    with its usual messages and status.
    """
    import atexit
    gc.disable()        # the process is ending: no collection is worth a walk over keep
    keep: list = []
    status = _main(None, keep)
    others = [t for t in threading.enumerate() if t is not threading.main_thread()]
    if all(t.daemon for t in others):
        try:
            sys.stdout.flush()
            sys.stderr.flush()
        except (OSError, ValueError):
            sys.exit(status)
        # what the interpreter runs at exit, in its order (a handler that raises is
        # reported on stderr and the rest still run, as at an ordinary exit); private by
        # name, but CPython's own way to run them early. A Python without it exits as usual.
        run_exit_handlers = getattr(atexit, "_run_exitfuncs", None)
        if run_exit_handlers is None:
            sys.exit(status)
        run_exit_handlers()
        try:
            sys.stdout.flush()
            sys.stderr.flush()
        except (OSError, ValueError):
            sys.exit(status)
        os._exit(status)
    sys.exit(status)


def _to_stdout(text: str | bytes) -> None:
    """Write text (a str, or UTF-8 bytes) to stdout; a reader that has gone (`drc check x |
    head`) is not an error.

    The rest of the output is dropped and the command carries on: the baseline file is
    still written and the exit status is still the check's verdict. stdout is pointed at
    the null device, so the interpreter's own last flush does not fail again.
    """
    try:
        if isinstance(text, bytes):
            buffer = getattr(sys.stdout, "buffer", None)
            if buffer is None:              # a stream of text only (embedding, tests)
                sys.stdout.write(text.decode("utf-8"))
            else:
                sys.stdout.flush()          # what was written as text goes first
                buffer.write(text)
                buffer.flush()
        else:
            sys.stdout.write(text)
        sys.stdout.flush()
    except BrokenPipeError:
        null = os.open(os.devnull, os.O_WRONLY)
        os.dup2(null, sys.stdout.fileno())
        os.close(null)


def _main(argv: list[str] | None, keep: list | None) -> int:
    try:
        args = _parser().parse_args(argv)
    except SystemExit as stop:
        return int(stop.code or 0)
    try:
        if args.command == "check":
            return _check(args, keep)
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


def _check(args, keep: list | None = None) -> int:
    """`drc check`; keep, if a list, is left holding the big objects (see run)."""
    from drc.baseline import render_baseline
    from drc.engine import rule_metadata, run_check
    from drc.errors import location_of_path
    from drc.report import render_bytes
    from drc.report.jsonreport import is_failing, prepare
    from drc.report.output import should_color, write_atomic
    if args.jobs < 1:
        raise InputError(None, "--jobs wants a whole number of at least 1")
    for target in (args.output, args.write_baseline):     # fail before a long run, not after
        if target:
            folder = os.path.dirname(os.path.abspath(target))
            if not os.path.isdir(folder):
                raise InputError(location_of_path(target),
                                 f"cannot write {target}: folder {folder} does not exist")
            if os.path.isdir(target):
                raise InputError(location_of_path(target), f"cannot write {target}: it is a folder")
    # Hundreds of thousands of small objects, none of them cyclic garbage: the collector
    # stays off until the report is written. Turned back on as soon as the check is done,
    # its next full pass walked the whole report (and any design kept) during render:
    # about 0.6 s of CPU at 100k elements for nothing.
    collecting = gc.isenabled()
    gc.disable()
    try:
        progress = _Progress(sys.stderr)
        try:
            report, sources, rules = run_check(args.paths, args.config, args.rules,
                                               jobs=args.jobs, waiver_files=args.waivers,
                                               baseline=args.baseline, progress=progress,
                                               keep=keep)
        finally:
            progress.clear()
        report = prepare(report)
        color = args.output is None and args.format == "text" and should_color(sys.stdout)
        text = render_bytes(report, args.format, sources=sources, rules=rule_metadata(rules),
                            color=color, quiet=args.quiet, fail_on=args.fail_on)
        if args.output:
            write_atomic(args.output, text)
        else:
            _to_stdout(text)
        if args.write_baseline:
            write_atomic(args.write_baseline, render_baseline(report))
        failing = args.fail_on != "never" and any(is_failing(f, args.fail_on)
                                                  for f in report["findings"])
        if keep is not None:
            keep.extend((report, sources, text))
    finally:
        # last thing before the report is let go: the collector's next pass then finds it
        # freed, not a million objects to walk
        if collecting:
            gc.enable()
    return EXIT_FINDINGS if failing else EXIT_CLEAN


class _Progress:
    """'checked 12/40 files', rewritten in place on a terminal's stderr; nothing otherwise."""

    def __init__(self, stream):
        self.stream = stream
        self.shown = 0
        isatty = getattr(stream, "isatty", None)
        try:
            self.on = bool(isatty and isatty())
        except (ValueError, OSError):
            self.on = False

    def __call__(self, done: int, total: int) -> None:
        if not self.on or total < 2:
            return
        text = f"checked {done}/{total} files"
        self.stream.write("\r" + text.ljust(self.shown))
        self.stream.flush()
        self.shown = len(text)

    def clear(self) -> None:
        if self.on and self.shown:
            self.stream.write("\r" + " " * self.shown + "\r")
            self.stream.flush()
            self.shown = 0


def _rule_list(folders):
    from pathlib import Path
    from drc.engine import rule_metadata
    from drc.registry import load_rules
    rules, _ = load_rules([Path(f) for f in folders])
    return rule_metadata(rules)


def _rules(args) -> int:
    rules = _rule_list(args.rules)
    if args.format == "json":
        _to_stdout(json.dumps([{"id": r["id"], "severity": r["severity"],
                                      "summary": r["summary"], "origin": r["origin"]}
                                     for r in rules], indent=2) + "\n")
        return EXIT_CLEAN
    headers = ("rule", "severity", "from", "what it finds")
    rows = [(r["id"], r["severity"], r["origin"], r["summary"]) for r in rules]
    widths = [max(len(row[i]) for row in (headers, *rows)) for i in range(3)]
    for row in (headers, *rows):
        _to_stdout("  ".join(cell.ljust(w) for cell, w in zip(row, widths))
                         + "  " + row[3] + "\n")
    return EXIT_CLEAN


def _explain(args) -> int:
    import difflib
    from drc.waivers import HOW_TO_WAIVE
    rules = _rule_list(args.rules)
    match = [r for r in rules if r["id"] == args.rule.lower()]
    if not match:
        close = difflib.get_close_matches(args.rule.lower(), [r["id"] for r in rules], n=1)
        hint = f"; did you mean '{close[0]}'?" if close else ""
        raise InputError(None, f"unknown rule '{args.rule}'{hint} (drc rules lists them)")
    r = match[0]
    import re
    import textwrap
    paragraphs = []
    for paragraph in re.split(r"\n\s*\n", r["help"].strip()):
        if max(len(line) for line in paragraph.splitlines()) > 100:   # unwrapped prose
            paragraph = "\n".join(textwrap.wrap(" ".join(paragraph.split()), 90,
                                                 break_long_words=False, break_on_hyphens=False))
        paragraphs.append(paragraph)
    out = [f"{r['id']} ({r['severity']}, {r['origin']})", r["summary"], "", "\n\n".join(paragraphs)]
    if r["sources"] and "Sources:" not in r["help"]:
        out += ["", "Sources:"] + [f"  - {s}" for s in r["sources"]]
    if r["id"] != "waiver-unused":
        out += ["", HOW_TO_WAIVE]
    _to_stdout("\n".join(out) + "\n")
    return EXIT_CLEAN
