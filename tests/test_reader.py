"""The netlist reader (drc/reader.py, grammar/netlist.lark): what each card of the SPICE
netlist language becomes. The references are the element syntax of the Berkeley SPICE3
user's manual and the ngspice manual (node counts, continuation, comments, dot cards) and
the text itself for locations (columns are found in the text, not typed in here)."""

import re

import pytest

from drc.cards import Assign, Call, ControlCard, DotCard, ElementCard, Expr, LineCard, Str, Word
from drc.errors import InputError
from drc.reader import read_text


def cards(body: str, title: str = "a title"):
    return read_text(title + "\n" + body, "t.cir").cards


def one(body: str):
    (card,) = cards(body)
    return card


def texts(fields):
    out = []
    for f in fields:
        if type(f) is Call:
            out.append((f.name.text, texts(f.args)))
        elif type(f) is Assign:
            out.append((f.key.text, texts([f.value])[0]))
        else:
            out.append(f.text)
    return out


def test_title_is_the_first_line_whatever_it_holds():
    parsed = read_text("R1 a b 1k is a title here\nR2 a b 1k\n", "t.cir")
    # SPICE3 manual: the first line of the input is the title, never a card
    assert parsed.title == "R1 a b 1k is a title here"
    # SPICE3 manual: the cards start on the second line
    assert [c.name.text for c in parsed.cards] == ["R2"]


def test_comment_lines_and_inline_comments():
    body = "* a comment\n   * an indented one\n; a semicolon line\nR1 a b 1k ; inline\nR2 a b 2k $ dollar\n"
    got = cards(body)
    # ngspice manual: '*' lines are comments; ';' and '$ ' start an inline comment
    assert [texts(c.fields) for c in got] == [["1k"], ["2k"]]


def test_dollar_without_space_is_part_of_a_word():
    # ngspice manual: only '$' followed by a space (or tab) starts a comment
    assert texts(one("R1 a b 1k$x\n").fields) == ["1k$x"]


def test_continuation_lines():
    card = one("VP p 0 PULSE(0 1.8 0\n* a comment between\n\n+ 10n 10n\n+ 0.25m 0.5m)\n")
    # SPICE3 manual: a '+' line continues the card above it (comment and blank lines between)
    assert texts(card.fields) == [("PULSE", ["0", "1.8", "0", "10n", "10n", "0.25m", "0.5m"])]
    # the locations are those of the continuation lines: '10n' on line 5 (title is line 1)
    assert card.fields[0].args[3].location.line == 5


def test_continuation_with_no_card_above_is_an_error():
    # SPICE3 manual: '+' continues a card; with none before it there is nothing to continue
    with pytest.raises(InputError, match="continuation"):
        cards("+ 1k\n")


def test_case_is_kept_but_keywords_compare_without_case():
    a, b = cards(".MODEL Dx D(IS=1e-14)\n.model dx d(is=1e-14)\n")
    # SPICE3 manual: input is case-insensitive; the keyword is read lower-case either way
    assert a.keyword == b.keyword == "model"
    # names are kept as typed, for display
    assert a.fields[0].text == "Dx"


# SPICE3 manual / ngspice manual, element syntax: nodes per element letter.
NODE_CASES = [
    ("R1 a b 1k", 2), ("C1 a b 1u", 2), ("L1 a b 1m", 2), ("D1 a b dmod", 2),
    ("V1 a b DC 1", 2), ("I1 a b DC 1m", 2), ("Q1 c b e qmod", 3), ("J1 d g s jmod", 3),
    ("M1 d g s b nmod W=1u L=1u", 4), ("E1 p n cp cn 2", 4), ("G1 p n cp cn 1m", 4),
    ("F1 p n VSENSE 2", 2), ("H1 p n VSENSE 100", 2), ("B1 p n V=v(a)*2", 2), ("K1 L1 L2 0.9", 0),
]


@pytest.mark.parametrize("text,count", NODE_CASES)
def test_node_counts(text, count):
    card = one(text + "\n")
    words = text.split()
    # ngspice manual, the element's syntax line: its first `count` fields are nodes
    assert [n.text for n in card.nodes] == words[1:1 + count]


