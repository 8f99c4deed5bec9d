"""Read one netlist file into cards, keeping where every field was typed.

The grammar (grammar/netlist.lark) is the definition of the language. Most cards of an
exported schematic are plain one-line cards (`R12 a b 4.7k`); for those a fast path splits
the line on white space and gives exactly the result the grammar gives (a differential test,
tests/test_reader_fastpath.py, holds it to that). read_text keeps such a card, when its
words stand one space apart, as a LineCard (its texts and where the first starts), which
stands for the ElementCard its words make; `words_card` gives the card for one
spread over `+` continuation lines, and for one that ends in a call such as PULSE(...).
Two more fast paths read cards of words,
calls and key=value assignments, on one line (`simple_card`) or over `+` continuation lines
(`continued_card`). Every other card (braces, quotes, comments inside it) is parsed by the
grammar, which is built, with lark imported, only when a file has such a card.
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from functools import lru_cache
from importlib import resources

from drc.cards import (NODE_COUNTS, Assign, Call, Card, ControlCard, DotCard, ElementCard, Expr,
                       LineCard, Str, Word, element_card)
from drc.errors import InputError, Location


@dataclass(slots=True)
class ParsedFile:
    path: str
    title: str
    cards: list[Card]
    lines: list[str]


@lru_cache(maxsize=1)
def netlist_parser():
    from lark import Lark
    text = resources.files("drc.grammar").joinpath("netlist.lark").read_text(encoding="utf-8")
    return Lark(text, parser="lalr", lexer="contextual", start=["netlist", "card"],
                maybe_placeholders=False)


_ASCII_LETTERS = frozenset("abcdefghijklmnopqrstuvwxyzABCDEFGHIJKLMNOPQRSTUVWXYZ")
# A plain card: words only, none of the characters that open groups, expressions, strings,
# assignments, comments or separators.
_PLAIN = re.compile(r"[^\s(){}'\"=,;$]+(?:[ \t\f]+[^\s(){}'\"=,;$]+)*[ \t\f\r]*")
_TOKEN = re.compile(r"[^ \t\f\r]+")


@lru_cache(maxsize=1)
def _to_cards():
    """The transformer class that turns the grammar's tree into cards (made on first use)."""
    from lark import Token, Transformer

    class _ToCards(Transformer):
        """Turns the grammar's tree into cards; locations are shifted by the card's first line."""

        def __init__(self, path: str, line_offset: int):
            super().__init__(visit_tokens=False)
            self.path = path
            self.line_offset = line_offset

        def _loc(self, token) -> Location:
            return Location(self.path, token.line + self.line_offset, token.column)

        def _word(self, token) -> Word:
            return Word(str(token), self.path, token.line + self.line_offset, token.column)

        def word(self, children):
            (t,) = children
            return self._word(t)

        def expr(self, children):
            (t,) = children
            return Expr(str(t)[1:-1], self._loc(t))

        def string(self, children):
            (t,) = children
            return Str(str(t)[1:-1], self._loc(t))

        def call(self, children):
            name, *args = children
            return Call(self._word(name), tuple(args))

        def assign(self, children):
            key, value = children
            return Assign(self._word(key), value)

        def element(self, children):
            name, *fields = children
            return element_card(self._word(name), tuple(fields))

        def dot_card(self, children):
            head, *fields = children
            word = self._word(head)
            return DotCard(str(head)[1:].lower(), word, tuple(fields))

        def control(self, children):
            (t,) = children
            return ControlCard(self._loc(t), str(t))

        def card(self, children):
            return children[0]

        def netlist(self, children):
            title = ""
            cards = []
            for c in children:
                if isinstance(c, Token):
                    title = str(c)
                else:
                    cards.append(c)
            return title, cards

    return _ToCards


def split_lines(text: str) -> list[str]:
    """Lines without their ends; CRLF and lone CR read as LF."""
    if "\r" in text:
        text = text.replace("\r\n", "\n").replace("\r", "\n")
    return text.split("\n")


_CONTROL = re.compile(r"\.control\b", re.I)


def _is_end(stripped: str) -> bool:
    low = stripped[:5].lower()
    return low == ".end" and (len(stripped) == 4 or stripped[4] in " \t")


_new = tuple.__new__          # a named tuple made without its Python-level __new__


def _spots(line: str, start: int, line_number: int) -> list[tuple[str, int, int]]:
    """(text, line, column) of each word of a line from `start` (its first word) on, split
    at spaces, tabs and form feeds."""
    if "\t" in line or "\f" in line or line.find("  ", start) >= 0:
        return [(m.group(), line_number, m.start() + 1) for m in _TOKEN.finditer(line, start)]
    out = []                   # one space between words: columns follow from the lengths
    column = start + 1
    for text in line.split():
        out.append((text, line_number, column))
        column += len(text) + 1
    return out


