"""Expand a netlist into one flat design: includes, libraries, parameters, subcircuits.

Subcircuit contents are named by their instance path (`X2.Dled`, nets `x2.mid`), ground is
`0` (and `gnd`), `.global` nets keep their names, and an X line whose subcircuit is not
defined is kept as one black-box part. Before anything is expanded, the flattened size is
computed from the definitions and refused above the limit, and recursion is refused with its
chain named. Every element keeps its card's location and the X lines it came through.
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field
from pathlib import Path

from drc.cards import Assign, Call, DotCard, ElementCard, Expr, LineCard, Str, Word
from drc.design import GROUND, Element, FlatDesign, Model, Source, ValueNote, Waveform
from drc.errors import InputError, Location
from drc.reader import read_text
from drc.values import parse_iec_code, parse_number, spice_reading_of_code

GROUND_NAMES = frozenset({"0", "gnd"})
WAVEFORMS = frozenset({"pulse", "sin", "pwl", "exp", "sffm", "am"})


@dataclass(frozen=True)
class Limits:
    """Bounds on the work one netlist may cause (the config's [limits] table sets them)."""

    max_elements: int = 1_000_000
    max_file_bytes: int = 16 * 1024 * 1024
    include_folders: tuple[Path, ...] = ()    # folders beside the top netlist's own tree
    confine: bool = True                      # refuse includes outside those folders
    max_depth: int = 64                       # subcircuit and include nesting (Python's stack)


@dataclass
class Subckt:
    name: Word
    ports: list[Word]
    defaults: list[Assign]
    body: "Scope"
    location: Location


@dataclass
class Scope:
    parent: "Scope | None" = None
    elements: list[ElementCard | LineCard] = field(default_factory=list)
    models: dict[str, DotCard] = field(default_factory=dict)
    params: list[Assign] = field(default_factory=list)
    subckts: dict[str, Subckt] = field(default_factory=dict)

    def find_subckt(self, key: str) -> Subckt | None:
        scope = self
        while scope is not None:
            if key in scope.subckts:
                return scope.subckts[key]
            scope = scope.parent
        return None


# ---------------------------------------------------------------------------- reading files


def read_source(path: Path, shown: str, limits: Limits, where: Location | None = None) -> str:
    """A file's text: UTF-8 (a byte-order mark is dropped), else Latin-1; binary refused."""
    where = where or Location(shown, 1, 1)
    try:
        size = path.stat().st_size
        if size > limits.max_file_bytes:
            raise InputError(where, f"{shown} is {size} bytes, above the limit of "
                             f"{limits.max_file_bytes} (limits.max_file_bytes)")
        data = path.read_bytes()
    except FileNotFoundError:
        raise InputError(where, f"no such file: {shown}") from None
    except IsADirectoryError:
        raise InputError(where, f"{shown} is a folder, not a netlist") from None
    except OSError as error:
        raise InputError(where, f"cannot read {shown}: {error.strerror or error}") from None
    if b"\x00" in data:
        raise InputError(Location(shown, data[: data.index(b"\x00")].count(b"\n") + 1, 1),
                         f"{shown} holds binary data (a NUL byte), not a netlist")
    try:
        return data.decode("utf-8-sig")
    except UnicodeDecodeError:
        return data.decode("latin-1")


class _Expander:
    def __init__(self, top: Path, shown: str, limits: Limits):
        self.top = top
        self.limits = limits
        # the folder the top netlist was named in (resolved), not its target's if it is a link
        self.root = top.absolute().parent.resolve()
        self.files: list[str] = [shown]
        self.sources: dict[str, list[str]] = {}
        self.globals: set[str] = set()
        self.temperatures: list[float] = []
        self.dot_cards: list[tuple[str, Location]] = []
        self.notes: list[ValueNote] = []
        self.noted: set[Location] = set()      # one note per value as typed, not per instance
        self.title = ""
        self.file_stack: list[Path] = []

    # -- structure ------------------------------------------------------------------------

    def load(self, path: Path, shown: str) -> Scope:
        text = read_source(path, shown, self.limits)
        parsed = read_text(text, shown, has_title=True)
        self.sources[shown] = parsed.lines
        self.title = parsed.title
        top = Scope()
        self.file_stack.append(path.resolve())
        open_subckts: list[tuple[Subckt, Scope]] = []
        scope = self._cards(parsed.cards, path, top, open_subckts)
        self.file_stack.pop()
        if open_subckts:
            sub = open_subckts[-1][0]
            raise InputError(sub.location, f"subcircuit '{sub.name.text}' has no '.ends'")
        assert scope is top
        return top

    def _cards(self, cards, path: Path, scope: Scope, open_subckts) -> Scope:
        skipping_section: DotCard | None = None
        for card in cards:
            kind = type(card)
            if skipping_section is not None:
                if kind is DotCard and card.keyword == "endl":
                    skipping_section = None
                continue
            if kind is LineCard or kind is ElementCard:
                scope.elements.append(card)
                continue
            if kind is not DotCard:
                self.dot_cards.append(("control", card.location))
                continue
            key = card.keyword
            if key == "subckt":
                scope = self._open_subckt(card, scope, open_subckts)
            elif key == "ends":
                if not open_subckts:
                    raise InputError(card.location, "'.ends' with no '.subckt' before it")
                sub, outer = open_subckts.pop()
                scope = outer
            elif key == "model":
                self._model_card(card, scope)
            elif key == "param":
                for f in card.fields:
                    if type(f) is not Assign:
                        raise InputError(f.location, "'.param' wants name=value")
                    scope.params.append(f)
            elif key in ("include", "inc"):
                if len(card.fields) != 1:
                    raise InputError(card.location, "'.include' wants one file name")
                target = self._resolve(card.fields[0], path)
                scope = self._include(target, card, scope, open_subckts, section=None)
            elif key == "lib":
                if len(card.fields) == 2:
                    target = self._resolve(card.fields[0], path)
                    scope = self._include(target, card, scope, open_subckts,
                                          section=_text(card.fields[1]).lower())
                elif len(card.fields) == 1:
                    skipping_section = card        # a section of a library: read by reference
                else:
                    raise InputError(card.location, "'.lib' wants a file and a section name")
            elif key == "endl":
                pass
            elif key == "global":
                for f in card.fields:
                    self.globals.add(_text(f).lower())
            elif key == "temp":
                for f in card.fields:
                    self.temperatures.append(self._number(f, None, "temperature"))
            elif key == "end":
                break
            else:
                self.dot_cards.append((key, card.location))
        if skipping_section is not None:
            name = _text(skipping_section.fields[0])
            hint = ""
            if "/" in name or "\\" in name or "." in name:
                # LTspice and some exporters write `.lib FILE` for a whole file
                hint = (f"; to read the whole file {name}, write '.include {name}' (a '.lib' that "
                        "reads a file names a section of it too: '.lib FILE SECTION')")
            raise InputError(skipping_section.location,
                             f"library section '{name}' with no '.endl'{hint}")
        return scope

    def _open_subckt(self, card: DotCard, scope: Scope, open_subckts) -> Scope:
        words = []
        defaults = []
        for f in card.fields:
            if type(f) is Assign:
                defaults.append(f)
            elif type(f) is Word and f.text.lower() == "params:":
                continue
            elif type(f) is Word and not defaults:
                words.append(f)
            else:
                raise InputError(f.location, "unexpected field in '.subckt'")
        if not words:
            raise InputError(card.location, "'.subckt' wants a name")
        body = Scope(parent=scope)
        sub = Subckt(words[0], words[1:], defaults, body, card.location)
        key = words[0].text.lower()
        scope.subckts[key] = sub
        open_subckts.append((sub, scope))
        return body

    def _model_card(self, card: DotCard, scope: Scope) -> None:
        if not card.fields or type(card.fields[0]) is not Word:
            raise InputError(card.location, "'.model' wants a name and a type")
        scope.models[card.fields[0].text.lower()] = card

    def _resolve(self, f, path: Path) -> tuple[Path, str, Location]:
        name = _text(f)
        target = Path(name)
        if not target.is_absolute():
            target = path.parent / target
        shown = name if Path(name).is_absolute() else os.path.normpath(
            os.path.join(os.path.dirname(f.location.path), name))
        if self.limits.confine:
            allowed = [self.root, *[Path(p).resolve() for p in self.limits.include_folders]]
            real = target.resolve()
            if not any(real == a or a in real.parents for a in allowed):
                raise InputError(f.location, f"include '{name}' is outside the netlist's folder "
                                 "and the folders the config allows (limits.include_folders)")
        return target, shown, f.location

    def _include(self, target, card: DotCard, scope: Scope, open_subckts, section):
        path, shown, where = target
        real = path.resolve()
        if real in self.file_stack:
            chain = " -> ".join(p.name for p in self.file_stack[self.file_stack.index(real):])
            raise InputError(where, f"include cycle: {chain} -> {path.name}")
        if len(self.file_stack) > self.limits.max_depth:
            raise InputError(where, f"includes nested deeper than {self.limits.max_depth} levels")
        text = read_source(path, shown, self.limits, where)
        parsed = read_text(text, shown, has_title=False)
        self.sources[shown] = parsed.lines
        if shown not in self.files:
            self.files.append(shown)
        cards = parsed.cards
        if section is not None:
            cards = _section(cards, section, where, shown)
        self.file_stack.append(real)
        scope = self._cards(cards, path, scope, open_subckts)
        self.file_stack.pop()
        return scope

    # -- values ---------------------------------------------------------------------------

    def _number(self, f, params, what: str) -> float:
        """A field's value: a SPICE number, a parameter, or an expression."""
        kind = type(f)
        if kind is Word:
            try:
                number = parse_number(f.text)
            except OverflowError:
                raise InputError(f.location, f"the number {f.text} overflows") from None
            if number is not None:
                return number.value
            return self._expression(f.text, f.location, params, what, braced=False)
        if kind is Expr:
            return self._expression(f.text, f.location, params, what, braced=True)
        raise InputError(f.location, f"{what} wants a number or an expression")

    def _expression(self, text, where: Location, params, what, braced: bool) -> float:
        # imported here: the expression grammar (and lark) only when a netlist has expressions
        from drc.expressions import ExpressionError, evaluate
        try:
            return evaluate(text, params.lookup if params is not None else {})
        except ExpressionError as error:
            column = where.column + (1 if braced else 0) + error.offset
            if not braced and error.message.startswith(("unexpected", "the expression ends")):
                raise InputError(where, f"{what} '{text}' is not a number or a parameter") from None
            raise InputError(Location(where.path, where.line, column), error.message) from None

    def element_value(self, f, params, element_name: str, letter: str) -> float:
        """An R, C or L value; reading notes on the text as typed (suffix-ambiguity)."""
        if type(f) is Word:
            text = f.text
            try:
                number = parse_number(text)
            except OverflowError:
                raise InputError(f.location, f"the number {text} overflows") from None
            if number is not None:
                note = _suffix_note(letter, text, number)
                if note is not None and f.location not in self.noted:
                    self.noted.add(f.location)
                    self.notes.append(ValueNote(element_name, text, number.value, number.value,
                                                note, f.location))
                return number.value
            code = parse_iec_code(text) if letter in "RCL" else None
            if code is not None and _code_fits(letter, text):
                if f.location in self.noted:
                    return code
                self.noted.add(f.location)
                spice = spice_reading_of_code(text)
                self.notes.append(ValueNote(
                    element_name, text, code, spice,
                    f"{_plain(code, letter)} in the IEC 60062 code; a SPICE simulator reads "
                    f"'{text}' as {_plain(spice, letter) if spice is not None else 'an error'}",
                    f.location))
                return code
        return self._number(f, params, f"{element_name}'s value")


def _code_fits(letter: str, text: str) -> bool:
    mark = next(ch for ch in text if ch.isalpha()).lower()
    return (mark in "rkmg") if letter == "R" else (mark in "pnuµμm")


_UNITS = {"R": "Ω", "C": "F", "L": "H"}


def _plain(value: float, letter: str) -> str:
    from drc.units import format_si
    return format_si(value, _UNITS.get(letter, ""))


def _suffix_note(letter: str, text: str, number) -> str | None:
    """What a value with a misleading suffix was probably meant to be, or None."""
    if letter == "R" and number.suffix == "M":
        mantissa = text[: len(text) - len(number.suffix) - len(number.trailing)]
        return (f"{text} reads as {_plain(number.value, 'R')} (M is milli in SPICE); a megohm "
                f"is written {mantissa}MEG")
    if letter == "C" and number.suffix.lower() == "f" and not number.trailing:
        mantissa = text[:-1]
        return (f"{text} reads as {_plain(number.value, 'C')} (F is femto in SPICE); "
                f"{mantissa} farad is written {mantissa}, and {mantissa} µF as {mantissa}u")
    return None


def _section(cards, section: str, where: Location, shown: str):
    inside = False
    out = []
    for card in cards:
        if type(card) is DotCard and card.keyword == "lib" and len(card.fields) == 1:
            inside = _text(card.fields[0]).lower() == section
            continue
        if type(card) is DotCard and card.keyword == "endl":
            if inside:
                return out
            continue
        if inside:
            out.append(card)
    if inside:
        raise InputError(where, f"library section '{section}' in {shown} has no '.endl'")
    raise InputError(where, f"{shown} has no library section '{section}'")


def _text(f) -> str:
    if type(f) in (Word, Str, Expr):
        return f.text
    raise InputError(f.location, "a name was expected here")


# ---------------------------------------------------------------------------- parameters


class Params:
    """Parameters of one scope, evaluated when first asked for; forward references work."""

    __slots__ = ("parent", "definitions", "values", "busy", "expander", "scope_name")

    def __init__(self, parent, definitions: dict, expander: _Expander, scope_name: str):
        self.parent = parent
        self.definitions = definitions          # key -> (field, evaluate-in Params or None)
        self.values: dict[str, float] = {}
        self.busy: set[str] = set()
        self.expander = expander
        self.scope_name = scope_name

    def lookup(self, key: str) -> float | None:
        if key in self.values:
            return self.values[key]
        if key in self.definitions:
            f, where = self.definitions[key]
            if key in self.busy:
                raise InputError(f.location, f"parameter '{key}' is defined in terms of itself")
            self.busy.add(key)
            value = self.expander._number(f, where if where is not None else self, f"parameter '{key}'")
            self.busy.discard(key)
            self.values[key] = value
            return value
        return self.parent.lookup(key) if self.parent is not None else None


# ---------------------------------------------------------------------------- flattening


def _count(scope: Scope, memo: dict, chain: list, depth: int = 64) -> int:
    """Elements a scope flattens to, counted from the definitions alone (black boxes count 1);
    instances nested deeper than `depth` are refused (the flattening recurses per level)."""
    if not any(s.subckts for s in _scope_chain(scope)):
        return len(scope.elements)      # no .subckt in reach: every card, X lines too, is one
    total = 0
    for card in scope.elements:
        if card.letter != "X":
            total += 1
            continue
        sub = scope.find_subckt(card.fields[0].text.lower())
        if sub is None:
            total += 1
            continue
        ident = id(sub)
        if len(chain) >= depth and ident not in memo:
            names = " -> ".join(s.name.text for s in chain[:3]) + " -> ..."
            raise InputError(card.location, f"subcircuit instances nested deeper than {depth} "
                             f"levels ({names})")
        if ident in memo:
            if memo[ident] is None:
                names = " -> ".join(s.name.text for s in chain) + f" -> {sub.name.text}"
                raise InputError(card.location, f"subcircuit recursion: {names}")
            total += memo[ident]
            continue
        memo[ident] = None
        chain.append(sub)
        memo[ident] = _count(sub.body, memo, chain, depth)
        chain.pop()
        total += memo[ident]
    return total


def _scope_chain(scope: Scope | None):
    """A scope and the scopes around it, innermost first (where find_subckt looks)."""
    while scope is not None:
        yield scope
        scope = scope.parent


def expand(path: str | Path, limits: Limits | None = None) -> FlatDesign:
    """Read, expand and flatten the netlist at `path` (shown in messages as given)."""
    limits = limits or Limits()
    shown = str(path)
    top_path = Path(path)
    ex = _Expander(top_path, shown, limits)
    if limits.confine and top_path.is_symlink():
        real = top_path.resolve()
        allowed = [ex.root, *[Path(p).resolve() for p in limits.include_folders]]
        if not any(real == a or a in real.parents for a in allowed):
            raise InputError(Location(shown, 1, 1), f"{shown} is a symbolic link to a file "
                             "outside its folder and the folders the config allows "
                             "(limits.include_folders)")
    top = ex.load(top_path, shown)
    size = _count(top, {}, [], limits.max_depth)
    if size > limits.max_elements:
        raise InputError(Location(shown, 1, 1), f"the flattened design would have {size} elements, "
                         f"above the limit of {limits.max_elements} (limits.max_elements)")
    flat = _Flattener(ex)
    params = Params(None, {a.key.text.lower(): (a.value, None) for a in top.params}, ex, "")
    flat.entered[id(top)] = ("", params)
    for a in top.params:
        params.lookup(a.key.text.lower())
    flat.walk(top, "", "", {}, params, ())
    for key in top.models:                    # the top level's models, used or not
        if key not in flat.models:
            flat.models[key] = flat._model(top.models[key], key, params)
    nets = sorted(flat.nets)
    return FlatDesign(path=shown, title=ex.title, elements=flat.elements, models=flat.models,
                      nets=nets, parameters=dict(params.values), files=ex.files,
                      sources=ex.sources, value_notes=ex.notes, temperatures_C=ex.temperatures,
                      dot_cards=ex.dot_cards)


class _Flattener:
    def __init__(self, ex: _Expander):
        self.ex = ex
        self.elements: list[Element] = []
        self.models: dict[str, Model] = {}
        self.nets: set[str] = set()
        self.entered: dict[int, tuple[str, Params]] = {}   # id(scope) -> (prefix, params)

    def net(self, text: str, prefix: str, ports: dict[str, str]) -> str:
        """The net key of a node as typed in a scope instance."""
        key = text.lower()
        if key in GROUND_NAMES:
            return GROUND
        if key in ports:
            return ports[key]
        if key in self.ex.globals or not prefix:
            return key
        return prefix + key

    def model_key(self, name: Word, scope: Scope, prefix: str, params: Params) -> str:
        key = name.text.lower()
        s = scope
        while s is not None:
            if key in s.models:
                # a model of an enclosing scope is named by the path of the instance through
                # which that scope was entered (the top's models have no prefix) and takes
                # that scope's parameters
                pre, own = (prefix, params) if s is scope else self.entered.get(id(s), ("", None))
                full = pre + key
                if full not in self.models:
                    self.models[full] = self._model(s.models[key], full, own)
                return full
            s = s.parent
        raise InputError(name.location, f"no .model named '{name.text}'")

    def _model(self, card: DotCard, key: str, params: Params | None) -> Model:
        fields = card.fields[1:]
        if not fields:
            raise InputError(card.location, f"'.model {card.fields[0].text}' wants a type")
        head = fields[0]
        if type(head) is Call:
            mtype, items = head.name.text, head.args
        elif type(head) is Word:
            mtype, items = head.text, fields[1:]
        else:
            raise InputError(head.location, "'.model' wants a type such as D or NPN")
        values = {}
        for item in items:
            if type(item) is Call and not values:      # `.model x D (IS=...)` read as a call
                items2 = item.args
                for a in items2:
                    if type(a) is Assign:
                        values[a.key.text.lower()] = self.ex._number(a.value, params, f"{a.key.text}")
                continue
            if type(item) is not Assign:
                if type(item) is Word and item.text.lower() in ("level",):
                    continue
                raise InputError(item.location, f"'.model' parameters are name=value, not '{_shown(item)}'")
            values[item.key.text.lower()] = self.ex._number(item.value, params, item.key.text)
        if mtype.lower() == "d":
            _check_diode(values, card)
        name = card.fields[0].text
        return Model(name=(key[: len(key) - len(name)] + name) if key.endswith(name.lower()) else name,
                     key=key, type=mtype.lower(), params=values, location=card.location)

    def walk(self, scope: Scope, prefix: str, shown_prefix: str, ports: dict[str, str],
             params: Params, instances: tuple[Location, ...]) -> None:
        ex = self.ex
        append = self.elements.append
        net = self.net
        new = tuple.__new__
        net_of: dict[str, str] = {}         # node as typed -> net key, in this scope instance
        model_of: dict[str, str] = {}       # model name as typed -> model key, likewise
        for card in scope.elements:
            nodes = []
            if type(card) is LineCard:
                # the reader's plain card: its texts, one space apart (no X line is one).
                # Words only for the fields after the nodes, as LineCard.words makes them,
                # the columns counted along the way (a method call and a join per card
                # cost the flattener some 6 %: measured)
                texts, path, line, column, count = card
                head_text = texts[0]
                location = new(Location, (path, line, column))
                column += len(head_text) + 1
                for node_text in texts[1:count + 1]:
                    key = net_of.get(node_text)
                    if key is None:
                        key = net_of[node_text] = net(node_text, prefix, ports)
                    nodes.append(key)
                    column += len(node_text) + 1
                fields = []
                for text in texts[count + 1:]:
                    fields.append(new(Word, (text, path, line, column)))
                    column += len(text) + 1
                fields = tuple(fields)
                letter = head_text[0].upper()
                name = shown_prefix + head_text
                nodes = tuple(nodes)
            else:
                head = card.name
                head_text = head.text
                letter = head_text[0].upper()
                name = shown_prefix + head_text
                for w in card.nodes:
                    node_text = w.text
                    key = net_of.get(node_text)
                    if key is None:
                        key = net_of[node_text] = net(node_text, prefix, ports)
                    nodes.append(key)
                nodes = tuple(nodes)
                fields = card.fields
                if letter == "X":
                    self._instance(card, scope, prefix, shown_prefix, ports, params, instances, nodes)
                    continue
                location = new(Location, head[1:])       # a Word is (text, path, line, column)
            value = value_text = model = source = None
            control = ()
            params_of = None
            if len(fields) == 1 and type(fields[0]) is not Assign:
                positional = fields                   # the common case: one value or model
                assigns = ()
            else:
                positional = [f for f in fields if type(f) is not Assign]
                assigns = [f for f in fields if type(f) is Assign]
            if letter in "RCL":
                value_field = positional[0] if positional else next(
                    (a.value for a in assigns if a.key.text.lower() in (letter.lower(), "value")), None)
                if value_field is None:
                    raise InputError(location, f"{head_text} has no value")
                value = ex.element_value(value_field, params, name, letter)
                if value < 0:
                    # a SPICE simulator takes it (as a modelling device); no part is one
                    raise InputError(value_field.location if type(value_field) in (Word, Expr)
                                     else location, f"{head_text}'s value must not be negative, "
                                     f"got {value:g}")
                value_text = value_field.text if type(value_field) in (Word, Expr) else None
                params_of = self._assigns(assigns, params) if assigns else {}
            elif letter == "D":
                if not positional or type(positional[0]) is not Word:
                    raise InputError(location, f"{head_text} names no diode model")
                typed = positional[0].text
                model = model_of.get(typed)
                if model is None:
                    model = model_of[typed] = self.model_key(positional[0], scope, prefix, params)
                params_of = self._assigns(assigns, params) if assigns else {}
                if len(positional) > 1:
                    value = ex._number(positional[1], params, f"{name}'s area")
                else:
                    value = params_of.get("area")
                if value is not None and not value > 0:
                    raise InputError(location, f"{head_text}'s area must be positive, got {value:g}")
            elif letter in "VI":
                source = self._source(card, positional, params, name)
                value = source.dc
            elif letter in "QJM":
                words = [f for f in positional if type(f) is Word]
                if words:
                    model = self._maybe_model(words, scope, prefix, params)
                params_of = self._assigns(assigns, params)
            elif letter in "EG":
                if positional and type(positional[0]) in (Word, Expr) and (
                        type(positional[0]) is Expr or parse_number(positional[0].text) is not None):
                    value = ex._number(positional[0], params, f"{name}'s gain")
            elif letter in "FH":
                if not positional or type(positional[0]) is not Word:
                    raise InputError(location, f"{head_text} names no controlling source")
                control = (prefix + positional[0].text.lower(),)
                if len(positional) > 1:
                    value = ex._number(positional[1], params, f"{name}'s gain")
            elif letter == "K":
                words = [f for f in positional if type(f) is Word]
                if len(words) < 3:
                    raise InputError(location, f"{head_text} wants two inductors and a coupling")
                control = (prefix + words[0].text.lower(), prefix + words[1].text.lower())
                value = ex._number(positional[2], params, f"{name}'s coupling")
            append(Element(name, name.lower(), letter, nodes, location, instances, value,
                           value_text, model, {} if params_of is None else params_of, source,
                           None, control))
        self.nets.update(net_of.values())

    def _maybe_model(self, words, scope, prefix, params):
        for w in words:
            s = scope
            while s is not None:
                if w.text.lower() in s.models:
                    return self.model_key(w, scope, prefix, params)
                s = s.parent
        return None

    def _assigns(self, assigns, params) -> dict[str, float]:
        out = {}
        for a in assigns:
            if type(a.value) in (Word, Expr):
                out[a.key.text.lower()] = self.ex._number(a.value, params, a.key.text)
        return out

    def _source(self, card, positional, params, name) -> Source:
        dc = None
        waveform = None
        ac: tuple[float, ...] = ()
        k = 0
        n = len(positional)
        ex = self.ex
        while k < n:
            f = positional[k]
            if type(f) is Call:
                kind = f.name.text.lower()
                if kind not in WAVEFORMS:
                    raise InputError(f.location, f"unknown source function '{f.name.text}'")
                what = f"{kind.upper()} argument"
                args = tuple(ex._number(a, params, what) for a in f.args if type(a) is not Assign)
                waveform = Waveform(kind, args)
                k += 1
                continue
            word = f.text.lower() if type(f) is Word else None
            if word == "dc":
                if k + 1 >= n:
                    raise InputError(f.location, f"{card.name.text}: DC wants a value")
                dc = ex._number(positional[k + 1], params, f"{name}'s DC value")
                k += 2
            elif word == "ac":
                values = []
                k += 1
                while k < n and len(values) < 2 and _is_value(positional[k]):
                    values.append(ex._number(positional[k], params, f"{name}'s AC value"))
                    k += 1
                ac = tuple(values)
            elif word in WAVEFORMS:
                args = []
                k += 1
                what = f"{word.upper()} argument"
                while k < n and _is_value(positional[k]):
                    args.append(ex._number(positional[k], params, what))
                    k += 1
                waveform = Waveform(word, tuple(args))
            elif dc is None and waveform is None and _is_value(f):
                dc = ex._number(f, params, f"{name}'s value")
                k += 1
            else:
                raise InputError(f.location, f"{card.name.text}: unexpected '{_shown(f)}' in a source")
        return Source(dc, waveform, ac)

    def _instance(self, card, scope, prefix, shown_prefix, ports, params, instances, nodes):
        sub_word = card.fields[0]
        sub = scope.find_subckt(sub_word.text.lower())
        assigns = [f for f in card.fields[1:] if type(f) is Assign]
        name = shown_prefix + card.name.text
        if sub is None:
            if assigns:
                raise InputError(sub_word.location, f"unknown subcircuit '{sub_word.text}' "
                                 "(an instance with parameters needs its .subckt)")
            self.elements.append(Element(name=name, key=name.lower(), kind="X", nodes=nodes,
                                         location=card.location, instances=instances,
                                         subckt=sub_word.text))
            return
        if len(nodes) != len(sub.ports):
            raise InputError(card.location, f"{card.name.text} connects {len(nodes)} nodes but "
                             f"subcircuit '{sub.name.text}' has {len(sub.ports)} ports")
        known = {d.key.text.lower() for d in sub.defaults}
        definitions = {d.key.text.lower(): (d.value, None) for d in sub.defaults}
        for a in assigns:
            key = a.key.text.lower()
            if key not in known and known:
                raise InputError(a.location, f"subcircuit '{sub.name.text}' has no parameter '{a.key.text}'")
            definitions[key] = (a.value, params)      # evaluated where the instance stands
        for a in sub.body.params:
            definitions[a.key.text.lower()] = (a.value, None)
        inner = Params(params, definitions, self.ex, name)
        inner_ports = {p.text.lower(): n for p, n in zip(sub.ports, nodes)}
        inner_prefix = prefix + card.name.text.lower() + "."
        before = self.entered.get(id(sub.body))
        self.entered[id(sub.body)] = (inner_prefix, inner)
        self.walk(sub.body, inner_prefix, name + ".", inner_ports, inner,
                  instances + (card.location,))
        if before is None:
            del self.entered[id(sub.body)]
        else:
            self.entered[id(sub.body)] = before


# diode model parameters that the diode law divides by or takes the logarithm of
_DIODE_POSITIVE = ("is", "js", "n", "ibv")
_DIODE_NONNEGATIVE = ("rs",)


def _check_diode(values: dict[str, float], card: DotCard) -> None:
    """A diode model's parameters inside the range the diode law is defined on."""
    for key in _DIODE_POSITIVE:
        if key in values and not values[key] > 0:
            raise InputError(card.location, f"'.model {card.fields[0].text}': {key.upper()} "
                             f"must be positive, got {values[key]:g}")
    for key in _DIODE_NONNEGATIVE:
        if key in values and not values[key] >= 0:
            raise InputError(card.location, f"'.model {card.fields[0].text}': {key.upper()} "
                             f"must not be negative, got {values[key]:g}")
    for key in ("tnom", "tref"):
        if key in values and not values[key] > -273.15:
            raise InputError(card.location, f"'.model {card.fields[0].text}': {key.upper()} "
                             f"is below absolute zero ({values[key]:g} °C)")


def _is_value(f) -> bool:
    if type(f) is Expr:
        return True
    if type(f) is not Word:
        return False
    try:
        return parse_number(f.text) is not None
    except OverflowError:
        return True


def _shown(f) -> str:
    return f.text if type(f) in (Word, Expr, Str) else getattr(getattr(f, "name", None), "text", "?")
