"""Finding and loading rules: the built-in ones in drc.rules, house rules from folders
(`--rules DIR`, the config's [house_rules] folders) and from installed packs (the entry-point
group `drc.rules`). All go through the same door and the same checks."""

from __future__ import annotations

import importlib
import importlib.util
import inspect
import pkgutil
import sys
import traceback
from dataclasses import dataclass
from pathlib import Path
from typing import Callable

from drc.api import Rule
from drc.errors import InputError, Location

ENTRY_POINT_GROUP = "drc.rules"
BUILT_IN = "built-in"


@dataclass
class LoadedRule:
    rule: Rule
    check: Callable
    help: str
    origin: str            # "built-in", or the folder or pack it came from
    path: str              # the module's file
    line: int              # where `check` is defined

    @property
    def id(self) -> str:
        return self.rule.id


@dataclass
class LoadFailure:
    """A house rule module that could not be loaded: reported as `house-rule-failed`."""

    path: str
    line: int
    message: str


def _from_module(module, origin: str) -> LoadedRule:
    rule = getattr(module, "RULE", None)
    check = getattr(module, "check", None)
    path = getattr(module, "__file__", None) or module.__name__
    if not isinstance(rule, Rule):
        raise TypeError(f"{path}: no `RULE = Rule(...)` in the module")
    if not callable(check):
        raise TypeError(f"{path}: no `check(design, settings)` function in the module")
    try:
        line = inspect.getsourcelines(check)[1]
    except (OSError, TypeError):
        line = 1
    return LoadedRule(rule, check, inspect.cleandoc(module.__doc__ or rule.summary), origin,
                      str(path), line)


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
    if isinstance(error, SyntaxError) and error.lineno:
        return error.lineno
    for frame in reversed(traceback.extract_tb(error.__traceback__)):
        if Path(frame.filename) == path:
            return frame.lineno or 1
    return 1


def folder_rules(folder: Path, where: Location | None = None) -> tuple[list[LoadedRule], list[LoadFailure]]:
    """Every `*.py` in a folder (not below it, and not names starting with `_`) as a rule."""
    if not folder.is_dir():
        raise InputError(where or Location(str(folder), 1, 1), f"no rule folder {folder}")
    loaded, failed = [], []
    for path in sorted(folder.glob("*.py")):
        if path.name.startswith("_"):
            continue
        name = f"drc_house_{abs(hash(str(path.resolve()))):x}_{path.stem}"
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


def pack_rules() -> tuple[list[LoadedRule], list[LoadFailure]]:
    from importlib.metadata import entry_points
    loaded, failed = [], []
    for point in sorted(entry_points(group=ENTRY_POINT_GROUP), key=lambda p: p.name):
        try:
            target = point.load()
            modules = target() if callable(target) and not hasattr(target, "RULE") else target
            modules = modules if isinstance(modules, (list, tuple)) else [modules]
            for module in modules:
                loaded.append(_from_module(module, f"pack {point.dist.name if point.dist else point.name}"))
        except Exception as error:
            failed.append(LoadFailure(point.value, 1, f"{type(error).__name__}: {error}"))
    return loaded, failed


def load_rules(folders: list[Path]) -> tuple[list[LoadedRule], list[LoadFailure]]:
    """Built-in rules, then installed packs, then folders; two rules with one id: status 2."""
    rules = builtin_rules()
    failures: list[LoadFailure] = []
    more, failed = pack_rules()
    rules += more
    failures += failed
    for folder in folders:
        more, failed = folder_rules(Path(folder))
        rules += more
        failures += failed
    seen: dict[str, LoadedRule] = {}
    for r in rules:
        other = seen.get(r.id)
        if other is not None:
            raise InputError(Location(r.path, r.line, 1),
                             f"rule id '{r.id}' is defined twice: here and in {other.path}")
        seen[r.id] = r
    return sorted(rules, key=lambda r: r.id), failures
