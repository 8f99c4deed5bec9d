"""The reader's fast paths (`plain_card`, `simple_card`, `continued_card`) against the grammar.

The grammar (grammar/netlist.lark, read by `parse_whole`) is the definition of the language;
the fast paths are an optimisation and must give exactly the cards it gives, types and
locations included (compared with `same_card`). Checked over the whole test corpus and the
samples, and over generated cards: plain ones, ones with calls, assignments, commas, odd
spacing and tabs, the same split over `+` continuation lines (with blank and comment lines
between), and ones the fast paths must refuse (braces, quotes, comments), which must still
come out as the grammar reads them.
"""

from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings, strategies as st

from drc.cards import same_card
from drc.errors import InputError
from drc.reader import (continued_card, parse_card, parse_whole, plain_card, read_text,
                        simple_card, split_lines)

ROOT = Path(__file__).resolve().parent.parent
NETLIST_SUFFIXES = {".cir", ".sp", ".net", ".spice", ".inc", ".lib", ".mod"}
CORPUS = sorted(
    [p for p in (ROOT / "tests" / "netlists").rglob("*")
     if p.is_file() and p.suffix.lower() in NETLIST_SUFFIXES]
    + sorted((ROOT / "samples").glob("*.cir"))
    + sorted((ROOT / "samples" / "models").glob("*")))
FAST = settings(max_examples=200, deadline=None, suppress_health_check=[HealthCheck.too_slow])
FEWER = settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])


def outcome_fast(text):
    try:
        parsed = read_text(text, "g.cir")
        return "ok", parsed.title, parsed.cards
    except InputError as error:
        return "error", str(error), None


def outcome_grammar(text):
    try:
        title, cards = parse_whole(text, "g.cir")
        return "ok", title, cards
    except InputError as error:
        return "error", str(error), None


def assert_same(text):
    fast, grammar = outcome_fast(text), outcome_grammar(text)
    # the grammar is the reference: both accept or both refuse
    assert fast[0] == grammar[0], (text, fast, grammar)
    if fast[0] == "ok":
        # the grammar's title and cards, with types and locations (same_card)
        assert fast[1] == grammar[1]
        assert len(fast[2]) == len(grammar[2]), (text, fast[2], grammar[2])
        for a, b in zip(fast[2], grammar[2]):
            assert same_card(a, b), (text, a, b)
    return fast


def test_corpus_is_there():
    # the issue names these: tests/netlists/*, samples/*.cir, samples/models/*
    assert len([p for p in CORPUS if p.suffix == ".cir"]) >= 10
    assert any(p.parent.name == "models" for p in CORPUS)


@pytest.mark.parametrize("path", CORPUS, ids=lambda p: str(p.relative_to(ROOT)))
def test_corpus_file_reads_as_the_grammar_reads_it(path):
    text = path.read_text(encoding="utf-8")
    if path.suffix != ".cir":           # an included file has no title line: give it one
        text = "* included file\n" + text
    result = assert_same(text)
    if "bad" not in path.parts:
        # every file of the corpus but the bad-input ones reads
        assert result[0] == "ok", result


def test_corpus_uses_the_fast_paths():
    """The differential test is worth something only if the fast paths take most cards."""
    taken = total = 0
    for path in CORPUS:
        for k, line in enumerate(path.read_text(encoding="utf-8").split("\n")[1:], start=2):
            s = line.lstrip()
            if not s or s[0] in "*+;" or s.lower().startswith(".end"):
                continue
            total += 1
            try:
                fast = plain_card(line, "g", k) or simple_card(line, "g", k)
            except InputError:
                fast = None
            taken += fast is not None
    # most of an exported netlist is plain cards (common practice); here well over half
    assert taken > total * 0.6, (taken, total)


# ----------------------------------------------------------------------- generated cards

LETTERS = "RCLDVIXQMJEFGHKBSWTrcldvixqmjefghkbswtZz"
WORD_CHARS = "abcxyzABZ0123456789_.-+*/:!#<>@%&[]~^?µ"
SPACES = st.sampled_from([" ", "  ", "\t", " \t ", "\t\t", "   ", "\f"])
word = st.text(WORD_CHARS, min_size=1, max_size=6).filter(lambda w: not w.startswith(("+", "*")))
number = st.builds(lambda m, s, u: m + s + u,
                   st.sampled_from(["1", "4.7", "0.5", "10", ".33", "2e-3", "1E6"]),
                   st.sampled_from(["", "k", "MEG", "m", "u", "n", "p", "f", "T", "G", "mil"]),
                   st.sampled_from(["", "F", "V", "ohm", "H"]))
head = st.builds(lambda a, b: a + b, st.sampled_from(LETTERS), st.text("0123456789abZ_", max_size=4))
dot_head = st.sampled_from([".model", ".param", ".tran", ".options", ".temp", ".MODEL",
                            ".subckt", ".ends", ".global", ".op", ".meas", ".lib"])


