"""Finding and loading rules: the built-in ones in drc.rules, house rules from folders
(`--rules DIR`, the config's [house_rules] folders) and from installed packs (the entry-point
group `drc.rules`). All go through the same door (`_from_module`) and the same checks.

A pack's entry point names a rule module, a list of them, or a function that returns
either; in its pyproject.toml:

    [project.entry-points."drc.rules"]
    acme = "acme_drc_rules"              # a module with RULE and check
    acme-more = "acme_drc_rules:all"     # a function returning [module, ...]

`house-rule-failed` is a built-in rule of its own (rules/house_rule_failed.py) whose check
finds nothing: its findings come from loading here and from the runner (drc.running).
"""

from __future__ import annotations

import importlib
import importlib.util
import inspect
import pkgutil
import re
import sys
import traceback
from dataclasses import dataclass
from pathlib import Path
from typing import Callable

from drc.api import Rule
from drc.errors import InputError, Location

ENTRY_POINT_GROUP = "drc.rules"
BUILT_IN = "built-in"
HOUSE_RULE_FAILED = "house-rule-failed"


@dataclass
class LoadedRule:
    rule: Rule
    check: Callable
    help: str
    origin: str            # "built-in", or the folder or pack it came from
    path: str              # the module's file
    line: int              # where `check` is defined
    rule_line: int = 1     # where `RULE = ...` is
    wants_settings: bool = True     # check(design, settings), else check(design)

    @property
    def id(self) -> str:
        return self.rule.id

    @property
    def house(self) -> bool:
        """A rule from a folder or a pack: run isolated (drc.running)."""
        return self.origin != BUILT_IN


@dataclass
class LoadFailure:
    """A house rule module that could not be loaded: reported as `house-rule-failed`."""

    path: str
    line: int
    message: str


_RULE_LINE = re.compile(r"^RULE\s*[:=]")


def _rule_line(path: str) -> int:
    try:
        with open(path, encoding="utf-8") as handle:
            for number, text in enumerate(handle, 1):
                if _RULE_LINE.match(text):
                    return number
    except OSError:
        pass
    return 1


def _wants_settings(check: Callable) -> bool:
    try:
        parameters = list(inspect.signature(check).parameters.values())
    except (TypeError, ValueError):
        return True
    positional = [p for p in parameters if p.kind in (p.POSITIONAL_ONLY, p.POSITIONAL_OR_KEYWORD)]
    return len(positional) >= 2 or any(p.kind == p.VAR_POSITIONAL for p in parameters)


def _from_module(module, origin: str) -> LoadedRule:
    rule = getattr(module, "RULE", None)
    check = getattr(module, "check", None)
    path = getattr(module, "__file__", None) or module.__name__
    if not isinstance(rule, Rule):
        raise TypeError(f"{path}: no `RULE = Rule(...)` in the module (from drc.api import Rule)")
    if not callable(check):
        raise TypeError(f"{path}: no `check(design, settings)` function in the module")
    try:
        line = inspect.getsourcelines(check)[1]
    except (OSError, TypeError):
        line = 1
    help_text = inspect.cleandoc(rule.help or module.__doc__ or rule.summary)
    return LoadedRule(rule, check, help_text, origin, str(path), line, _rule_line(str(path)),
                      _wants_settings(check))


def builtin_rules() -> list[LoadedRule]:
    import drc.rules as package
    found = []
    for info in sorted(pkgutil.iter_modules(package.__path__), key=lambda i: i.name):
        if info.name.startswith("_"):
            continue
        module = importlib.import_module(f"drc.rules.{info.name}")
        found.append(_from_module(module, BUILT_IN))
    return found


def _error_line(error: BaseException, path: Path) -> int:
    if isinstance(error, SyntaxError) and error.lineno and error.filename and \
            Path(error.filename) == path:
        return error.lineno
    for frame in reversed(traceback.extract_tb(error.__traceback__)):
        if Path(frame.filename) == path:
            return frame.lineno or 1
    return 1


def _module_name(path: Path) -> str:
    stem = re.sub(r"\W", "_", path.stem)
    return f"drc_house_{abs(hash(str(path.resolve()))):x}_{stem}"