def _words(line: str, start: int, path: str, line_number: int) -> list[Word]:
    """The words of a line from `start` (its first word) on, as _spots splits them."""
    return [_new(Word, (text, path, row, column))
            for text, row, column in _spots(line, start, line_number)]


def plain_card(line: str, path: str, line_number: int) -> ElementCard | None:
    """The fast path: the card for a plain one-line element card, or None if it is not plain."""
    start = len(line) - len(line.lstrip(" \t\f"))
    if start >= len(line) or line[start] not in _ASCII_LETTERS or _PLAIN.fullmatch(line, start) is None:
        return None
    return _plain_element(_words(line, start, path, line_number))


def _plain_element(words: list[Word]) -> ElementCard:
    """element_card for a list of plain words (all of them Word), without its checks when
    they cannot fail."""
    count = NODE_COUNTS.get(words[0].text[0].upper())
    if count is None or len(words) <= count:     # X lines, unknown letters, too few nodes
        return element_card(words[0], tuple(words[1:]))
    return _new(ElementCard, (words[0], tuple(words[1:count + 1]), tuple(words[count + 1:])))


# braces, quotes, comments, and white space other than what separates fields (a no-break
# space or a vertical tab is no separator to the grammar: it reads those cards itself)
_SIMPLE_CHARS = re.compile(r"[{}'\";$]|[^\S \t\f\r]")
_SIMPLE_TOKEN = re.compile(r"[^\s(){}'\"=,;$]+|[()=,]")


def simple_card(line: str, path: str, line_number: int) -> Card | None:
    """The second fast path: a one-line card of words, calls and key=value assignments only
    (no braces, quotes, comments or continuation), or None when the grammar must read it."""
    start = len(line) - len(line.lstrip(" \t\f"))
    if start >= len(line) or _SIMPLE_CHARS.search(line, start) is not None:
        return None
    return _simple_tokens_card(_simple_tokens(line, start, path, line_number))


def continued_card(lines: list[str], first: int, last: int, path: str) -> Card | None:
    """The third fast path: a card of words, calls and assignments spread over `+` lines
    (lines[first] to lines[last], 0-based, with blank and comment lines between), or None
    when the grammar must read it. Each physical line is split as simple_card splits one;
    a '+' and the line end separate fields, as they do in the grammar."""
    line = lines[first]
    start = len(line) - len(line.lstrip(" \t\f"))
    if start >= len(line) or _SIMPLE_CHARS.search(line, start) is not None:
        return None
    tokens = _simple_tokens(line, start, path, first + 1)
    for k, line, stripped in _continuations(lines, first, last):
        if line is None:
            return None
        start = len(line) - len(stripped) + 1          # after the '+'
        if _SIMPLE_CHARS.search(line, start) is not None:
            return None
        tokens += _simple_tokens(line, start, path, k + 1)
    return _simple_tokens_card(tokens)


def _continuations(lines: list[str], first: int, last: int):
    """The `+` lines of a card spread over lines[first] to lines[last]: (index, line, line
    without its leading white space) for each, skipping the blank and comment lines between;
    (index, None, None) for a line that is neither, which ends the fast path's reading."""
    for k in range(first + 1, last + 1):
        line = lines[k]
        stripped = line.lstrip(" \t\f")
        if not stripped or stripped[0] != "+":
            if stripped and stripped[0] not in "*;":
                yield k, None, None
                return
            continue                                   # a blank or comment line between
        yield k, line, stripped


def _simple_tokens(line: str, start: int, path: str, line_number: int) -> list[Word]:
    """Each token from `start` on as a Word (the punctuation too); the commas are left out."""
    return [_new(Word, (text, path, line_number, m.start() + 1))
            for m in _SIMPLE_TOKEN.finditer(line, start) if (text := m.group()) != ","]