def test_subcircuit_instance_nodes_stand_before_its_name():
    card = one("X1 a b c cellname params: r=1k\n")
    # SPICE3 manual: Xname N1 N2 ... SUBNAM; the last word before any parameter is the name
    assert [n.text for n in card.nodes] == ["a", "b", "c"]
    # SPICE3 manual: the subcircuit name follows the nodes
    assert texts(card.fields) == ["cellname", "params:", ("r", "1k")]


def test_values_keep_their_text():
    card = one("C1 a b 10uF\n")
    # the value as typed is kept (the expansion reads it; 10uF is 1e-5 per SPICE3's table)
    assert texts(card.fields) == ["10uF"]


def test_braced_and_quoted_expressions():
    a, b = cards("R1 a b {rbase * 2}\nR2 a b 'rbase / 2'\n")
    # ngspice manual: {expr} and 'expr' are parameter expressions
    assert type(a.fields[0]) is Expr and a.fields[0].text == "rbase * 2"
    # ngspice manual: 'expr' like {expr}
    assert type(b.fields[0]) is Expr and b.fields[0].text == "rbase / 2"
    line = "R1 a b {rbase * 2}"
    # the column is that of the brace in the text
    assert a.fields[0].location.column == line.index("{") + 1


@pytest.mark.parametrize("spec,expected", [
    ("DC 3.3", ["DC", "3.3"]),
    ("3.3", ["3.3"]),
    ("DC 0 AC 1", ["DC", "0", "AC", "1"]),
    ("PULSE(0 3 0 1u 1u 0.5m 1m)", [("PULSE", ["0", "3", "0", "1u", "1u", "0.5m", "1m"])]),
    ("PULSE 0 3 0 1u 1u 0.5m 1m", ["PULSE", "0", "3", "0", "1u", "1u", "0.5m", "1m"]),
    ("PWL(0 0 1m 3)", [("PWL", ["0", "0", "1m", "3"])]),
    ("SIN(1.5 1 1k)", [("SIN", ["1.5", "1", "1k"])]),
    ("sin 1.5 1 1k", ["sin", "1.5", "1", "1k"]),
    ("EXP(0 3 0 1u 1m 1u)", [("EXP", ["0", "3", "0", "1u", "1m", "1u"])]),
    ("PULSE(0, 3, 0, 1u, 1u, {tw}, {2*tw})", [("PULSE", ["0", "3", "0", "1u", "1u", "tw", "2*tw"])]),
])
def test_source_specs(spec, expected):
    card = one(f"V1 p 0 {spec}\n")
    # SPICE3 manual, independent sources: DC/AC values and PULSE PWL SIN EXP, bare or in ()
    assert texts(card.fields) == expected


def test_model_card():
    a, b, c = cards(".model LEDR D(IS=1e-19 N=2 RS=3)\n.model LEDR D (IS=1e-19, N=2, RS=3)\n"
                    ".model LEDR D IS=1e-19 N=2 RS=3\n")
    # SPICE3 manual: .MODEL MNAME TYPE(PNAME1=PVAL1 ...); ngspice also takes commas
    assert texts(a.fields) == ["LEDR", ("D", [("IS", "1e-19"), ("N", "2"), ("RS", "3")])]
    # ngspice manual: a space before the parenthesis and commas between changes nothing
    assert texts(b.fields) == texts(a.fields)
    # ngspice manual: the parameters may stand without parentheses
    assert texts(c.fields) == ["LEDR", "D", ("IS", "1e-19"), ("N", "2"), ("RS", "3")]


def test_subckt_cards():
    got = cards(".subckt cell top bot params: rl=680 kb={2*x}\nR1 top bot {rl}\n.ends cell\n")
    head, body, end = got
    # ngspice manual: .subckt name nodes [params: k=v ...]
    assert head.keyword == "subckt"
    assert texts(head.fields) == ["cell", "top", "bot", "params:", ("rl", "680"), ("kb", "2*x")]
    # ngspice manual: .ends [name] closes it
    assert end.keyword == "ends" and texts(end.fields) == ["cell"]
    assert type(body) is ElementCard