def line_of(parts, lead, gaps, trail):
    out = lead + parts[0]
    for p, g in zip(parts[1:], gaps):
        out += g + p
    return out + trail


@st.composite
def plain_line(draw):
    parts = [draw(head)] + draw(st.lists(st.one_of(word, number), min_size=0, max_size=7))
    gaps = [draw(SPACES) for _ in parts]
    lead = draw(st.sampled_from(["", " ", "\t", "  "]))
    trail = draw(st.sampled_from(["", " ", "\t", "  \t"]))
    return line_of(parts, lead, gaps, trail)


@st.composite
def field_text(draw, depth=0):
    kind = draw(st.sampled_from(["word", "number", "call", "assign", "assign_call"] if depth < 2
                                else ["word", "number", "assign"]))
    sp = lambda: draw(st.sampled_from(["", " ", "  ", "\t"]))   # noqa: E731
    if kind == "word":
        return draw(word)
    if kind == "number":
        return draw(number)
    if kind == "assign":
        return draw(word) + sp() + "=" + sp() + draw(st.one_of(word, number))
    args = draw(st.lists(field_text(depth + 1), max_size=4))
    sep = draw(st.sampled_from([" ", ", ", ",", " , ", "\t"]))
    call = draw(word) + sp() + "(" + sp() + sep.join(args) + sp() + ")"
    if kind == "call":
        return call
    return draw(word) + sp() + "=" + sp() + call


@st.composite
def simple_line(draw):
    first = draw(st.one_of(head, dot_head))
    parts = [first] + draw(st.lists(field_text(), min_size=0, max_size=6))
    gaps = [draw(st.sampled_from([" ", "  ", "\t", ", ", " ,"])) for _ in parts]
    return line_of(parts, draw(st.sampled_from(["", " ", "\t"])), gaps,
                   draw(st.sampled_from(["", " ", "\t"])))


def grammar_card(line):
    try:
        return "ok", parse_card(line, "g.cir", 1)
    except InputError as error:
        return "error", str(error)


@FAST
@given(plain_line())
def test_generated_plain_cards(line):
    try:
        fast = plain_card(line, "g.cir", 2)
    except InputError as error:
        fast = error
    # a line of words only is one the fast path takes
    assert fast is not None, line
    reference = grammar_card(line)
    if isinstance(fast, InputError):
        # the grammar refuses it too, with the same message at the same place
        assert reference == ("error", str(fast)), line
    else:
        assert reference[0] == "ok" and same_card(fast, reference[1]), (line, fast, reference)
    assert_same("title\n" + line + "\n")


@FAST
@given(simple_line())
def test_generated_cards_with_calls_and_assignments(line):
    assert_same("title\n" + line + "\n")


@FEWER
@given(st.lists(st.one_of(plain_line(), simple_line()), min_size=1, max_size=6),
       st.lists(st.sampled_from(["", "* comment", "   ", "; note"]), min_size=6, max_size=6))
def test_generated_files(lines, fillers):
    body = []
    for line, filler in zip(lines, fillers):
        body += [line, filler]
    assert_same("title\n" + "\n".join(body) + "\n")


# Cards the fast paths must refuse: the grammar reads them.
REFUSED_TAILS = st.sampled_from([
    " {rbase*2}", " 'a+b'", ' "a file"', " ; comment", " $ comment", " {a} tc1={b}",
    " PULSE(0 {v} 0 1u 1u {tw} {2*tw})", " f('x')", "; tight comment", " $\tcomment",
])


@FAST
@given(plain_line(), REFUSED_TAILS)
def test_refused_cards_still_read_right(line, tail):
    text = line + tail
    # braces, quotes and comments are not for the fast paths
    assert plain_card(text, "g.cir", 2) is None
    assert simple_card(text, "g.cir", 2) is None
    assert_same("title\n" + text + "\n")


@FEWER
@given(plain_line(), st.lists(st.one_of(word, number), min_size=1, max_size=3),
       st.sampled_from(["\n+ ", "\n+", "\n* between\n+ ", "\n\n  + ", "\n; note\n+ "]))
def test_continued_cards_still_read_right(line, more, joint):
    text = "title\n" + line + joint + " ".join(more) + "\n"
    assert_same(text)


@pytest.mark.parametrize("line", ["R1 a\u00a0b 1k", "R1 a b 1k\v", "\u00a0", "\u00a0R1 a b 1k",
                                  "R1 a b\u2003 1k"])
def test_odd_white_space_is_the_grammars(line):
    # no-break and other Unicode spaces are no separators to the grammar: the fast paths
    # leave them to it (a bug found here: simple_card read them as spaces, or crashed)
    assert simple_card(line, "g.cir", 2) is None and plain_card(line, "g.cir", 2) is None
    assert_same("title\n" + line + "\n")


