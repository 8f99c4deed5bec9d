"""The public rule API (version 1): what a rule module imports, for built-in and house rules.

A rule is a module with a docstring (its long help: what it finds, why it matters, how it is
computed, an example, the fix, the sources), a `RULE = Rule(...)` and a function
`check(design, settings)` that yields findings:

    '''What it finds: ...'''
    from drc.api import Rule, finding

    RULE = Rule(id="house-min-resistor", severity="warning",
                summary="indicator resistors of at least 100 ohm",
                settings={"least_ohm": 100.0})

    def check(design, settings):
        for branch in design.branches:
            for r in branch.resistors:
                if r.value < settings["least_ohm"]:
                    yield finding(r, f"{r.name} is {r.value:g} ohm", elements=[r.name])

Units: every number a rule reads or writes is an SI float in base units (volts, amperes,
ohms, farads, seconds, hertz; temperatures in degrees Celsius, as the report gives them);
settings given in the config as quantities ("100 ohm") arrive as SI floats too.
`format_quantity(0.0005, "A")` gives "0.500 mA" for messages.
The design a rule receives is read-only: see `drc.analysis.Design` for its attributes.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Iterable, Mapping

from drc.errors import Location
from drc.units import format_si as format_quantity

API_VERSION = 1
SEVERITIES = ("error", "warning", "note")

__all__ = ["API_VERSION", "SEVERITIES", "Rule", "Finding", "finding", "format_quantity",
           "Location", "worst_low", "worst_high", "corner", "corner_words", "branch_cautions",
           "needed_voltage", "series_resistor_advice", "format_resistance", "GROUND",
           "rerun_pump", "schottky_params", "flicker_of_branch", "flicker", "preferred"]


def __getattr__(name):
    # the analysis helpers load numpy and the solver: only when a rule asks for them
    if name in ("worst_low", "worst_high", "corner", "corner_words", "branch_cautions",
                "needed_voltage", "series_resistor_advice", "rerun_pump", "schottky_params",
                "flicker_of_branch"):
        from drc import advice
        return getattr(advice, name)
    if name == "format_resistance":
        from drc.preferred import format_resistance
        return format_resistance
    if name in ("flicker", "preferred"):
        import importlib
        return importlib.import_module(f"drc.{name}")
    if name == "GROUND":
        from drc.design import GROUND
        return GROUND
    raise AttributeError(name)


@dataclass(frozen=True)
class Rule:
    """A rule's identity: its id (lower-case words joined by '-'), default severity, a
    one-line summary, the published sources it rests on, and its settings with defaults."""

    id: str
    severity: str
    summary: str
    sources: tuple[str, ...] = ()
    settings: Mapping[str, Any] = field(default_factory=dict)

    def __post_init__(self):
        if self.severity not in SEVERITIES:
            raise ValueError(f"rule {self.id}: severity must be one of {', '.join(SEVERITIES)}")


@dataclass
class Finding:
    """One violation, located at an element's card (or any location)."""

    message: str
    location: Location
    elements: list[str] = field(default_factory=list)
    nets: list[str] = field(default_factory=list)
    corner: dict | None = None
    values: dict[str, float] = field(default_factory=dict)
    fix: str = ""
    caution: str = ""
    severity: str | None = None        # None: the rule's severity (after the config's say)
    rule: str = ""                     # filled in by the engine


def finding(at, message: str, *, elements: Iterable[str] = (), nets: Iterable[str] = (),
            corner: dict | None = None, values: Mapping[str, float] | None = None,
            fix: str = "", caution: str = "", severity: str | None = None) -> Finding:
    """A finding at `at`: an element (its card's location) or a Location."""
    location = at if isinstance(at, Location) else at.location
    names = list(elements)
    if not names and not isinstance(at, Location):
        names = [at.name]
    return Finding(message=message, location=location, elements=names, nets=list(nets),
                   corner=corner, values=dict(values or {}), fix=fix, caution=caution,
                   severity=severity)
