"""drc's reader and expansion against the reference simulator, ngspice (Debian's package).

Every sample and test netlist that drc reads (black-box parts aside), ngspice loads too,
and every one that drc refuses, ngspice refuses too, except the cases named below, where
the two differ on purpose. The flattened nets and elements of the hierarchical netlists are
the ones ngspice lists for them (`print all` after .op for nets, `listing e` for elements).
"""

import os
import re
import shutil
import sys
from pathlib import Path

import pytest

sys.path.insert(0, os.path.dirname(__file__))
from ngspice import load_ok, op_all, require_ngspice, run_batch  # noqa: E402

from drc.errors import InputError  # noqa: E402
from drc.expand import expand  # noqa: E402

ROOT = Path(__file__).resolve().parent.parent
NETLISTS = sorted(list((ROOT / "samples").glob("*.cir"))
                  + [p for p in (ROOT / "tests" / "netlists").rglob("*.cir")])

# Where drc and ngspice differ on purpose: path (from the repository) -> why.
DIFFER = {
    # black-box parts: an X line with no .subckt is one part to drc, an error to ngspice
    "samples/blackbox_controller.cir": "drc only: black-box controller (samples/README.md)",
    "tests/netlists/blackbox_part.cir": "drc only: black-box controller",
    "tests/netlists/unchecked/controller_unset.cir": "drc only: black-box controller",
    # IEC 60062: drc reads R47 as 0.47 ohm (and warns); ngspice 39 stops on it
    "tests/netlists/iec_bare_r.cir": "drc only: bare R47 value code",
    # drc refuses an include outside the netlist's folder tree (limits.include_folders);
    # ngspice reads any file it can open
    "tests/netlists/nested/outside_include.cir": "ngspice only: include from the folder above",
    # drc refuses a two-terminal element with one node; ngspice 39 loads it (checked by hand:
    # it warns that the resistance is too low and runs)
    "tests/netlists/bad/too_few_nodes.cir": "ngspice only: R with one node",
    # drc refuses a negative R, C or L (no part is one); ngspice takes it as a modelling device
    "tests/netlists/bad/negative_value.cir": "ngspice only: negative resistance",
    # drc refuses an unclosed '('; ngspice 39 reads PULSE(... to the end of the card
    "tests/netlists/bad/unclosed_paren.cir": "ngspice only: unclosed parenthesis",
}


_ANALYSIS = re.compile(r"(?im)^\s*\.(op|tran|ac|dc|control)\b")


def _with_analysis(path: Path) -> Path:
    """The netlist as it is, or (ngspice 39 exits 1 on a deck with no analysis) a scratch
    copy of its folder with an `.op` card added before `.end`, so loading is what is tested."""
    text = path.read_text()
    if _ANALYSIS.search(text):
        return path
    folder = _copy(path.parent)
    deck = folder / ("_op_" + path.name)
    lines = text.rstrip().split("\n")
    if lines[-1].strip().lower() == ".end":
        lines.pop()
    deck.write_text("\n".join(lines) + "\n.op\n.end\n")
    return deck


def drc_reads(path: Path) -> tuple[bool, str]:
    try:
        expand(path)
        return True, ""
    except InputError as error:
        return False, str(error)


@pytest.mark.parametrize("path", NETLISTS, ids=lambda p: str(p.relative_to(ROOT)))
def test_drc_and_ngspice_accept_the_same_netlists(path):
    require_ngspice()
    key = str(path.relative_to(ROOT))
    ours, why = drc_reads(path)
    theirs, out = load_ok(_with_analysis(path))
    if key in DIFFER:
        # a named difference: it must still be one (else drop it from DIFFER)
        assert ours != theirs, (key, DIFFER[key], why, out[-2000:])
    else:
        # ngspice 39 (`ngspice -b`): loads exactly the netlists drc reads
        assert ours == theirs, (key, why, out[-2000:])


def test_value_codes_are_read_differently_on_purpose():
    """`4k7` loads in both, with different values: drc reads IEC 60062 (4.7 kohm, with a
    suffix-ambiguity warning), ngspice reads the leading number and suffix (4 kohm)."""
    require_ngspice()
    path = ROOT / "tests" / "netlists" / "iec_codes.cir"
    design = expand(path)
    out = run_batch(path.read_text(), ["op", "print @r1[resistance]"], workdir=_copy(path.parent))
    theirs = float(re.search(r"@r1\[resistance\]\s*=\s*(\S+)", out).group(1))
    # ngspice 39: 4k7 is 4000 ohm
    assert theirs == pytest.approx(4000.0)
    # IEC 60062: 4k7 is 4.7 kohm, as drc reads it
    assert design.element("R1").value == pytest.approx(4700.0)
    # and drc says so, at the value
    assert any(n.element == "R1" and n.text == "4k7" for n in design.value_notes)


_copies = {}


def _copy(folder: Path) -> Path:
    """A scratch copy of a folder, so ngspice's decks stay out of the repository."""
    import tempfile
    if folder not in _copies:
        target = Path(tempfile.mkdtemp(prefix="drc-parity-")) / folder.name
        shutil.copytree(folder, target)
        _copies[folder] = target
    return _copies[folder]


def ngspice_elements(path: Path) -> dict[str, list[str]]:
    """ngspice's flattened elements: {drc-style lower-case path: fields} from `listing e`."""
    out = run_batch(path.read_text(), ["listing e"], workdir=_copy(path.parent))
    rows = re.findall(r"(?m)^\s*\d+ : (.*)$", out)[1:]           # the first is the title
    found = {}
    for row in rows:
        words = row.split()
        if words and not words[0].startswith("."):
            name = words[0].lower()
            m = re.fullmatch(r"[a-z]\.(x.*)", name)        # ngspice writes r.x1.rd for x1.rd
            found[m.group(1) if m else name] = words[1:]
    return found


def ngspice_nets(path: Path) -> set[str]:
    """Every node ngspice solves for (ground aside), from `print all` after .op."""
    values = op_all(path.read_text(), workdir=_copy(path.parent))
    return {name for name in values if "#" not in name and not name.startswith(("@", "i("))}


@pytest.mark.parametrize("name", ["hier_nested.cir", "syntax_tour.cir", "include_chain.cir",
                                  "model_param_nested.cir"])
def test_flattened_nets_and_elements_match_ngspice(name):
    require_ngspice()
    path = ROOT / "tests" / "netlists" / name
    design = expand(path)
    # ngspice .op, `print all`: the same nets, named the same (x2.mid, x1.xdrv.mid, ...),
    # ground (0 and gnd) aside; wrong node counts for Q M J E F G H K B would show here
    assert set(design.nets) - {"0"} == ngspice_nets(path)
    theirs = ngspice_elements(path)
    # ngspice `listing e`: the same number of elements after expansion, with the same paths
    assert len(design.elements) == len(theirs)
    assert sorted(e.key for e in design.elements) == sorted(theirs)
    # ngspice `listing e`: each element's nodes are the fields before its value or model
    for e in design.elements:
        if e.kind != "K":
            assert tuple(w.lower() for w in theirs[e.key][:len(e.nodes)]) == e.nodes, e.key


def test_global_and_gnd_as_ngspice_reads_them():
    require_ngspice()
    path = ROOT / "tests" / "netlists" / "hier_nested.cir"
    nets = ngspice_nets(path)
    # ngspice: .global vsys is one net, not x1.vsys; gnd is ground, not a node
    assert "vsys" in nets and not any(n.endswith(".vsys") or n == "gnd" for n in nets)
    design = expand(path)
    assert "vsys" in design.nets and "gnd" not in design.nets
