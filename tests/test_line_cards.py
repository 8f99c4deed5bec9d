"""The flattener's own path for the reader's plain cards (LineCard: the texts of a one-line
card of words, one space apart) against its path for the ElementCard each stands for.

The reader keeps a plain card as its texts so that most cards never make a Word per
field; the flattener reads those texts directly. Both paths must give the same flat
design - every element with its nets, value, model, location and instance path, the value
notes (suffix-ambiguity), the nets - and the same error, message and place, for a card
it refuses. The reference is the ElementCard path, which the grammar's differential test
(tests/test_reader_fastpath.py) ties to the grammar. Checked on every netlist of the test
corpus and the samples, and on generated netlists of plain cards (good and bad ones).
"""

from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings, strategies as st

import drc.expand as expand_mod
from drc.cards import ElementCard, LineCard
from drc.errors import InputError, InputErrors
from drc.reader import read_text

ROOT = Path(__file__).resolve().parent.parent
CORPUS = sorted(list((ROOT / "tests" / "netlists").rglob("*.cir")) + list((ROOT / "samples").glob("*.cir")))


def _as_element_cards(text, path, has_title=True):
    parsed = read_text(text, path, has_title)
    parsed.cards[:] = [c.card if type(c) is LineCard else c for c in parsed.cards]
    return parsed


def _outcome(path):
    try:
        flat = expand_mod.expand(path)
    except (InputError, InputErrors) as error:
        return "error", str(error)
    return "ok", (flat.title, flat.elements, flat.models, flat.nets, flat.value_notes,
                  flat.parameters, flat.dot_cards)


def both_ways(path, monkeypatch):
    lean = _outcome(path)
    with monkeypatch.context() as m:
        m.setattr(expand_mod, "read_text", _as_element_cards)
        reference = _outcome(path)
    assert lean == reference
    return lean


def test_the_reader_keeps_plain_cards_as_line_cards():
    # otherwise this file tests nothing
    cards = read_text("t\nR1 a b 1k\nD1 b 0 LED\n", "t.cir").cards
    assert [type(c) for c in cards] == [LineCard, LineCard]


def test_no_subcircuit_instance_is_a_line_card():
    # the flattener's LineCard path has no X case: an X line (its nodes are the words
    # before its subcircuit's name) must come out of the reader as an ElementCard
    cards = read_text("t\nX1 a b cell\nx2 a b c cell\n", "t.cir").cards
    assert [type(c) for c in cards] == [ElementCard, ElementCard]


@pytest.mark.parametrize("path", CORPUS, ids=lambda p: str(p.relative_to(ROOT)))
def test_corpus_flattens_the_same_both_ways(path, monkeypatch):
    both_ways(str(path), monkeypatch)


def test_most_of_the_corpus_flattens(monkeypatch):
    # the comparison above is worth something only where a design comes out
    ok = [p for p in CORPUS if _outcome(str(p))[0] == "ok"]
    assert len(ok) > len(CORPUS) * 0.6, (len(ok), len(CORPUS))


LETTERS = ["R", "C", "L", "D", "V", "I", "E", "G", "F", "H", "K", "Q", "M", "J", "B", "r", "d", "v"]
NODES = st.sampled_from(["a", "b", "0", "GND", "out", "vcc", "N1", "n1"])
VALUES = st.sampled_from(["1k", "4k7", "1M", "1MEG", "10u", "1F", "2u2", "R47", "100", "0",
                          "-5", "DC", "1.8", "LED", "SIG", "nosuch", "AC", "1", "x", "3.3V"])


@st.composite
def plain_netlist(draw):
    lines = ["generated", ".model LED D(IS=1e-18 N=2)", ".model SIG D(IS=1e-9)"]
    for k in range(draw(st.integers(1, 8))):
        letter = draw(st.sampled_from(LETTERS))
        words = [f"{letter}{k}"] + draw(st.lists(NODES, min_size=0, max_size=4)) \
            + draw(st.lists(VALUES, min_size=0, max_size=3))
        lines.append(" ".join(words))
    return "\n".join(lines) + "\n.end\n"


@settings(max_examples=300, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(text=plain_netlist())
def test_generated_plain_netlists_flatten_the_same_both_ways(text, tmp_path_factory, monkeypatch):
    path = tmp_path_factory.mktemp("plain") / "g.cir"
    path.write_text(text)
    both_ways(str(path), monkeypatch)