def words_card(lines: list[str], first: int, last: int, path: str) -> ElementCard | None:
    """The fast path for an element card of words that may end in one call of words, such as
    `VP1 pa 0 PULSE(0 1.8 0 10n 10n 0.25m 0.5m)`, on one line or over `+` lines (lines[first]
    to lines[last], 0-based, blank and comment lines between); None for any other card.

    Each line is split on white space as plain_card splits one (a '+' and the line end
    separate words too). The call's '(' must follow its name directly and its ')' must end
    the card: any other use of parentheses goes to simple_card or continued_card. The
    words are gathered as (text, line, column) first and each Word is made once, for the
    field it ends up in."""
    line = lines[first]
    stripped = line.lstrip(" \t\f")
    if not stripped or stripped[0] not in _ASCII_LETTERS or not _CALL_CLEAR(stripped):
        return None
    spots = _spots(line, len(line) - len(stripped), first + 1)
    if last > first:
        for k, line, stripped in _continuations(lines, first, last):
            if line is None or not _CALL_CLEAR(stripped):
                return None
            start = len(line) - len(stripped) + 1          # after the '+'
            spots += [(m.group(), k + 1, m.start() + 1) for m in _TOKEN.finditer(line, start)]
    texts = [spot[0] for spot in spots]
    opening = [n for n, text in enumerate(texts) if "(" in text]
    new = _new
    if not opening:
        if any(")" in text for text in texts):
            return None
        return _plain_element([new(Word, (text, path, row, column)) for text, row, column in spots])
    n = opening[0]
    call_text, call_row, call_column = spots[n]
    at = call_text.find("(")
    end = texts[-1]
    if (len(opening) != 1 or n == 0 or at == 0 or call_text.count("(") != 1
            or sum(")" in text for text in texts) != 1 or ")" not in end
            or end.find(")") != len(end) - 1):
        return None
    name = new(Word, (call_text[:at], path, call_row, call_column))
    # the call's arguments: what follows '(' in its word, the words after it, and what
    # stands before ')' in the last word
    pieces = [(call_text[at + 1:], call_row, call_column + at + 1), *spots[n + 1:]]
    end_text, end_row, end_column = pieces[-1]
    pieces[-1] = (end_text[:-1], end_row, end_column)
    args = tuple([new(Word, (text, path, row, column)) for text, row, column in pieces if text])
    words = [new(Word, (text, path, row, column)) for text, row, column in spots[:n]]
    return element_card(words[0], (*words[1:], Call(name, args)))


def _simple_tokens_card(tokens: list[Word]) -> Card | None:
    if not tokens:
        return None
    level = 0
    for t in tokens:                       # deep calls go to the grammar, which refuses them
        if t.text == "(":
            level += 1
            if level > MAX_NESTING:
                return None
        elif t.text == ")":
            level -= 1
    head = tokens[0]
    head_text = head.text
    if head_text[0] == ".":
        if not _DOT_NAME.fullmatch(head_text):
            return None
    elif head_text[0] not in _ASCII_LETTERS:
        return None
    fields, k = _simple_fields(tokens, 1)
    if fields is None or k != len(tokens):
        return None
    if head_text[0] == ".":
        return DotCard(head_text[1:].lower(), head, tuple(fields))
    return element_card(head, tuple(fields))


_DOT_NAME = re.compile(r"\.[A-Za-z][A-Za-z0-9_]*")
_PUNCT = frozenset("()=")


def _simple_fields(tokens, k):
    """Fields from tokens[k:] up to an unmatched ')' (as the grammar's `_field*` reads them)."""
    fields = []
    n = len(tokens)
    while k < n:
        word = tokens[k]
        text = word.text
        if text == ")":
            return fields, k
        if text in _PUNCT:
            return None, k
        nxt = tokens[k + 1][0] if k + 1 < n else None
        if nxt == "(":
            args, k = _simple_fields(tokens, k + 2)
            if args is None or k >= n or tokens[k][0] != ")":
                return None, k
            fields.append(Call(word, tuple(args)))
            k += 1
        elif nxt == "=":
            if k + 2 >= n or tokens[k + 2][0] in _PUNCT:
                return None, k
            value = tokens[k + 2]
            if k + 3 < n and tokens[k + 3][0] == "(":
                args, k = _simple_fields(tokens, k + 4)
                if args is None or k >= n or tokens[k][0] != ")":
                    return None, k
                fields.append(Assign(word, Call(value, tuple(args))))
                k += 1
            else:
                fields.append(Assign(word, value))
                k += 3
        else:
            fields.append(word)
            k += 1
    return fields, k


# What a plain card may not hold: the characters that open groups, expressions, strings,
# assignments and comments, and white space other than spaces, tabs and form feeds. A line
# clear of all of them, starting with a letter, is one _PLAIN matches (lines hold no CR or LF).
_NOT_PLAIN = frozenset("(){}'\"=,;$" "\n\v\r\x1c\x1d\x1e\x1f\x85\xa0\u1680\u2000\u2001\u2002"
                       "\u2003\u2004\u2005\u2006\u2007\u2008\u2009\u200a\u2028\u2029\u202f"
                       "\u205f\u3000")