def test_param_include_lib_global():
    got = cards(".param a = 1, b = {a*2}\n.include parts/x.inc\n.lib lib/y.lib typical\n"
                ".lib typical\n.endl\n.global vdd vss\n")
    # ngspice manual: .param name=value ...
    assert texts(got[0].fields) == [("a", "1"), ("b", "a*2")]
    # ngspice manual: .include file; .lib file section; .lib section ... .endl
    assert [c.keyword for c in got] == ["param", "include", "lib", "lib", "endl", "global"]
    assert texts(got[2].fields) == ["lib/y.lib", "typical"]
    # ngspice manual: .global nodes
    assert texts(got[5].fields) == ["vdd", "vss"]


def test_quoted_include_file_name():
    card = one('.include "parts/with space.inc"\n')
    # ngspice manual: a file name may be quoted
    assert type(card.fields[0]) is Str and card.fields[0].text == "parts/with space.inc"


def test_end_stops_reading():
    got = cards("R1 a b 1k\n.end\nthis is not read (at all\n")
    # SPICE3 manual: .end is the last card; nothing after it is read
    assert [c.name.text for c in got] == ["R1"]


def test_other_dot_cards_are_kept():
    got = cards(".tran 1u 1m\n.op\n.temp 27 60\n.options reltol=1e-3\n.meas tran vmax MAX v(a)\n"
                ".control\nrun\nprint all\n.endc\nR1 a b 1k\n")
    # ngspice manual: analysis and option cards; a .control ... .endc block of commands
    assert [getattr(c, "keyword", "control") for c in got[:5]] == ["tran", "op", "temp", "options", "meas"]
    assert type(got[5]) is ControlCard and "print all" in got[5].text
    assert type(got[6]) in (ElementCard, LineCard)    # (LineCard: the reader's plain card)


def test_locations_are_line_and_column_of_the_text():
    body = "\n\n   R7   n1\tn2  4.7k\n"
    (card,) = cards(body)
    line = body.split("\n")[2]
    # the card stands on line 4 of the file (title, two blank lines)
    assert card.location.line == 4
    # columns are 1-based positions in the line as typed
    assert card.location.column == line.index("R7") + 1
    assert card.nodes[1].location.column == line.index("n2") + 1
    assert card.fields[0].location.column == line.index("4.7k") + 1


def test_crlf_and_byte_order():
    parsed = read_text("title\r\nR1 a b 1k\r\n+ tc1=0\r\n", "t.cir")
    # ngspice reads DOS line ends as line ends
    assert parsed.title == "title"
    assert texts(parsed.cards[0].fields) == ["1k", ("tc1", "0")]


@pytest.mark.parametrize("body,fragment", [
    ("Z1 a b 1k\n", "unknown element letter"),
    ("R1 a\n", "too few nodes"),
    ("Q1 c b\n", "too few nodes"),
    ("R1 a b (1k\n", "unclosed parenthesis"),
    ("R1 a b {x\n", "unclosed brace"),
    ("R1 a b 1k)\n", "')' with no '('"),
    ("R1 a b tc1=\n", "'=' with no value"),
    ("R1 a\u00a0b 1k\n", "white space"),
    (".control\nrun\n", "no '.endc'"),
])
def test_syntax_errors(body, fragment):
    # SPICE3 manual element syntax: these cards are not SPICE
    with pytest.raises(InputError, match=re.escape(fragment)):
        cards(body)


def test_unclosed_bracket_is_reported_where_it_opened():
    body = "VP p 0 PULSE(0 3 0\n+ 1u 1u 1m\nR1 p 0 1k\n"
    with pytest.raises(InputError) as caught:
        cards(body)
    # the '(' stands on line 2 (after the title), at its column in the text
    assert (caught.value.location.line, caught.value.location.column) == (2, body.index("(") + 1)
