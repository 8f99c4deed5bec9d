"""The report stage's fast paths held to the slow ones they stand in for.

- render_json writes an entry the engine made in its final form as it is (_is_final)
  instead of rebuilding it: the bytes must be those of the full walk (_ordered, plain),
  which is what every report was written with before, and the engine's entries must all
  be final, or the fast path is never taken.
- indented_json (SARIF) against the standard library's json.dumps(indent=2).
- the text report's word wrapping against the standard library's textwrap.wrap.
- write_atomic on a target that is not a regular file (POSIX rename(2) would replace a
  device or a FIFO with a plain file).
"""

from __future__ import annotations

import json
import math
import os
import stat
import textwrap
import threading
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st

from drc.engine import run_check
from drc.report import render_json, write_atomic
from drc.report import jsonreport
from drc.report.jsonreport import indented_json, prepare
from drc.report.text import WIDTH, _wrapped

ROOT = Path(__file__).resolve().parents[1]
SAMPLES = sorted(str(p.relative_to(ROOT)) for p in (ROOT / "samples").glob("*.cir"))


def _full_walk(report: dict) -> str:
    """The JSON text as render_json wrote it before it kept final entries: every value
    walked by plain() and every dict rebuilt in the contract's key order."""
    prepared = prepare(report)
    return jsonreport._json_text(jsonreport._ordered(prepared, jsonreport._TOP_KEYS,
                                                     jsonreport._top_children, reuse=False))


@pytest.fixture(scope="module")
def sample_report(tmp_path_factory):
    cwd = os.getcwd()
    os.chdir(ROOT)
    try:
        report, _, _ = run_check(SAMPLES, None, [])
    finally:
        os.chdir(cwd)
    return report


def test_engine_entries_are_final(sample_report):
    # several files: the branches and pumps carry "path", put in its sorted place
    assert len(sample_report["inputs"]) > 1
    for key, keys, children in (("findings", jsonreport._FINDING_KEYS, jsonreport._finding_children),
                                ("branches", jsonreport.BRANCH_KEYS, jsonreport._spread_children),
                                ("pumps", jsonreport.PUMP_KEYS, jsonreport._spread_children)):
        entries = prepare(sample_report)[key]
        assert entries, key
        for entry in entries:
            assert jsonreport._is_final(entry, keys, children), (key, entry)


def test_fast_json_is_the_full_walk(sample_report):
    assert render_json(sample_report) == _full_walk(sample_report)


def test_fast_json_on_a_big_report_is_the_full_walk(sample_report):
    # past LARGE_REPORT entries the compact encoder writes it
    big = dict(sample_report)
    big["branches"] = sample_report["branches"] * (jsonreport.LARGE_REPORT // len(sample_report["branches"]) + 1)
    assert render_json(big) == _full_walk(big)


def test_entries_that_are_not_final_take_the_full_walk(sample_report):
    report = json.loads(json.dumps(sample_report))      # a copy to spoil
    branch = report["branches"][0]
    branch["current_A"]["low"] = np.float64(branch["current_A"]["low"])   # a numpy number
    report["branches"][1]["current_A"]["nominal"] = float("nan")         # RFC 8259: no NaN
    report["branches"][2]["elements"] = tuple(report["branches"][2]["elements"])
    at = next(i for i, f in enumerate(report["findings"]) if len(f["values"]) >= 2)
    finding = report["findings"][at]
    finding["values"] = dict(list(reversed(finding["values"].items())) + [("a_key", 1)])
    report["pumps"][0] = {"zeta": 1, **report["pumps"][0]}                # keys out of order
    text = render_json(report)
    assert text == _full_walk(report)
    data = json.loads(text)
    assert data["branches"][1]["current_A"]["nominal"] is None
    assert list(data["findings"][at]["values"]) == sorted(data["findings"][at]["values"])
    assert "a_key" in data["findings"][at]["values"]
    assert list(data["pumps"][0])[-1] == "zeta"


# ------------------------------------------------------------------ indented JSON

_LEAVES = st.one_of(st.none(), st.booleans(), st.integers(),
                    st.floats(allow_nan=False, allow_infinity=False), st.text())
_KEYS = st.one_of(st.text(), st.integers(), st.floats(allow_nan=False, allow_infinity=False),
                  st.booleans(), st.none())
_TREES = st.recursive(_LEAVES, lambda inner: st.one_of(
    st.lists(inner), st.tuples(inner, inner), st.dictionaries(_KEYS, inner)), max_leaves=40)


@settings(max_examples=500, deadline=None)
@given(_TREES)
def test_indented_json_is_the_standard_librarys(value):
    # Source: Python's json module, json.dumps(indent=2, ensure_ascii=False, allow_nan=False)
    assert indented_json(value) == json.dumps(value, indent=2, ensure_ascii=False,
                                              allow_nan=False)


@pytest.mark.parametrize("value", [math.nan, [1.0, math.inf], {"a": {"b": -math.inf}},
                                   {math.nan: 1}, object(), {(1, 2): 1}, [{1, 2}]])
def test_indented_json_refuses_what_json_refuses(value):
    with pytest.raises((ValueError, TypeError)) as theirs:
        json.dumps(value, indent=2, ensure_ascii=False, allow_nan=False)
    with pytest.raises(theirs.type) as ours:
        indented_json(value)
    assert str(ours.value) == str(theirs.value)


# ------------------------------------------------------------------ text wrapping

_WORDS = st.lists(st.text(alphabet="ab-.,µΩ\u00a0\t", min_size=0, max_size=12)
                  | st.text(alphabet="xy", min_size=85, max_size=110), min_size=0, max_size=40)


@settings(max_examples=1000, deadline=None)
@given(_WORDS, st.sampled_from(["  fix: ", "  caution: ", "  - ", "  waived: ", ""]),
       st.sampled_from([" ", "  "]))
def test_wrapping_is_textwraps(words, lead, space):
    # Source: Python's textwrap.wrap with the text report's settings
    text = space.join(words)
    expected = textwrap.wrap(text, WIDTH, initial_indent=lead,
                             subsequent_indent=" " * len(lead), break_long_words=False,
                             break_on_hyphens=False) or [lead.rstrip()]
    assert _wrapped(lead, text) == expected


# ------------------------------------------------------------------ writing a report

def test_write_atomic_keeps_a_device_a_device():
    # POSIX rename(2) over /dev/null would replace the device node with a plain file
    write_atomic(os.devnull, "a whole report\n")
    assert stat.S_ISCHR(os.stat(os.devnull).st_mode)


def test_write_atomic_writes_through_a_fifo(tmp_path):
    fifo = tmp_path / "report.pipe"
    os.mkfifo(fifo)
    got = {}

    def read():
        with open(fifo, encoding="utf-8") as stream:
            got["text"] = stream.read()

    reader = threading.Thread(target=read)
    reader.start()
    write_atomic(str(fifo), "ünïcode report\n")
    reader.join(10)
    assert got["text"] == "ünïcode report\n"
    assert stat.S_ISFIFO(os.stat(fifo).st_mode)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["report.pipe"]