# What words_card may not meet: the same, parentheses apart.
_CALL_CLEAR = (_NOT_PLAIN - frozenset("()")).isdisjoint
# _NOT_PLAIN as a character class: searching a line for one is quicker than the set test
_NOT_PLAIN_CHAR = re.compile("[" + re.escape("".join(sorted(_NOT_PLAIN))) + "]")
# element letters (either case) -> node count; X and unknown letters go through element_card
_COUNTS = {**{k.lower(): v for k, v in NODE_COUNTS.items()}, **NODE_COUNTS}


def read_text(text: str, path: str, has_title: bool = True) -> ParsedFile:
    """Cards of one file. A top netlist's first line is its title; an included file has none."""
    lines = split_lines(text)
    title = lines[0] if has_title and lines else ""
    cards: list[Card] = []
    append = cards.append
    n = len(lines)
    i = 1 if has_title else 0
    strips = [line.lstrip(" \t\f") for line in lines]
    letters = _ASCII_LETTERS
    unclear = _NOT_PLAIN_CHAR.search
    counts = _COUNTS
    new = _new
    while i < n:
        stripped = strips[i]
        if not stripped:
            i += 1
            continue
        first = stripped[0]
        if first == "*" or first == ";":
            i += 1
            continue
        line = lines[i]
        if first == "+":
            raise InputError(Location(path, i + 1, len(line) - len(stripped) + 1),
                             "a '+' continuation line with no card above it")
        # the card's last line: the last '+' line after it, past blank and comment lines
        last = i
        j = i + 1
        while j < n:
            nxt = strips[j]
            if not nxt or nxt[0] == "*" or nxt[0] == ";":
                j += 1
            elif nxt[0] == "+":
                last = j
                j += 1
            else:
                break
        if last == i and first in letters and unclear(stripped) is None:
            # the fast path, inlined (plain_card): a one-line card of words only
            # (its words one space apart and its nodes all there: a LineCard)
            start = len(line) - len(stripped)
            if "\t" not in stripped and "\f" not in stripped and "  " not in stripped:
                texts = tuple(stripped.split())
                count = counts.get(first)
                if count is not None and len(texts) > count:
                    append(new(LineCard, (texts, path, i + 1, start + 1, count)))
                    i = j        # the blank and comment lines after it are skipped too
                    continue
            append(_plain_element(_words(line, start, path, i + 1)))
            i = j
            continue
        if first == ".":
            if _is_end(stripped):
                break
            if _CONTROL.match(stripped):
                end = i + 1
                while end < n and not lines[end].lstrip().lower().startswith(".endc"):
                    end += 1
                if end == n:
                    raise InputError(Location(path, i + 1, len(line) - len(stripped) + 1),
                                     "'.control' block with no '.endc'")
                append(ControlCard(Location(path, i + 1, len(line) - len(stripped) + 1),
                                   "\n".join(lines[i:end + 1])))
                i = end + 1
                continue
        card = words_card(lines, i, last, path)
        if card is None:
            if last == i:
                card = simple_card(line, path, i + 1)
            else:
                card = continued_card(lines, i, last, path)
        append(card if card is not None else parse_card("\n".join(lines[i:last + 1]), path, i))
        i = j
    return ParsedFile(path, title, cards, lines)


MAX_NESTING = 64         # parentheses in one card, outside braces and quotes


def _too_deep(text: str) -> tuple[int, int] | None:
    """(line, column) of the first '(' nested deeper than MAX_NESTING, outside braces,
    quotes and comments, or None. The grammar's tree is walked recursively, so a card
    nested thousands deep would exhaust Python's stack."""
    level = braces = 0
    quote = None
    line, col = 1, 0
    in_comment = False
    for ch in text:
        col += 1
        if ch == "\n":
            line, col, in_comment, quote = line + 1, 0, False, None
            continue
        if in_comment:
            continue
        if quote is not None:
            if ch == quote:
                quote = None
        elif ch in "'\"" and not braces:
            quote = ch
        elif ch == ";" and not braces:
            in_comment = True
        elif ch == "{":
            braces += 1
        elif ch == "}":
            braces = max(braces - 1, 0)
        elif not braces and ch == "(":
            level += 1
            if level > MAX_NESTING:
                return line, col
        elif not braces and ch == ")":
            level = max(level - 1, 0)
    return None