@pytest.mark.parametrize("text", [
    "title\r\nR1 a b 1k\r\n+ tc1=0\r\n",         # DOS line ends, the title's too
    "title\n\f* a comment after a form feed\nR1 a b 1k\n",
    "title\n.controlx a b\n.endc\n",              # not a .control block: a dot card
    "title\n.control\nrun\n  .endc\nR1 a b 1k\n",
    "title\nR1 a b\n; a note\n+ 1k\n",
])
def test_edge_files(text):
    # bugs found here: the grammar kept the title's CR and did not skip ';' lines or a form
    # feed before a comment; the reader took `.controlx` for `.control`
    assert_same(text)


# ------------------------------------------------------------- cards over continuation lines

JOINTS = st.sampled_from(["\n+ ", "\n+", "\n+\t", "\n  + ", "\n* between\n+ ", "\n\n+ ",
                          "\n; note\n\t+ ", "\n\f+  ", "\n*\n\n+"])


@st.composite
def split_card(draw, lines=None):
    """A one-line card and the same card with some of its spaces (after the head) made into
    continuation joints: (line, continued text)."""
    line = draw(lines if lines is not None else st.one_of(plain_line(), simple_line()))
    start = len(line) - len(line.lstrip(" \t\f"))
    spaces = [k for k, ch in enumerate(line) if ch == " " and k > start]
    chosen = sorted(draw(st.sets(st.sampled_from(spaces), min_size=1, max_size=4))) if spaces else []
    out, at = [], 0
    for k in chosen:
        out += [line[at:k], draw(JOINTS)]
        at = k + 1
    return line, "".join(out) + line[at:]


def continued(text):
    """continued_card over the lines of one card's text (its first line is line 2)."""
    lines = ["title"] + split_lines(text)
    last = max(k for k, ln in enumerate(lines) if ln.lstrip(" \t\f").startswith("+") or k == 1)
    return continued_card(lines, 1, last, "g.cir")


@FAST
@given(split_card())
def test_generated_continued_cards(pair):
    line, text = pair
    assert_same("title\n" + text + "\n")
    try:
        one = plain_card(line, "g.cir", 2) or simple_card(line, "g.cir", 2)
    except InputError:
        one = None
    if one is not None:
        # a card the one-line fast paths take is one the continued fast path takes when split
        assert continued(text) is not None, text


@FEWER
@given(st.lists(st.one_of(split_card().map(lambda p: p[1]), plain_line(), simple_line()),
                min_size=1, max_size=5),
       st.lists(st.sampled_from(["", "* comment", "   ", "; note"]), min_size=5, max_size=5))
def test_generated_files_with_continued_cards(cards, fillers):
    body = []
    for card, filler in zip(cards, fillers):
        body += [card, filler]
    assert_same("title\n" + "\n".join(body) + "\n")


@FAST
@given(split_card(plain_line()), REFUSED_TAILS, st.booleans())
def test_refused_continued_cards_still_read_right(pair, tail, on_a_new_line):
    # a brace, quote or comment on any line of a continued card: the grammar reads it
    _, text = pair
    text = text + ("\n+" if on_a_new_line else "") + tail
    assert continued(text) is None
    assert_same("title\n" + text + "\n")


@pytest.mark.parametrize("text", [
    "VP1 p 0 PULSE(0 1.8 0 10n 10n\n+ 0.25m 0.5m)",
    "VP1 p 0 PULSE(0 1.8 0\n* a comment between\n\n+ 10n 10n\n+ 0.25m 0.5m)",
    "R1 a b\n+ 4.7k",
    "R1 a b\n+4.7k tc1=0\n+ tc2 = 1u",
    "X1 a b cell\n+ params: w=2 l = 3",
    ".model DX D(IS=1e-14\n+ N=1.8 RS=0.5)",
    "D1 a b\n+\n+ dmod",
])
def test_continued_cards_take_the_fast_path(text):
    # the bench's continued cards (5 % of an exported board) are read without the grammar
    assert continued(text) is not None
    assert_same("title\n" + text + "\n")


@pytest.mark.parametrize("text", [
    "R1 a b\n+ {r}", "R1 a b ; note\n+ 1k", "V1 a 0 PULSE(0 1\n+ 2 $ c\n+ 3)",
    "R1 a b\n+ 1k\u00a0", "R1 a b\n+ 'x'", "V1 a 0 PULSE(0 1\n+ 2", "R1 a b\n+ = 1k",
    "R1 a b\n+ 1k)", "Z1 a b\n+ 1k", "R1 a\n+", "X1\n+ a b",
])
def test_continued_cards_the_fast_path_leaves_or_refuses(text):
    # refused by the fast path, or an error: either way the grammar's outcome
    assert_same("title\n" + text + "\n")


def test_the_plain_character_class_is_the_plain_set():
    # read_text searches a line with _NOT_PLAIN_CHAR, the character class made of the set
    # _NOT_PLAIN that defines what a plain card may not hold: the two agree on every code
    # point (Unicode's whole range, U+0000 to U+10FFFF)
    from drc.reader import _NOT_PLAIN, _NOT_PLAIN_CHAR
    assert all((_NOT_PLAIN_CHAR.fullmatch(c) is not None) == (c in _NOT_PLAIN)
               for c in map(chr, range(0x110000)))
