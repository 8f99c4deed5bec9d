"""The report stage's fast paths held to the slow ones they stand in for.

- render_json writes an entry the engine made in its final form as it is (_is_final)
  instead of rebuilding it: the bytes must be those of the full walk (_ordered, plain),
  which is what every report was written with before, and the engine's entries must all
  be final, or the fast path is never taken.
- the engine marks its lists FinalEntries, written with no check at all: every entry of
  a marked list, on the samples, with house rules, waivers and a baseline, and on a
  generated board, must be final, so an edit that breaks the form fails here.
- the engine's spreads (low, nominal, high) computed for many arrays at once against
  numpy's min, index and max of each array alone.
- json_bytes (orjson, for the JSON and SARIF reports) against the standard library's
  json.dumps, indented and compact: the same text, floats aside, which must read back as
  the same numbers; and indented_json (its fallback) against json.dumps(indent=2).
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
from drc.report.jsonreport import indented_json, json_bytes, prepare
from drc.report.text import WIDTH, _wrapped

ROOT = Path(__file__).resolve().parents[1]
SAMPLES = sorted(str(p.relative_to(ROOT)) for p in (ROOT / "samples").glob("*.cir"))


def _full_walk(report: dict) -> str:
    """The JSON text as render_json wrote it before it kept final entries: every value
    walked by plain() and every dict rebuilt in the contract's key order."""
    prepared = prepare(report)
    return jsonreport._json_bytes(jsonreport._ordered(prepared, jsonreport._TOP_KEYS,
                                                      jsonreport._top_children,
                                                      reuse=False)).decode("utf-8")


@pytest.fixture(scope="module")
def sample_report(tmp_path_factory):
    cwd = os.getcwd()
    os.chdir(ROOT)
    try:
        report, _, _ = run_check(SAMPLES, None, [])
    finally:
        os.chdir(cwd)
    return report


def _assert_marked_and_final(report):
    """Every findings, branches and pumps list the engine hands over is marked FinalEntries
    (written unchecked), and every entry in it is what the full walk makes of it: the same
    JSON text, keys in the same order."""
    prepared = prepare(report)
    for key, keys, children in (("findings", jsonreport._FINDING_KEYS, jsonreport._finding_children),
                                ("branches", jsonreport.BRANCH_KEYS, jsonreport._spread_children),
                                ("pumps", jsonreport.PUMP_KEYS, jsonreport._spread_children)):
        assert type(report[key]) is jsonreport.FinalEntries, key
        assert type(prepared[key]) is jsonreport.FinalEntries, key
        for entry in prepared[key]:
            assert jsonreport._is_final(entry, keys, children), (key, entry)
            walked = jsonreport._ordered(entry, keys, children)
            assert json.dumps(walked, allow_nan=False) == json.dumps(entry, allow_nan=False)


def test_engine_marks_only_final_entries_on_the_samples(sample_report):
    _assert_marked_and_final(sample_report)
    for path in SAMPLES:                                  # one file: no "path" keys
        report, _, _ = run_check([str(ROOT / path)], None, [])
        _assert_marked_and_final(report)


def test_engine_marks_only_final_entries_with_house_rules_waivers_and_a_baseline(tmp_path):
    from drc.baseline import render_baseline
    deck = str(ROOT / "samples" / "house_rules" / "hive_scale.cir")
    checks = [str(ROOT / "samples" / "house_rules" / "checks")]
    first, _, _ = run_check([deck], None, checks)
    _assert_marked_and_final(first)
    found = [f for f in first["findings"] if f["elements"]]
    assert len(found) >= 2
    waivers = tmp_path / "waivers.toml"                 # one waived, one run out, one unused
    waivers.write_text(
        f'[[waiver]]\nrule = "{found[0]["rule"]}"\nelement = "{found[0]["elements"][0]}"\n'
        'reason = "reviewed"\n'
        f'[[waiver]]\nrule = "{found[-1]["rule"]}"\nelement = "{found[-1]["elements"][0]}"\n'
        'reason = "reviewed once"\nuntil = 2020-01-01\n'
        f'[[waiver]]\nrule = "{found[0]["rule"]}"\nelement = "no-such-part"\nreason = "stale"\n',
        encoding="utf-8")
    baseline = tmp_path / "baseline.json"
    half = dict(first, findings=first["findings"][::2])
    baseline.write_text(render_baseline(prepare(half)), encoding="utf-8")
    report, _, _ = run_check([deck], None, checks, waiver_files=[str(waivers)],
                             baseline=str(baseline))
    kinds = {k for f in report["findings"] for k in ("waiver", "waiver_expired", "baseline")
             if k in f}
    assert kinds == {"waiver", "waiver_expired", "baseline"}
    assert any(f["rule"] == "waiver-unused" for f in report["findings"])
    _assert_marked_and_final(report)
    # SARIF takes a marked finding's values as they are; a plain list takes plain() of each
    from drc.report.sarif import render_sarif
    unmarked = dict(report, findings=list(report["findings"]))
    assert render_sarif(report) == render_sarif(unmarked)