def parse_card(text: str, path: str, line_offset: int) -> Card:
    """One card's text (its continuation lines included) through the grammar."""
    from lark.exceptions import UnexpectedInput
    deep = _too_deep(text) if text.count("(") > MAX_NESTING else None
    if deep is not None:
        raise InputError(Location(path, deep[0] + line_offset, deep[1]),
                         f"parentheses nested deeper than {MAX_NESTING} levels")
    try:
        tree = netlist_parser().parse(text, start="card")
    except UnexpectedInput as error:
        raise _syntax_error(error, text, path, line_offset) from None
    return _transform(_to_cards()(path, line_offset), tree)


def _transform(transformer, tree):
    from lark.exceptions import VisitError
    try:
        return transformer.transform(tree)
    except VisitError as error:
        if isinstance(error.orig_exc, InputError):
            raise error.orig_exc from None
        raise


def parse_whole(text: str, path: str) -> tuple[str, list[Card]]:
    """A whole file through the grammar alone (the reference the fast path is tested against)."""
    from lark.exceptions import UnexpectedInput
    try:
        tree = netlist_parser().parse(text if text.endswith("\n") else text + "\n", start="netlist")
    except UnexpectedInput as error:
        raise _syntax_error(error, text, path, 0) from None
    title, cards = _transform(_to_cards()(path, 0), tree)
    for k, card in enumerate(cards):
        if type(card) is DotCard and card.keyword == "end":
            return title, cards[:k]
    return title, cards


def _syntax_error(error, text: str, path: str, line_offset: int) -> InputError:
    from lark.exceptions import UnexpectedCharacters, UnexpectedEOF, UnexpectedToken
    line = getattr(error, "line", 1) or 1
    column = getattr(error, "column", 1) or 1
    where = Location(path, line + line_offset, column)
    opened = _unclosed(text)
    if opened is not None:
        char, (oline, ocol) = opened
        what = {"(": "parenthesis '('", "{": "brace '{'", "'": "quote '", '"': 'quote "'}[char]
        return InputError(Location(path, oline + line_offset, ocol), f"unclosed {what} opened here")
    if isinstance(error, UnexpectedCharacters):
        char = text[error.pos_in_stream] if error.pos_in_stream < len(text) else "?"
        if char == ")":
            return InputError(where, "')' with no '(' before it")
        if char == "}":
            return InputError(where, "'}' with no '{' before it")
        return InputError(where, f"unexpected character {char!r}")
    if isinstance(error, UnexpectedToken):
        token = error.token
        start = len(text) if token.type == "$END" or token.start_pos is None else token.start_pos
        if text[:start].rstrip().endswith("="):
            eq = text.rindex("=", 0, start)
            eq_line = text.count("\n", 0, eq) + 1
            eq_col = eq - (text.rfind("\n", 0, eq) + 1) + 1
            return InputError(Location(path, eq_line + line_offset, eq_col),
                              "'=' with no value after it")
        if token.type == "$END":
            return InputError(where, "the card ends too early")
        raw = str(token)
        if raw and raw[0].isspace() and raw[0] not in " \t\f\r\n":
            return InputError(where, f"unexpected white space {raw[0]!r} (only spaces and tabs "
                              "separate fields)")
        shown = raw.strip() or token.type
        if len(shown) > 40:                    # a hostile token is not echoed whole
            shown = shown[:40] + "..."
        if shown == ")":
            return InputError(where, "')' with no '(' before it")
        if shown == "=":
            return InputError(where, "'=' with no parameter name before it")
        return InputError(where, f"unexpected {shown!r}")
    if isinstance(error, UnexpectedEOF):
        if text.rstrip().endswith("="):
            eq = text.rstrip().rindex("=")
            return InputError(Location(path, text.count("\n", 0, eq) + 1 + line_offset,
                                       eq - (text.rfind("\n", 0, eq) + 1) + 1),
                              "'=' with no value after it")
        return InputError(where, "the card ends too early")
    return InputError(where, "syntax error")


def _unclosed(text: str):
    """The first bracket or quote left open in a card's text, with its (line, column)."""
    stack = []
    line, col = 1, 0
    quote = None
    in_comment = False
    for ch in text:
        col += 1
        if ch == "\n":
            if quote is not None:
                return quote
            in_comment = False
            line, col = line + 1, 0
            continue
        if in_comment:
            continue
        if quote is not None:
            if ch == quote[0]:
                quote = None
            continue
        if ch == ";":
            in_comment = True
        elif ch in "'\"":
            quote = (ch, (line, col))
        elif ch in "({":
            stack.append((ch, (line, col)))
        elif ch == ")" and stack and stack[-1][0] == "(":
            stack.pop()
        elif ch == "}" and stack and stack[-1][0] == "{":
            stack.pop()
    if quote is not None:
        return quote
    if stack:
        return stack[0] if stack[0][0] == "{" else stack[-1]
    return None