def folder_rules(folder: Path, where: Location | None = None) -> tuple[list[LoadedRule], list[LoadFailure]]:
    """Every `*.py` in a folder (not below it, and not names starting with `_`) as a rule."""
    if not folder.is_dir():
        raise InputError(where or Location(str(folder), 1, 1), f"no rule folder {folder}")
    loaded, failed = [], []
    for path in sorted(folder.glob("*.py")):
        if path.name.startswith("_"):
            continue
        name = _module_name(path)
        try:
            spec = importlib.util.spec_from_file_location(name, path)
            module = importlib.util.module_from_spec(spec)
            sys.modules[name] = module
            spec.loader.exec_module(module)
            loaded.append(_from_module(module, str(folder)))
        except Exception as error:            # a house rule's own fault: reported, not fatal
            sys.modules.pop(name, None)
            failed.append(LoadFailure(str(path), _error_line(error, path),
                                      f"{type(error).__name__}: {error}"))
    return loaded, failed


def _pack_failure(point, error: BaseException) -> LoadFailure:
    """Where a pack failed: the deepest frame outside importlib and drc, else its entry point."""
    here = Path(__file__).resolve().parent
    for frame in reversed(traceback.extract_tb(error.__traceback__)):
        name = Path(frame.filename)
        if frame.filename.startswith("<") or "importlib" in name.parts:
            continue
        if name.resolve().parent == here:
            continue
        return LoadFailure(frame.filename, frame.lineno or 1,
                           f"pack entry point {point.name} = {point.value!r}: "
                           f"{type(error).__name__}: {error}")
    if isinstance(error, SyntaxError) and error.filename:
        return LoadFailure(error.filename, error.lineno or 1, f"{type(error).__name__}: {error}")
    return LoadFailure(f"entry point {point.name} = {point.value}", 1,
                       f"{type(error).__name__}: {error}")


def pack_rules() -> tuple[list[LoadedRule], list[LoadFailure]]:
    """Rules from installed packs (the entry-point group `drc.rules`)."""
    from importlib.metadata import entry_points
    loaded, failed = [], []
    for point in sorted(entry_points(group=ENTRY_POINT_GROUP), key=lambda p: p.name):
        try:
            target = point.load()
            modules = target() if callable(target) and not hasattr(target, "RULE") else target
            modules = list(modules) if isinstance(modules, (list, tuple)) else [modules]
            dist = getattr(point, "dist", None)
            origin = f"pack {dist.name if dist is not None else point.name}"
            for module in modules:
                loaded.append(_from_module(module, origin))
        except Exception as error:
            failed.append(_pack_failure(point, error))
    return loaded, failed


def check_unique(rules: list[LoadedRule]) -> list[LoadedRule]:
    """The rules sorted by id; two with one id: status 2, naming both files."""
    seen: dict[str, LoadedRule] = {}
    errors = []
    for r in rules:
        other = seen.get(r.id)
        if other is not None and other is not r:
            errors.append(InputError(Location(r.path, r.rule_line, 1),
                                     f"rule id '{r.id}' is defined twice: in {other.path}:"
                                     f"{other.rule_line} and in {r.path}:{r.rule_line}"))
            continue
        seen[r.id] = r
    if errors:
        if len(errors) == 1:
            raise errors[0]
        from drc.errors import InputErrors
        raise InputErrors(errors)
    return sorted(seen.values(), key=lambda r: r.id)


def load_rules(folders: list[Path]) -> tuple[list[LoadedRule], list[LoadFailure]]:
    """Built-in rules, then installed packs, then folders; two rules with one id: status 2."""
    rules = builtin_rules()
    more, failures = pack_rules()
    rules += more
    for folder in folders:
        loaded, failed = folder_rules(Path(folder))
        rules += loaded
        failures += failed
    return check_unique(rules), failures


# Folders named by a config's [house_rules] folders, each loaded once per process (the
# engine may check files in several processes: each loads what its files need).
_CONFIG_FOLDERS: dict[Path, tuple[list[LoadedRule], list[LoadFailure]]] = {}


def config_folder_rules(folders: list[Path], where: Location | None = None
                        ) -> tuple[list[LoadedRule], list[LoadFailure]]:
    """The rules and load failures of a config's [house_rules] folders, each folder loaded
    once: a missing folder is status 2 at `where` (the key in the config)."""
    rules, failures = [], []
    for folder in folders:
        key = Path(folder).resolve()
        if key not in _CONFIG_FOLDERS:
            _CONFIG_FOLDERS[key] = folder_rules(Path(folder), where)
        loaded, failed = _CONFIG_FOLDERS[key]
        rules += loaded
        failures += failed
    return rules, failures


def folder_of(rule: LoadedRule) -> Path | None:
    """The folder a folder rule was loaded from (None for built-in and pack rules)."""
    if rule.origin == BUILT_IN or rule.origin.startswith("pack "):
        return None
    return Path(rule.path).resolve().parent
