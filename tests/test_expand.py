"""Expansion (drc/expand.py): includes, libraries, parameters, subcircuits, flattening.

The reference is ngspice's own expansion of the same netlists: `listing e` prints the deck
after includes, parameters and subcircuits are expanded (element paths, nodes, values), and
its .op operating point shows which model values it used. Locations are checked against the
text of the files (found by searching the file, not typed in)."""

import math
import os
import re
import shutil
import sys
from pathlib import Path

import pytest

sys.path.insert(0, os.path.dirname(__file__))
from ngspice import op, require_ngspice, run_batch  # noqa: E402

from drc.errors import InputError  # noqa: E402
from drc.expand import expand  # noqa: E402
from drc.values import parse_number  # noqa: E402

NETLISTS = Path(__file__).resolve().parent / "netlists"
K_B, Q_E = 1.380649e-23, 1.602176634e-19      # CODATA 2018 (exact in the SI)


@pytest.fixture(scope="module")
def corpus(tmp_path_factory):
    """A copy of tests/netlists, so ngspice's scratch decks stay out of the repository."""
    target = tmp_path_factory.mktemp("netlists") / "netlists"
    shutil.copytree(NETLISTS, target)
    return target


def ngspice_listing(corpus: Path, name: str) -> dict[str, tuple[tuple[str, ...], list[str]]]:
    """{element path (drc's spelling, lower-case): (nodes, the rest)} from `listing e`.

    ngspice names a flattened element `<letter>.<instance path>.<name>`, e.g. `r.x1.rd`; drc
    writes the same element `x1.rd`."""
    require_ngspice()
    text = (corpus / name).read_text()
    out = run_batch(text, ["listing e"], workdir=corpus)
    rows = re.findall(r"(?m)^\s*\d+ : (.*)$", out)[1:]          # the first is the title
    found = {}
    for row in rows:
        words = row.split()
        if not words or words[0].startswith("."):
            continue
        element = words[0].lower()
        m = re.fullmatch(r"([a-z])\.(x.*)", element)
        if m:
            element = m.group(2)
        found[element] = words[1:]
    return found


NODE_COUNT = {"r": 2, "c": 2, "l": 2, "d": 2, "v": 2, "i": 2}


def test_hierarchy_matches_ngspice(corpus):
    design = expand(corpus / "hier_nested.cir")
    listing = ngspice_listing(corpus, "hier_nested.cir")
    # ngspice `listing e`: the same flattened elements, by path
    assert sorted(e.key for e in design.elements) == sorted(listing)
    for e in design.elements:
        words = listing[e.key]
        n = NODE_COUNT[e.kind.lower()]
        # ngspice `listing e`: the same nets on each element (ground as 0, gnd included)
        assert tuple(w.lower() for w in words[:n]) == e.nodes, e.key
        if e.kind == "R":
            # ngspice `listing e`: parameters evaluated, instance values over defaults
            assert e.value == pytest.approx(parse_number(words[n]).value, rel=1e-12), e.key
        if e.kind == "D":
            # ngspice `listing e`: a model of the top level keeps its own name inside
            # subcircuits (a bug found here: drc named it after the outer instance)
            assert design.models[e.model].name.lower() == words[n].lower(), e.key


def test_includes_resolve_from_the_including_file(corpus):
    design = expand(corpus / "include_chain.cir")
    listing = ngspice_listing(corpus, "include_chain.cir")
    # ngspice: chain_b.inc is found beside chain_a.inc, which includes it; the parameter
    # from the innermost file reaches the top-level instance
    assert design.element("XA.RC").value == pytest.approx(
        parse_number(listing["xa.rc"][2]).value, rel=1e-12)
    # the files read, the top one first, each once
    assert [Path(f).name for f in design.files] == ["include_chain.cir", "chain_a.inc", "chain_b.inc"]


def _diode_voltage(model: dict, current: float, temperature_C: float = 27.0) -> float:
    # Shockley's law with series resistance, at the model's nominal temperature
    vt = K_B * (temperature_C + 273.15) / Q_E
    return model.get("n", 1.0) * vt * math.log(current / model.get("is", 1e-14) + 1) \
        + current * model.get("rs", 0.0)


@pytest.mark.parametrize("name,model_name", [("include_chain.cir", "chaind"),
                                             ("syntax_tour.cir", "sigd"),
                                             ("model_param_nested.cir", "ledp")])
def test_model_values_as_ngspice_uses_them(corpus, name, model_name):
    """A model's parameters (from an include, a .lib section, or .param expressions) are the
    ones ngspice uses: 1 mA forced through the model gives the same forward voltage."""
    design = expand(corpus / name)
    model = design.models[model_name].params
    text = (corpus / name).read_text()
    # add a probe diode with the model under test to the same netlist
    probe = text.replace("\n.op", f"\nIPROBE 0 probe DC 1m\nDPROBE probe 0 {model_name}\n.op", 1)
    got = op(probe, ["v(probe)"], workdir=corpus)[None]["v(probe)"]
    # ngspice .op: the diode's drop at 1 mA, from the same model values (0.1 mV)
    assert _diode_voltage(model, 1e-3) == pytest.approx(got, abs=1e-4)


