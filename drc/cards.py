"""The cards of a netlist as plain data: what the reader makes of the grammar's trees.

Cards and fields are named tuples, because a board has hundreds of thousands of them; compare
them with `same_card`, which also compares their types. A card is a head (an element name or a dot keyword) and its fields. Fields are words, {}
or '' expressions, "strings", calls like PULSE(...) and key=value assignments, each with
the place where it was typed. Element cards also have their nodes split off.
"""

from __future__ import annotations

from typing import NamedTuple, Union

from drc.errors import InputError, Location


class Word(NamedTuple):
    """A word as typed, with where it was typed. The place is kept as plain fields (a board
    has a million words, and most locations are never asked for); `location` makes one."""

    text: str
    path: str
    line: int
    column: int

    @property
    def location(self) -> Location:
        return Location(self.path, self.line, self.column)


class Expr(NamedTuple):
    """An expression field; `text` is what stands inside the braces or quotes."""

    text: str
    location: Location


class Str(NamedTuple):
    """A double-quoted string; `text` is without the quotes."""

    text: str
    location: Location


class Call(NamedTuple):
    """A name with a parenthesised argument list: PULSE(0 1.8 ...), D(IS=1e-14)."""

    name: Word
    args: tuple["Field", ...]

    @property
    def location(self) -> Location:
        return self.name.location


class Assign(NamedTuple):
    key: Word
    value: "Field"

    @property
    def location(self) -> Location:
        return self.key.location


Field = Union[Word, Expr, Str, Call, Assign]


class ElementCard(NamedTuple):
    name: Word
    nodes: tuple[Word, ...]
    fields: tuple[Field, ...]      # everything after the nodes, in order

    @property
    def letter(self) -> str:
        return self.name.text[0].upper()

    @property
    def location(self) -> Location:
        return self.name.location


_new = tuple.__new__          # a named tuple made without its Python-level __new__


class LineCard(NamedTuple):
    """A plain one-line element card as the reader's fast path keeps it: the texts of its
    words, one space apart, and where the first one stands. It stands for the ElementCard
    its words make (`card`); the flattener reads the texts directly, so most cards never
    make a Word for each field."""

    texts: tuple[str, ...]         # the name, the nodes, the other fields
    path: str
    line: int
    column: int                    # of the name
    count: int                     # how many of texts[1:] are nodes

    def words(self) -> tuple[Word, ...]:
        """A Word for each text, where it was typed."""
        texts, path, line, column, _ = self
        out = []
        for text in texts:
            out.append(_new(Word, (text, path, line, column)))
            column += len(text) + 1
        return tuple(out)

    @property
    def card(self) -> ElementCard:
        words = self.words()
        return ElementCard(words[0], words[1:self.count + 1], words[self.count + 1:])

    @property
    def name(self) -> Word:
        return Word(self.texts[0], self.path, self.line, self.column)

    @property
    def nodes(self) -> tuple[Word, ...]:
        return self.card.nodes

    @property
    def fields(self) -> tuple[Field, ...]:
        return self.card.fields

    @property
    def letter(self) -> str:
        return self.texts[0][0].upper()

    @property
    def location(self) -> Location:
        return Location(self.path, self.line, self.column)


class DotCard(NamedTuple):
    keyword: str                   # lower-case, without the dot: "model", "subckt", ...
    head: Word                     # the keyword as typed
    fields: tuple[Field, ...]

    @property
    def location(self) -> Location:
        return self.head.location


class ControlCard(NamedTuple):
    """A `.control` ... `.endc` block: simulator commands, kept but not read."""

    location: Location
    text: str


Card = Union[ElementCard, LineCard, DotCard, ControlCard]

# Node counts of the element letters drc reads (SPICE3 and ngspice conventions).
# X takes as many nodes as stand before its subcircuit name.
NODE_COUNTS = {
    "R": 2, "C": 2, "L": 2, "D": 2, "V": 2, "I": 2,
    "E": 4, "G": 4, "F": 2, "H": 2, "B": 2,
    "Q": 3, "J": 3, "M": 4, "K": 0,
    "S": 4, "W": 2, "T": 4,
}
KNOWN_LETTERS = "".join(sorted(NODE_COUNTS)) + "X"


def element_card(name: Word, fields: tuple[Field, ...]) -> ElementCard:
    """Split an element's fields into nodes and the rest, by its letter."""
    letter = name.text[0].upper()
    if letter == "X":
        leading = 0
        for f in fields:
            if type(f) is not Word or f.text.lower() == "params:":
                break
            leading += 1
        if leading == 0:
            raise InputError(name.location, f"{name.text}: a subcircuit instance needs a subcircuit name")
        # the last leading word names the subcircuit; the words before it are nodes
        return ElementCard(name, tuple(fields[: leading - 1]), tuple(fields[leading - 1:]))
    count = NODE_COUNTS.get(letter)
    if count is None:
        raise InputError(name.location, f"unknown element letter '{name.text[0]}' in '{name.text}' "
                         f"(drc reads {', '.join(KNOWN_LETTERS)})")
    nodes = fields[:count]
    if len(nodes) < count or any(type(n) is not Word for n in nodes):
        found = sum(1 for n in nodes if type(n) is Word)
        raise InputError(name.location, f"{name.text}: too few nodes: a {letter} element needs "
                         f"{count}, found {found}")
    return ElementCard(name, tuple(nodes), tuple(fields[count:]))


def same_card(a, b) -> bool:
    """Equality that also compares types (named tuples alone compare as plain tuples). A
    LineCard compares as the ElementCard it stands for."""
    if type(a) is LineCard:
        a = a.card
    if type(b) is LineCard:
        b = b.card
    if type(a) is not type(b):
        return False
    if isinstance(a, tuple):
        return len(a) == len(b) and all(same_card(x, y) for x, y in zip(a, b))
    return a == b
