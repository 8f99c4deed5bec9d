"""drc's small pint registry (drc/units.txt) against pint's full default registry.

drc reads config quantities with a registry built from a few of pint's own definitions,
because building pint's whole registry costs every run about 140 ms. These tests hold the
small registry to pint's full one (pint's published definition files): any unit name the
small registry reads, it reads as the same unit with the same float factor, and any other
spelling is left to the full registry, so parse_quantity answers as the full registry does.
"""

from __future__ import annotations

import itertools

import pint
import pytest

from drc.errors import InputError, Location
from drc.quantities import parse_quantity
from drc.units import full_registry, ureg

HERE = Location("test.toml", 3, 1)


@pytest.fixture(scope="module")
def full():
    """pint's whole default registry, made here, apart from drc's."""
    return pint.UnitRegistry(autoconvert_offset_to_baseunit=True)


def _reading(registry: pint.UnitRegistry, name: str):
    """How a registry reads one unit name: its candidates, canonical name and SI factor."""
    try:
        root = registry.Quantity(1.5, name).to_root_units()
    except Exception as error:       # noqa: BLE001 - the kind of refusal is compared
        return type(error).__name__
    return (registry.parse_unit_name(name), registry.get_name(name), root.magnitude,
            format(root.units, "D"))


def test_every_name_the_small_registry_reads_reads_the_same_in_pint(full):
    # pint's default_en.txt and constants_en.txt: every prefix with every unit name, alias
    # and symbol the small file defines, singular and plural (pint's own suffix rule).
    prefixes = sorted(ureg._prefixes)          # pint keeps these by name, symbol and alias
    names = sorted(ureg._units)
    read = 0
    for prefix, name, suffix in itertools.product(prefixes, names, ("", "s")):
        spelling = prefix + name + suffix
        if not ureg.parse_unit_name(spelling):
            continue                            # the small registry leaves it to the full one
        small = _reading(ureg, spelling)
        if isinstance(small, str):
            continue                            # refused: parse_quantity asks the full one
        read += 1
        assert small == _reading(full, spelling), spelling
    assert read > 1000


SI_UNIT = {"voltage": "V", "current": "A", "resistance": "ohm", "frequency": "Hz",
           "capacitance": "F", "fraction": "", "time": "s", "temperature": "degC",
           "voltage_per_temperature": "V/K"}


@pytest.mark.parametrize("number, unit, kind", [
    ("1.8", "V", "voltage"), ("1800", "mV", "voltage"), ("20", "mA", "current"),
    ("100", "uA", "current"), ("40", "ohm", "resistance"), ("4.7", "kΩ", "resistance"),
    ("2", "kHz", "frequency"), ("10", "uF", "capacitance"), ("100", "nF", "capacitance"),
    ("50", "percent", "fraction"), ("100", "ppm", "fraction"), ("10", "ms", "time"),
    ("-20", "degC", "temperature"), ("60", "°C", "temperature"), ("253.15", "K", "temperature"),
    ("-2", "mV/K", "voltage_per_temperature"), ("-1.8", "mV/degC", "voltage_per_temperature"),
    # not in drc/units.txt: read by the full registry
    ("1", "min", "time"), ("0.5", "hour", "time"), ("-4", "degF", "temperature"),
    ("1", "kilovolt", "voltage"), ("2", "amps", "current"), ("3", "mF", "capacitance"),
])
def test_parse_quantity_gives_what_the_full_registry_gives(number, unit, kind, full):
    # pint's full registry, read as drc/quantities.py documents: the number times the unit,
    # converted to the kind's SI unit (°C for temperatures, a plain ratio for shares)
    target = full.parse_units(SI_UNIT[kind]) if SI_UNIT[kind] else full.dimensionless
    quantity = full.Quantity(float(number), full.parse_units(unit))
    try:
        expected = float(quantity.to(target).magnitude)
    except pint.DimensionalityError:     # "amps" is atto-(metres per second) to pint
        with pytest.raises(InputError):
            parse_quantity(f"{number} {unit}", kind, HERE, "key")
        return
    assert parse_quantity(f"{number} {unit}", kind, HERE, "key") == expected
    assert parse_quantity(f"{number}{unit}", kind, HERE, "key") == expected


