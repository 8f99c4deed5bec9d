"""The expanded design: one flat list of elements with their nets, models and origins.

This is what the expansion stage hands on; every later stage reads it and none changes it.
Names are kept as typed for display; `key` fields are lower-case, because SPICE compares
names without regard to case. Numbers are SI floats.
"""

from __future__ import annotations

from dataclasses import dataclass, field

from drc.errors import Location

GROUND = "0"


@dataclass(frozen=True, slots=True)
class Waveform:
    """A source's time-domain spec, e.g. PULSE(v1 v2 td tr tf pw per): its name and SI args."""

    kind: str                      # "pulse", "sin", "pwl", "exp", "sffm", "am" (lower-case)
    args: tuple[float, ...]


@dataclass(frozen=True, slots=True)
class Source:
    """What a V or I element gives: its DC value and, if any, its time-domain waveform."""

    dc: float | None = None        # None when the card gives no DC value
    waveform: Waveform | None = None
    ac: tuple[float, ...] = ()


@dataclass(frozen=True, slots=True)
class Model:
    """A `.model` card after expansion: parameters lower-case, values SI floats."""

    name: str                      # as typed; inside a subcircuit, its path: "X1.dmod"
    key: str                       # lower-case name used for lookup
    type: str                      # lower-case: "d", "npn", "nmos", "r", "c", ...
    params: dict[str, float]
    location: Location


@dataclass(frozen=True, slots=True)
class ValueNote:
    """A value whose text as typed likely means other than SPICE reads it (suffix-ambiguity)."""

    element: str                   # element path as displayed
    text: str                      # the value as typed, e.g. "1M" or "4k7"
    read_as: float                 # what drc uses
    spice_reads: float | None      # what a SPICE simulator reads the text as
    meant: str                     # what was probably meant, in words: "1 megohm (1MEG)"
    location: Location             # of the value field


@dataclass(slots=True)
class Element:
    """One flat element. `nodes` are net keys; ground is "0". Treat it as read-only: the
    expansion stage fills it in and nothing after it changes it."""

    name: str                      # path as typed: "X2.Dled"
    key: str                       # lower-case path: "x2.dled"
    kind: str                      # upper-case letter: "R", "C", "L", "D", "V", "I", "X", ...
    nodes: tuple[str, ...]
    location: Location             # of the card (its name field)
    instances: tuple[Location, ...] = ()   # the X lines it came through, outer first
    value: float | None = None     # R ohm, C farad, L henry, E/G/F/H gain, K coupling, D area
    value_text: str | None = None  # the value field as typed
    model: str | None = None       # key into FlatDesign.models (D Q M J, R/C with a model)
    params: dict[str, float] = field(default_factory=dict)   # instance parameters, SI
    source: Source | None = None   # V and I elements
    subckt: str | None = None      # X elements kept as black-box parts: the name used
    control: tuple[str, ...] = ()  # F/H: controlling source keys; K: coupled inductor keys


@dataclass(slots=True)
class FlatDesign:
    """A whole netlist after includes, parameters and subcircuits are expanded."""

    path: str                      # the top netlist as given on the command line
    title: str
    elements: list[Element]
    models: dict[str, Model]       # by key
    nets: list[str]                # every net key, ground included when used, sorted
    parameters: dict[str, float]   # top-level .param values
    files: list[str]               # every file read, the top one first
    sources: dict[str, list[str]]  # each file's lines as read, for quoting in reports
    value_notes: list[ValueNote] = field(default_factory=list)
    temperatures_C: list[float] = field(default_factory=list)   # from .temp cards
    dot_cards: list[tuple[str, Location]] = field(default_factory=list)  # others, kept

    by_key: dict[str, Element] = field(default_factory=dict, repr=False)

    def __post_init__(self) -> None:
        if not self.by_key:
            self.by_key = {e.key: e for e in self.elements}

    def element(self, name: str) -> Element | None:
        """The element with this path, compared without regard to case."""
        return self.by_key.get(name.lower())