def test_engine_marks_only_final_entries_on_a_generated_board(tmp_path):
    import sys
    sys.path.insert(0, str(ROOT / "bench"))
    try:
        from generate import config_text, generate
    finally:
        sys.path.remove(str(ROOT / "bench"))
    text, _ = generate(3000, faulty=1.0)     # every block's values random: many findings
    deck = tmp_path / "board.cir"
    deck.write_text(text, encoding="utf-8")
    deck.with_suffix(".toml").write_text(config_text(), encoding="utf-8")
    report, _, _ = run_check([str(deck)], None, [])
    assert report["branches"] and report["pumps"] and report["findings"]
    _assert_marked_and_final(report)
    assert render_json(report) == _full_walk(report)
    from drc.report.sarif import render_sarif
    assert render_sarif(report) == render_sarif(dict(report, findings=list(report["findings"])))


# Per-corner arrays with what makes a minimum or maximum delicate: NaN, infinities, and
# 0.0 beside -0.0 (equal, yet written differently).
_CORNER_VALUES = st.one_of(st.floats(), st.sampled_from([0.0, -0.0, math.nan, math.inf, -math.inf]))


@settings(max_examples=300, deadline=None)
@given(st.lists(st.lists(_CORNER_VALUES, min_size=1, max_size=40), min_size=1, max_size=150),
       st.integers(min_value=0, max_value=39))
def test_batched_spreads_are_each_arrays_own(rows, nominal):
    # _fill_spreads stands in for one _spread (numpy min, max and index of one array) per
    # array; the numbers must be the same to the bit, -0.0 included (compared by repr)
    from drc.engine import _fill_spreads, _spread
    arrays = [np.array(row, dtype=np.float64) for row in rows if nominal < len(row)]
    if not arrays:
        return
    entries = [{} for _ in arrays]
    _fill_spreads([(entry, "x_A", a) for entry, a in zip(entries, arrays)], nominal)
    for entry, a in zip(entries, arrays):
        assert repr(entry["x_A"]) == repr(_spread(a, nominal))


def test_batched_spreads_over_several_blocks():
    from drc.engine import SPREAD_BLOCK, _fill_spreads, _spread
    rng = np.random.default_rng(7)
    arrays = [rng.normal(size=9) for _ in range(3 * SPREAD_BLOCK + 5)]
    arrays[3][2] = math.nan
    arrays[SPREAD_BLOCK + 1][:] = [0.0, -0.0] * 4 + [0.0]
    arrays[2 * SPREAD_BLOCK][:] = [-0.0, 0.0] * 4 + [-0.0]
    arrays[-1][5] = -math.inf
    entries = [{} for _ in arrays]
    _fill_spreads([(entry, "x_A", a) for entry, a in zip(entries, arrays)], 4)
    assert [repr(e["x_A"]) for e in entries] == [repr(_spread(a, 4)) for a in arrays]


def test_shared_arrays_give_each_entry_its_own_spread():
    # identical cells share one solution's arrays: each array object is reduced once, and
    # every entry (sorted or not) still gets its own dict with that array's numbers
    from drc.engine import SORTED_SPREAD, _fill_spreads, _spread
    rng = np.random.default_rng(5)
    arrays = [rng.normal(size=9) for _ in range(4)] + [np.array([0.0, -0.0, 0.0])]
    picks = [arrays[k] for k in rng.integers(0, len(arrays), 300)]
    entries = [({"x_A": SORTED_SPREAD} if k % 3 == 0 else {}) for k in range(len(picks))]
    _fill_spreads([(entry, "x_A", a) for entry, a in zip(entries, picks)], 1)
    for entry, a in zip(entries, picks):
        wanted = _spread(a, 1)
        assert repr(dict(sorted(entry["x_A"].items()))) == repr(dict(sorted(wanted.items())))
    assert len({id(e["x_A"]) for e in entries}) == len(entries)


