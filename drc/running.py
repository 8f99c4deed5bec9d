"""Running the rules on an analysed design: each rule's settings from the config (checked
and turned into SI floats), its severity, its findings stamped with its id; and house rules
isolated, so that one that raises or runs too long becomes a `house-rule-failed` finding.

The time limit (`[limits] house_rule_time`, default 10 s) is kept in-process:

* in the main thread on a system with SIGALRM (Linux, macOS): `signal.setitimer` arms a
  real-time timer whose handler raises `RuleOverran` inside the rule, wherever it is
  (between Python bytecodes; a long C call such as one numpy operation ends first). It is a
  BaseException, so a rule's own `except Exception` cannot swallow it. The previous handler
  and timer are put back after each rule.
* elsewhere (another thread, Windows): the rule runs in a daemon thread and the runner
  waits at most the limit; a rule still running then is reported, and RuleOverran is raised
  in its thread (CPython's PyThreadState_SetAsyncExc) so that it stops at its next bytecode;
  one stuck in a single long C call is abandoned until that call returns, and its results,
  if it ever ends, are ignored.

Built-in rules run directly, with no limit: a fault in one is drc's own (exit status 3).
"""

from __future__ import annotations

import difflib
import signal
import sys
import threading
import time
import traceback
from pathlib import Path
from typing import Any, Callable

from drc.api import SEVERITIES, Finding, Setting, SETTING_UNITS
from drc.errors import InputError, InputErrors, Location
from drc.quantities import parse_quantity
from drc.registry import (HOUSE_RULE_FAILED, LoadedRule, LoadFailure, check_unique,
                          config_folder_rules, folder_of)

RUNNER_KEYS = ("severity", "enabled")
DEFAULT_TIME_LIMIT_S = 10.0


class RuleOverran(BaseException):
    """Raised inside a house rule whose time ran out (SIGALRM)."""


class RuleFault(Exception):
    """A house rule's fault: where in its file, and what."""

    def __init__(self, line: int, message: str):
        super().__init__(message)
        self.line = line
        self.message = message


# ---------------------------------------------------------------------------- settings

def _where(context, rule_id: str, key: str | None = None) -> Location | None:
    """The config location of [rule."ID"] key (the label may be written in any case)."""
    path = ("rule", rule_id) + ((key,) if key else ())
    found = context.location_of(*path)
    if found is not None and found != context.location_of("rule"):
        return found
    for known, location in getattr(context, "key_locations", {}).items():
        if len(known) == len(path) and known[0] == "rule" and known[1].lower() == rule_id \
                and (key is None or known[2] == key):
            return location
    return found


def _read_setting(rule: LoadedRule, name: str, value: Any, where: Location | None) -> Any:
    declared: Setting = rule.rule.setting(name)
    header = f'[rule."{rule.id}"]'
    if declared.unit is not None:
        try:
            return parse_quantity(value, SETTING_UNITS[declared.unit], where, name)
        except InputError as error:
            raise InputError(error.location, f"{header} {error.message}") from None
    default = declared.default
    if declared.choices:
        if value not in declared.choices:
            close = difflib.get_close_matches(str(value), [str(c) for c in declared.choices], n=1)
            hint = f"; did you mean {close[0]!r}?" if close else ""
            raise InputError(where, f"{header} {name} is one of "
                                    f"{', '.join(repr(c) for c in declared.choices)}, "
                                    f"not {value!r}{hint}")
        return value
    if default is None:
        return value
    if isinstance(default, bool):
        ok = isinstance(value, bool)
    elif isinstance(default, int):
        ok = isinstance(value, int) and not isinstance(value, bool)
    elif isinstance(default, float):
        ok = isinstance(value, (int, float)) and not isinstance(value, bool)
        value = float(value) if ok else value
    elif isinstance(default, (list, tuple)):
        ok = isinstance(value, list)
    else:
        ok = isinstance(value, type(default))
    if not ok:
        kind = {bool: "true or false", int: "a whole number", float: "a number",
                str: "a string", list: "a list", tuple: "a list"}.get(type(default), type(default).__name__)
        raise InputError(where, f"{header} {name} wants {kind} (its default is {default!r}), "
                                f"got {value!r}")
    return value