def test_lib_reads_only_the_named_section(corpus):
    design = expand(corpus / "syntax_tour.cir")
    section = (corpus / "parts" / "sections.lib").read_text().split(".lib slow")[0]
    is_typed = re.search(r"IS=(\S+)", section).group(1)
    # ngspice manual, .lib FILE SECTION: only that section's cards are read
    assert design.models["sigd"].params["is"] == pytest.approx(parse_number(is_typed).value)


def test_ground_names_and_globals():
    design = expand(NETLISTS / "hier_nested.cir")
    # SPICE3 manual: node 0 is ground; ngspice also reads gnd as ground
    assert "gnd" not in design.nets and "0" in design.nets
    # ngspice manual, .global: vsys is the same net inside every instance
    assert design.element("X1.CBYP").nodes == ("vsys", "0")
    assert not any(n.endswith(".vsys") for n in design.nets)


def test_black_box_part_keeps_its_nets():
    design = expand(NETLISTS / "blackbox_part.cir")
    part = design.element("XMCU")
    line = (NETLISTS / "blackbox_part.cir").read_text().split("\n")
    xline = next(k for k, t in enumerate(line) if t.startswith("XMCU")) + 1
    # the issue: an X line with no .subckt is one part, with the nets it names
    assert part.kind == "X" and part.subckt == "ctl_part"
    assert part.nodes == tuple(line[xline - 1].split()[1:4])
    # its card's place in the file
    assert (part.location.line, part.location.column) == (xline, 1)


def _line_of(path: Path, start: str) -> int:
    return next(k for k, t in enumerate(path.read_text().split("\n"), start=1)
                if t.lstrip().startswith(start))


def test_locations_of_subcircuit_contents():
    path = NETLISTS / "hier_nested.cir"
    design = expand(path)
    e = design.element("X2.XDRV.DLED")
    # the element's own card, in the .subckt body
    assert (e.location.path, e.location.line, e.location.column) == (str(path), _line_of(path, "DLED"), 1)
    # the X lines it came through, outer first
    assert [loc.line for loc in e.instances] == [_line_of(path, "X2 "), _line_of(path, "XDRV")]


def test_locations_in_included_files():
    path = NETLISTS / "include_chain.cir"
    design = expand(path)
    e = design.element("XA.RC")
    inc = NETLISTS / "parts" / "chain_a.inc"
    # the element's card is in the included file, at its line there
    assert Path(e.location.path).name == "chain_a.inc" and e.location.line == _line_of(inc, "RC ")
    # the instance line is in the top file
    assert e.instances[0].path == str(path) and e.instances[0].line == _line_of(path, "XA ")


def test_instance_parameters_override_defaults(tmp_path):
    deck = tmp_path / "over.cir"
    deck.write_text("overrides\n.param r0 = 2k\n.subckt cell a b params: r=1k k=3\n"
                    "R1 a b {r*k}\n.ends\nX1 n 0 cell\nX2 n 0 cell params: r={r0}\n"
                    "X3 n 0 cell k=1\nV1 n 0 DC 1\n.op\n.end\n")
    design = expand(deck)
    listing = {}
    out = run_batch(deck.read_text(), ["listing e"], workdir=tmp_path)
    for row in re.findall(r"(?m)^\s*\d+ : (r\.\S+ .*)$", out):
        w = row.split()
        listing[w[0][2:]] = parse_number(w[3]).value
    for name in ("x1.r1", "x2.r1", "x3.r1"):
        # ngspice `listing e`: defaults, then the instance's own values, evaluated
        assert design.element(name).value == pytest.approx(listing[name], rel=1e-12), name


def test_unknown_instance_parameter_is_an_error(tmp_path):
    deck = tmp_path / "bad.cir"
    deck.write_text("t\n.subckt cell a b params: r=1k\nR1 a b {r}\n.ends\nX1 n 0 cell q=2\n.end\n")
    # Differs from ngspice on purpose: ngspice 39 ignores a parameter the subcircuit does not
    # declare (checked by hand); drc refuses it, since a misspelt one silently keeps the default
    with pytest.raises(InputError, match="no parameter 'q'"):
        expand(deck)


def test_parameters_never_use_python_eval(tmp_path):
    deck = tmp_path / "evil.cir"
    deck.write_text("t\n.param x = {__import__('os').getcwd()}\nR1 a 0 {x}\n.end\n")
    # the issue: our own evaluator only; this is no SPICE expression
    with pytest.raises(InputError):
        expand(deck)


def test_parameter_defined_in_terms_of_itself(tmp_path):
    deck = tmp_path / "loop.cir"
    deck.write_text("t\n.param a = {b+1}\n.param b = {a*2}\nR1 x 0 {a}\n.end\n")
    # a parameter cycle has no value (ngspice 39 also stops on it, checked by hand)
    with pytest.raises(InputError, match="in terms of itself"):
        expand(deck)