def test_sorted_spreads_are_what_plain_makes_of_low_nominal_high():
    # a pump's pin_currents: analysis.low_nominal_high of each array, through plain()
    from drc.analysis import low_nominal_high
    from drc.engine import SORTED_SPREAD, _fill_spreads
    rng = np.random.default_rng(11)
    arrays = [rng.normal(size=7) for _ in range(100)] + [np.array([1, 5, 3]), np.array([0.0])]
    arrays[5][1] = math.inf
    arrays[6][:] = -0.0
    entries = [{"x_A": SORTED_SPREAD} for _ in arrays]
    _fill_spreads([(entry, "x_A", a) for entry, a in zip(entries, arrays)], 0)
    for entry, a in zip(entries, arrays):
        wanted = jsonreport.plain(low_nominal_high(a, 0))
        assert repr(entry["x_A"]) == repr(wanted) and list(entry["x_A"]) == list(wanted)


def test_spreads_of_other_arrays_are_spread_itself():
    from drc.engine import _fill_spreads, _spread
    odd = [np.array([3, 1, 2]), np.array([0.5, -0.0, 0.0], dtype=np.float32)]
    entries = [{} for _ in odd]
    _fill_spreads([(entry, "x_V", a) for entry, a in zip(entries, odd)], 1)
    assert [repr(e["x_V"]) for e in entries] == [repr(_spread(a, 1)) for a in odd]


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


@settings(max_examples=500, deadline=None)
@given(st.text(), st.text(), st.lists(st.text()), st.lists(st.text()))
def test_fingerprint_key_is_the_standard_librarys_json(rule, path, elements, nets):
    key = [rule, path, elements, nets]
    assert jsonreport._key_json(key) == json.dumps(key, ensure_ascii=True, separators=(",", ":"))


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


_EXACT_LEAVES = st.one_of(st.none(), st.booleans(), st.integers(), st.text())
_EXACT_TREES = st.recursive(_EXACT_LEAVES, lambda inner: st.one_of(
    st.lists(inner), st.tuples(inner, inner), st.dictionaries(_KEYS, inner)), max_leaves=40)


@settings(max_examples=500, deadline=None)
@given(_EXACT_TREES)
def test_json_bytes_is_the_standard_librarys_text(value):
    # Source: Python's json module, json.dumps(ensure_ascii=False, allow_nan=False), indent=2
    # and compact; no floats here (the one thing written differently, next test). Ints past
    # 64 bits and keys that are not str take the standard library's own path.
    assert json_bytes(value, indent=True).decode("utf-8") == json.dumps(
        value, indent=2, ensure_ascii=False, allow_nan=False) + "\n"
    assert json_bytes(value, indent=False).decode("utf-8") == json.dumps(
        value, ensure_ascii=False, allow_nan=False, separators=(",", ":")) + "\n"


@settings(max_examples=500, deadline=None)
@given(_TREES)
def test_json_bytes_floats_read_back_as_the_same_numbers(value):
    # Source: RFC 8259 (any JSON reader: Python's json.loads here reads both texts)
    for indent in (True, False):
        assert json.loads(json_bytes(value, indent=indent)) == json.loads(json.dumps(value))


def test_json_bytes_writes_nan_and_infinities_as_null():
    # Source: RFC 8259 section 6 (no NaN or Infinity in JSON); plain() makes them null
    assert json.loads(json_bytes({"a": [math.nan, math.inf, -math.inf, 1.5]})) == {
        "a": [None, None, None, 1.5]}


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


# ------------------------------------------------------------------ leaving the process

import subprocess
import sys

# drc.cli.run ends the process with os._exit once the report is out; the ordinary way is
# sys.exit(main()), as `python -m drc` and the `drc` script have done. Each case runs both
# in a fresh interpreter and wants the same bytes on stdout and stderr, the same report
# file, and the same exit status.
_ORDINARY = "import sys; from drc.cli import main; sys.exit(main())"
_RUN = "from drc.cli import run; run()"
_WITH_ATEXIT = ("import atexit, sys; atexit.register(lambda: print('atexit handler ran', "
                "file=sys.stderr)); ")