@pytest.mark.parametrize("text, kind", [
    ("1.8 volz", "voltage"),          # unknown to both: pint's full registry names it
    ("3 W", "voltage"),               # a unit of another dimension, named with its symbol
    ("3 meter", "voltage"),
    ("5 delta_degC", "temperature"),  # a difference where a temperature is wanted
    ("-300 degC", "temperature"),
])
def test_errors_read_as_with_the_full_registry(text, kind):
    # the same error, word for word, as the message drc gives when it reads the text with
    # pint's full registry alone (drc.quantities._convert with full_registry())
    from drc import quantities
    with pytest.raises(InputError) as ours:
        parse_quantity(text, kind, HERE, "key")
    number, unit = text.split(" ")
    kinds = quantities.KINDS[kind]
    hint = f'write it as a string with its unit, e.g. key = "{kinds.example}"'
    with pytest.raises(InputError) as full:
        quantities._convert(full_registry(), number, unit, text, kinds, kind, HERE, "key", hint)
    assert ours.value.message == full.value.message


def test_codata_constants():
    # CODATA 2018 exact values (SI 2019): k = 1.380649e-23 J/K, e = 1.602176634e-19 C
    assert ureg.Quantity(1, "boltzmann_constant").to("J/K").magnitude == 1.380649e-23
    assert ureg.Quantity(1, "elementary_charge").to("C").magnitude == 1.602176634e-19


# ---------------------------------------------------------------- plain cards over '+' lines

from hypothesis import given, settings  # noqa: E402
from hypothesis import strategies as st  # noqa: E402

from drc.cards import same_card  # noqa: E402
from drc.reader import parse_card, words_card, split_lines  # noqa: E402

_WORD = st.text("abcxyzABZ0123456789_.-+*/:!#<>@%&[]~^?µ", min_size=1, max_size=6).filter(
    lambda w: not w.startswith(("+", "*")))
_GAP = st.sampled_from([" ", "  ", "\t", " \t ", "\f"])
_JOINT = st.sampled_from(["\n+", "\n+ ", "\n  +\t", "\n* between (a=b) {c}\n+ ", "\n\n+ ",
                          "\n; note 'x'\n+", "\n \t\n  + "])


def _outcome(read):
    try:
        return read()
    except InputError as error:          # e.g. too few nodes: the same message is wanted
        return str(error)


def _check_words_card(text):
    """words_card on `text` (on a file's fifth line) against parse_card, the grammar."""
    shifted = [""] * 4 + split_lines(text)
    fast = _outcome(lambda: words_card(shifted, 4, len(shifted) - 1, "g.cir"))
    if fast is None:
        return None                      # not its kind of card: simple_card's or the grammar's
    expected = _outcome(lambda: parse_card(text, "g.cir", 4))
    if isinstance(expected, str) or isinstance(fast, str):
        assert fast == expected, text
    else:
        assert same_card(fast, expected), (text, fast, expected)
    return fast


@settings(max_examples=300, deadline=None)
@given(st.sampled_from("RCDLVIQMXrcdx"), st.lists(_WORD, min_size=1, max_size=8),
       st.lists(st.tuples(_JOINT, st.lists(_WORD, max_size=3)), max_size=3),
       _GAP, st.sampled_from(["", " ", "\t", "  "]))
def test_plain_cards_over_lines_read_as_the_grammar_reads_them(letter, words, more, gap, lead):
    # grammar/netlist.lark is the definition of the language: a card of words over '+'
    # lines is the card parse_card gives for the same text, types and locations included
    text = lead + letter + "1" + gap + gap.join(words)
    for joint, extra in more:
        text += joint + gap.join(extra)
    assert _check_words_card(text) is not None, text      # words only: it is taken


@settings(max_examples=400, deadline=None)
@given(st.sampled_from("RCDVIQMXvx"), st.lists(_WORD, min_size=0, max_size=4), _WORD,
       st.lists(st.tuples(st.sampled_from([" ", "  ", "\t", "\n+ ", "\n* c\n+"]), _WORD),
                max_size=7),
       st.sampled_from(["", " ", "\n+ "]), st.sampled_from([")", " )", "\n+ )", ") x", "))"]))
def test_cards_ending_in_a_call_read_as_the_grammar_reads_them(letter, nodes, name, args,
                                                              after_open, close):
    # a card such as `V1 a 0 PULSE(0 1.8 ...)`: words_card gives the grammar's card or
    # leaves it to the other paths (None); a well-formed one it takes
    text = letter + "1 " + " ".join(nodes) + (" " if nodes else "") + name + "(" + after_open
    text += "".join(gap + arg for gap, arg in args).lstrip(" \t") + close
    card = _check_words_card(text)
    if close in (")", " )", "\n+ )") and "(" not in name + "".join(a for _, a in args):
        assert card is not None, text