def rule_settings(rule: LoadedRule, context) -> tuple[bool, str, dict[str, Any]]:
    """(enabled, severity, settings) for one rule from the config's [rule."ID"] table:
    defaults, then the config's values read as the rule declares them. Unknown settings are
    errors at their key, with the closest declared name suggested."""
    own = context.rules.get(rule.id, {}) if context is not None else {}
    settings = rule.rule.defaults()
    if rule.id == HOUSE_RULE_FAILED:
        return True, "error", settings
    errors = []
    for key, value in own.items():
        if key in RUNNER_KEYS:
            continue
        where = _where(context, rule.id, key)
        if key not in rule.rule.settings:
            names = list(rule.rule.settings) + list(RUNNER_KEYS)
            close = difflib.get_close_matches(key, names, n=1, cutoff=0.6)
            hint = f"; did you mean {close[0]!r}?" if close else ""
            declared = ", ".join(rule.rule.settings) or "none of its own"
            errors.append(InputError(where, f'unknown setting {key!r} for rule {rule.id!r} in '
                                            f'[rule."{rule.id}"]{hint} (its settings: {declared}; '
                                            f'and severity, enabled)'))
            continue
        try:
            settings[key] = _read_setting(rule, key, value, where)
        except InputError as error:
            errors.append(error)
    if errors:
        raise errors[0] if len(errors) == 1 else InputErrors(errors)
    return own.get("enabled", True) is not False, own.get("severity", rule.rule.severity), settings


# ---------------------------------------------------------------------------- isolation

def _line_in(tb_frames, path: str, fallback: int) -> int:
    target = Path(path).resolve()
    for frame in reversed(tb_frames):
        try:
            if Path(frame.filename).resolve() == target:
                return frame.lineno or fallback
        except (OSError, ValueError):
            continue
    return fallback


def _collect(rule: LoadedRule, design, settings) -> list[Finding]:
    produced = rule.check(design, settings) if rule.wants_settings else rule.check(design)
    found = list(produced or ())
    for f in found:
        if not isinstance(f, Finding):
            raise TypeError(f"check yielded {type(f).__name__} {f!r:.60}, not a Finding "
                            "(make one with drc.api.finding)")
        if f.severity is not None and f.severity not in SEVERITIES:
            raise ValueError(f"a finding's severity is {f.severity!r}, not one of {', '.join(SEVERITIES)}")
    return found


def _with_alarm(call: Callable[[], list], seconds: float) -> list:
    def on_alarm(signum, frame):
        raise RuleOverran()
    previous = signal.signal(signal.SIGALRM, on_alarm)
    earlier = signal.setitimer(signal.ITIMER_REAL, 0)
    try:
        try:
            signal.setitimer(signal.ITIMER_REAL, seconds)
            return call()
        finally:
            signal.setitimer(signal.ITIMER_REAL, 0)
    finally:
        signal.signal(signal.SIGALRM, previous)
        if earlier[0] > 0:
            signal.setitimer(signal.ITIMER_REAL, *earlier)


def _stop_thread(worker: threading.Thread) -> bool:
    """Ask an overrunning rule's thread to stop: CPython raises RuleOverran (a BaseException,
    which a rule's own `except Exception` does not catch) in it at its next bytecode. A rule
    stuck inside one long C call stops when that call returns. Without this, an abandoned
    loop would hold the interpreter's lock and slow every other thread to a crawl."""
    import ctypes
    ctypes.pythonapi.PyThreadState_SetAsyncExc(ctypes.c_ulong(worker.ident),
                                               ctypes.py_object(RuleOverran))
    worker.join(1.0)
    return not worker.is_alive()


def _in_thread(call: Callable[[], list], seconds: float, rule: LoadedRule) -> list:
    box: dict[str, Any] = {}

    def work():
        try:
            box["found"] = call()
        except BaseException as error:       # reported by the caller
            box["error"] = error

    worker = threading.Thread(target=work, name=f"drc-rule-{rule.id}", daemon=True)
    worker.start()
    worker.join(seconds)
    if worker.is_alive():
        frame = sys._current_frames().get(worker.ident)
        stack = traceback.extract_stack(frame) if frame is not None else []
        stopped = _stop_thread(worker)
        raise RuleFault(_line_in(stack, rule.path, rule.line), "" if not stopped else "stopped")
    if "error" in box:
        raise box["error"]
    return box["found"]


