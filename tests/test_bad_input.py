"""Unusable input through the command line: exit status 2, exactly one line
`PATH:LINE:COLUMN: error: MESSAGE` on stderr per problem, and never a traceback (the
interface contract, docs/contract.md). Locations are found in the files' text here: the
card's line, and the column of the field at fault (the opening bracket for an unclosed one).
"""

import re
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
BAD = Path("tests/netlists/bad")           # paths as a user types them, from the repository
LINE = re.compile(r"^(?P<path>.+?):(?P<line>\d+):(?P<column>\d+): error: (?P<message>.+)$")


def run(*args, cwd=ROOT):
    done = subprocess.run([sys.executable, "-m", "drc", "check", *map(str, args)],
                          capture_output=True, text=True, cwd=cwd, timeout=120)
    return done.returncode, done.stdout, done.stderr


def where(path: Path, card_start: str, field: str | None) -> tuple[int, int]:
    """(line, column) of `field` on the first line that starts with `card_start`."""
    for k, text in enumerate((ROOT / path).read_text().split("\n"), start=1):
        if text.lstrip().startswith(card_start):
            return k, (text.index(field) + 1 if field else len(text) - len(text.lstrip()) + 1)
    raise AssertionError(f"{card_start!r} not in {path}")


# file -> (file the error is in, card it is on, field at fault or None for the card, message)
CASES = {
    "unclosed_paren.cir": ("unclosed_paren.cir", "VP ", "(", "unclosed parenthesis"),
    "unclosed_brace.cir": ("unclosed_brace.cir", "R1 ", "{", "unclosed brace"),
    "unknown_letter.cir": ("unknown_letter.cir", "Z1 ", None, "unknown element letter 'Z'"),
    "too_few_nodes.cir": ("too_few_nodes.cir", "R1", None, "too few nodes"),
    "missing_ends.cir": ("missing_ends.cir", ".subckt", None, "has no '.ends'"),
    "unknown_subckt_params.cir": ("unknown_subckt_params.cir", "X1 ", "nosuch", "unknown subcircuit 'nosuch'"),
    "undefined_param.cir": ("undefined_param.cir", "R1 ", "rnone", "undefined parameter 'rnone'"),
    "missing_include.cir": ("missing_include.cir", ".include", "parts/", "no such file"),
    "syntax_equals.cir": ("syntax_equals.cir", "R1 ", "=", "'=' with no value"),
    "recursive_subckt.cir": ("recursive_subckt.cir", "XL ", None, "subcircuit recursion: loop -> loop"),
    "include_cycle.cir": ("cycle_b.inc", ".include", "include_cycle", "include cycle"),
    "lib_without_section.cir": ("lib_without_section.cir", ".lib", None,
                                "to read the whole file models/night.lib, write '.include models/night.lib'"),
    "negative_value.cir": ("negative_value.cir", "R1 ", "-100", "R1's value must not be negative, got -100"),
}


@pytest.fixture(scope="module")
def all_bad():
    """One run over every bad netlist (each subprocess costs a couple of seconds)."""
    code, out, err = run(*[BAD / name for name in CASES])
    return code, err


def test_all_bad_files_status_and_no_traceback(all_bad):
    code, err = all_bad
    # the contract: status 2 when an input is unusable, and never a Python traceback
    assert code == 2
    assert "Traceback" not in err
    lines = err.splitlines()
    # the contract: one line per problem, each PATH:LINE:COLUMN: error: MESSAGE
    assert len(lines) == len(CASES), err
    assert all(LINE.match(line) for line in lines), err


@pytest.mark.parametrize("name", sorted(CASES))
def test_each_bad_file_location_and_message(all_bad, name):
    _, err = all_bad
    in_file, card, field, message = CASES[name]
    expected_path = BAD / in_file
    line, column = where(expected_path, card, field)
    found = [m for m in map(LINE.match, err.splitlines())
             if m and Path(m["path"]) == expected_path]
    # exactly one line for this file, at the place the fault stands
    assert len(found) == 1, err
    m = found[0]
    assert (int(m["line"]), int(m["column"])) == (line, column), m.group(0)
    assert message in m["message"], m.group(0)


def test_one_file_alone_gives_one_line():
    code, out, err = run(BAD / "unclosed_paren.cir")
    line, column = where(BAD / "unclosed_paren.cir", "VP ", "(")
    # the contract: status 2, a single line, at the line where the '(' opened
    assert code == 2 and "Traceback" not in err
    assert err == f"{BAD / 'unclosed_paren.cir'}:{line}:{column}: error: unclosed parenthesis '(' opened here\n"


def test_missing_file(tmp_path):
    missing = tmp_path / "no_such_board.cir"
    code, out, err = run(missing)
    # the contract: an unreadable file is status 2, one line naming it
    assert code == 2 and "Traceback" not in err
    assert err.splitlines() == [f"{missing}:1:1: error: no such file or folder: {missing}"]


def test_folder_with_no_netlists(tmp_path):
    (tmp_path / "notes.txt").write_text("not a netlist\n")
    code, out, err = run(tmp_path)
    # the contract: PATH may be a folder of *.cir *.sp *.net *.spice; none is unusable
    assert code == 2 and "Traceback" not in err
    (line,) = err.splitlines()
    m = LINE.match(line)
    assert m and m["path"] == str(tmp_path) and "no netlists" in m["message"]


def test_binary_and_odd_input(tmp_path):
    binary = tmp_path / "blob.cir"
    binary.write_bytes(b"title\nR1 a 0 1k\n\x00\x01\x02\n")
    nbsp = tmp_path / "nbsp.cir"
    nbsp.write_text("title\nV1 a 0 DC 1\nR1 a\u00a00 1k\n.end\n", encoding="utf-8")
    code, out, err = run(binary, nbsp)
    # the contract: status 2, one line per unusable file, no traceback
    assert code == 2 and "Traceback" not in err
    lines = err.splitlines()
    assert len(lines) == 2 and all(LINE.match(x) for x in lines), err
    # the NUL byte is on line 3; the no-break space at its column on line 3
    assert lines[0].startswith(f"{binary}:3:1: error:")
    assert lines[1].startswith(f"{nbsp}:3:{'R1 a'.__len__() + 1}: error:")