def _drc(program: str, args: list[str], **kwargs) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-c", program, *args], cwd=ROOT,
                          capture_output="stdout" not in kwargs, **kwargs)


@pytest.mark.parametrize("args", [
    ["check", "samples/coin_tag.cir", "--format", "json"],             # status 0
    ["check", *SAMPLES, "--format", "text"],                           # findings: status 1
    ["check", "samples/no_such_board.cir"],                            # status 2, stderr
    ["check", "samples/remote_2aa.cir", "--format", "sarif", "--fail-on", "never"],
])
def test_run_leaves_the_output_and_status_of_an_ordinary_exit(args):
    ordinary = _drc(_WITH_ATEXIT + _ORDINARY, args)
    fast = _drc(_WITH_ATEXIT + _RUN, args)
    assert (ordinary.returncode, ordinary.stdout, ordinary.stderr) == \
        (fast.returncode, fast.stdout, fast.stderr)
    assert fast.stdout or fast.returncode == 2
    assert fast.stderr.decode().endswith("atexit handler ran\n")


def test_run_writes_the_report_file_whole(tmp_path):
    args = ["check", *SAMPLES, "--format", "json", "--write-baseline"]
    ordinary = _drc(_ORDINARY, args + [str(tmp_path / "a.base"), "--output", str(tmp_path / "a.json")])
    fast = _drc(_RUN, args + [str(tmp_path / "b.base"), "--output", str(tmp_path / "b.json")])
    assert (ordinary.returncode, ordinary.stdout, ordinary.stderr) == \
        (fast.returncode, fast.stdout, fast.stderr)
    assert (tmp_path / "a.json").read_bytes() == (tmp_path / "b.json").read_bytes()
    assert (tmp_path / "a.base").read_bytes() == (tmp_path / "b.base").read_bytes()
    json.loads((tmp_path / "b.json").read_text(encoding="utf-8"))


def test_run_on_a_closed_pipe_exits_as_an_ordinary_exit_does():
    # the reader has gone (POSIX: EPIPE on write): whatever the ordinary exit reports and
    # returns, run() must too
    outcomes = []
    for program in (_ORDINARY, _RUN):
        reading, writing = os.pipe()
        os.close(reading)
        try:
            done = _drc(program, ["check", "samples/coin_tag.cir", "--format", "json"],
                        stdout=writing, stderr=subprocess.PIPE)
        finally:
            os.close(writing)
        outcomes.append((done.returncode, done.stderr))
    assert outcomes[0] == outcomes[1]
    # a closed pipe drops the output, not the verdict: coin_tag's check is clean (status 0),
    # and nothing is said on stderr
    assert outcomes[0] == (0, b"")


_LEAVES = st.one_of(st.floats(), st.sampled_from([0.0, -0.0, math.nan, math.inf]), st.integers(-5, 5),
                    st.booleans(), st.none(), st.text(max_size=3),
                    st.builds(np.float64, st.floats()), st.builds(np.int64, st.integers(-5, 5)))
_KEYS = st.one_of(st.text(max_size=4), st.integers(0, 3))


@settings(max_examples=400, deadline=None)
@given(st.dictionaries(_KEYS, _LEAVES, max_size=5),
       st.one_of(st.none(), st.dictionaries(_KEYS, st.one_of(_LEAVES, st.dictionaries(_KEYS, _LEAVES, max_size=3)),
                                            max_size=4)))
def test_finding_json_values_and_corner_are_what_plain_makes(values, corner):
    # the usual shapes (str keys, exact floats; a corner of str, floats and a dict of
    # floats) take a short path; whatever they are, the result is the general path's:
    # each value made a float where it is a number, then plain(), to the bit (by repr)
    from drc.api import Finding, Location
    from drc.engine import _finding_json
    f = Finding(message="m", location=Location("a.cir", 1, 1), values=values, corner=corner,
                rule="r", severity="note")
    got = _finding_json(f)
    wanted_values = jsonreport.plain({k: (float(v) if isinstance(v, (int, float)) or hasattr(v, "item")
                                          else v) for k, v in values.items()})
    assert repr(got["values"]) == repr(wanted_values)
    assert repr(got["corner"]) == repr(jsonreport.plain(corner))