def run_isolated(rule: LoadedRule, design, settings, seconds: float) -> list[Finding]:
    """A house rule's findings; RuleFault(line, message) for any fault of its own."""
    call = lambda: _collect(rule, design, settings)     # noqa: E731
    started = time.monotonic()
    alarm = (hasattr(signal, "setitimer") and
             threading.current_thread() is threading.main_thread())
    try:
        if alarm:
            return _with_alarm(call, seconds)
        return _in_thread(call, seconds, rule)
    except RuleOverran as stop:
        line = _line_in(traceback.extract_tb(stop.__traceback__), rule.path, rule.line)
        raise RuleFault(line, f"ran past its time limit of {seconds:g} s") from None
    except RuleFault as fault:
        if fault.message == "stopped":
            raise RuleFault(fault.line, f"ran past its time limit of {seconds:g} s "
                                        "(stopped in its thread)") from None
        if not fault.message:
            raise RuleFault(fault.line, f"ran past its time limit of {seconds:g} s "
                                        "(abandoned, still running)") from None
        raise
    except Exception as error:
        line = _line_in(traceback.extract_tb(error.__traceback__), rule.path, rule.line)
        spent = time.monotonic() - started
        raise RuleFault(line, f"raised {type(error).__name__}: {error}"
                              + (f" after {spent:.1f} s" if spent >= 1 else "")) from None


def failure_finding(rule_path: str, line: int, message: str, rule_id: str | None = None,
                    netlist: str | None = None) -> Finding:
    """The `house-rule-failed` finding for a rule at `rule_path:line`."""
    try:                        # as the report shows paths: relative when below the working folder
        rule_path = str(Path(rule_path).absolute().relative_to(Path.cwd()))
    except ValueError:
        pass
    who = f"house rule {rule_id} ({rule_path}:{line})" if rule_id else f"house rule {rule_path}:{line}"
    on = f" (checking {netlist})" if netlist else ""
    return Finding(message=f"{who} {message}{on}; its findings are left out, every other rule ran",
                   location=Location(rule_path, line, 1), elements=[], nets=[],
                   values={}, fix="fix the rule module (see drc explain house-rule-failed)",
                   severity="error", rule=HOUSE_RULE_FAILED)


# ---------------------------------------------------------------------------- the runner

def rules_for(rules: list[LoadedRule], context) -> tuple[list[LoadedRule], list[LoadFailure]]:
    """`rules` and those of the config's [house_rules] folders (each loaded once per process;
    a folder already given with --rules is not loaded again); two rules with one id, or a
    [rule."ID"] table for no rule: status 2."""
    folders = list(getattr(context, "rule_folders", None) or [])
    failures: list[LoadFailure] = []
    if folders:
        have = {folder_of(r) for r in rules} - {None}
        wanted = [f for f in folders if Path(f).resolve() not in have]
        if wanted:
            extra, failures = config_folder_rules(wanted, context.location_of("house_rules", "folders"))
            rules = check_unique(list(rules) + extra)
    if context is not None:
        known = sorted(r.id for r in rules)
        errors = []
        for rule_id in context.rules:
            if rule_id not in known:
                close = difflib.get_close_matches(rule_id, known, n=1, cutoff=0.6)
                hint = f"; did you mean {close[0]!r}?" if close else ""
                errors.append(InputError(_where(context, rule_id),
                                         f'unknown rule {rule_id!r} in [rule."{rule_id}"]{hint}'))
        if errors:
            raise errors[0] if len(errors) == 1 else InputErrors(errors)
    return rules, failures


def run_rules(design, rules: list[LoadedRule], context) -> tuple[list[Finding], list[str]]:
    """Every enabled rule's findings, and the ids of the rules that ran: `rules` and those
    of the config's [house_rules] folders.

    Settings errors (unknown rule or setting, wrong unit or type) are gathered over every
    rule and raised together (InputErrors: status 2) before any rule runs."""
    rules, load_failures = rules_for(rules, context)
    plans, errors = [], []
    for rule in rules:
        try:
            plans.append((rule, *rule_settings(rule, context)))
        except InputErrors as many:
            errors.extend(many.errors)
        except InputError as one:
            errors.append(one)
    if errors:
        raise errors[0] if len(errors) == 1 else InputErrors(errors)
    limits = getattr(context, "limits", None)
    seconds = getattr(limits, "house_rule_seconds", None) or DEFAULT_TIME_LIMIT_S
    netlist = getattr(design, "path", None)
    findings: list[Finding] = [
        failure_finding(f.path, f.line, f"could not be loaded: {f.message}", netlist=netlist)
        for f in load_failures]
    ran = []
    for rule, enabled, severity, settings in plans:
        if not enabled:
            continue
        ran.append(rule.id)
        if rule.house:
            try:
                found = run_isolated(rule, design, settings, seconds)
            except RuleFault as fault:
                findings.append(failure_finding(rule.path, fault.line, fault.message, rule.id, netlist))
                continue
        else:
            found = _collect(rule, design, settings)
        configured = "severity" in context.rules.get(rule.id, {}) if context is not None else False
        for f in found:
            f.rule = rule.id
            f.severity = f.severity if (f.severity in SEVERITIES and not configured) else severity
            findings.append(f)
    return findings, ran
