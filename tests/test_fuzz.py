"""Hostile input: netlists built from the grammar's pieces, and the samples mutated (lines
deleted, duplicated, truncated, shuffled, stray brackets). Whatever comes in, `drc check`
ends with exit status 0, 1 or 2 and never a traceback (status 3 is drc's own internal error).
Any input that once failed is kept in tests/fuzz_regressions/ and checked on every run.

The number of examples: DRC_FUZZ_EXAMPLES (default 700 per strategy, about two thousand in all).
"""

from __future__ import annotations

import contextlib
import io
import os
import random
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from drc.cli import main

ROOT = Path(__file__).resolve().parents[1]
SAMPLES = sorted((ROOT / "samples").glob("*.cir"))
REGRESSIONS = sorted((ROOT / "tests" / "fuzz_regressions").glob("*.cir"))
EXAMPLES = int(os.environ.get("DRC_FUZZ_EXAMPLES", "700"))
FUZZ = settings(max_examples=EXAMPLES, deadline=None, derandomize=True,
                suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large,
                                       HealthCheck.function_scoped_fixture])


def run(path: Path) -> tuple[int, str]:
    """`drc check` in this process; (exit status, stderr)."""
    err = io.StringIO()
    out = io.StringIO()
    with contextlib.redirect_stderr(err), contextlib.redirect_stdout(out):
        status = main(["check", str(path), "--format", "json"])
    return status, err.getvalue()


def assert_clean(path: Path):
    status, err = run(path)
    # the contract: 0, 1 or 2, and one `PATH:LINE:COLUMN: error:` line per problem for 2
    assert status in (0, 1, 2), f"status {status} for {path}:\n{err}\n---\n{path.read_text(errors='replace')[:3000]}"
    assert "Traceback" not in err
    if status == 2:
        for line in err.strip().splitlines():
            assert ": error: " in line, line


NAMES = st.sampled_from(["a", "b", "out", "vdd", "0", "gnd", "x.y", "n1", "led_a", "pa", "pb"])
NUMBERS = st.sampled_from(["1", "1k", "4k7", "R47", "1M", "1MEG", "10u", "2u2", "1F", "1e-3", "0",
                           "-5", "1e308", "1e999", "{1+2}", "{a*2}", "{1/0}", "'sqrt(4)'", "{(((}",
                           "abc", "1.8", "100p", "3.3", "{max(1,2)}", "{undefined}", "µ5", ""])
MODELS = st.sampled_from([".model dl D(IS=1e-20 N=1.8 RS=5)", ".model dl D IS=1e-14",
                          ".model ds D(IS=1e-7 N=1.05)", ".model dl D(IS=)", ".model bad",
                          ".model dl D(IS={is0})", ".model q NPN(BF=100)"])


@st.composite
def element(draw):
    letter = draw(st.sampled_from(list("RCLDVIXQMJEFGHKBZSWT")))
    name = f"{letter}{draw(st.integers(0, 20))}"
    nodes = draw(st.lists(NAMES, min_size=0, max_size=5))
    tail = draw(st.lists(st.one_of(NUMBERS, st.sampled_from(
        ["dl", "ds", "cell", "PULSE(0 1.8 0 1n 1n 0.25m 0.5m)", "PULSE(0 1", "SIN(0 1 1k)", "DC", "AC 1",
         "PWL(0 0 1m 1)", "params:", "r=1k", "=", "(", ")", "{", "}", "'", '"x"', "; c", "$ c"])),
        min_size=0, max_size=5))
    return " ".join([name, *nodes, *tail])


@st.composite
def netlist(draw):
    lines = [draw(st.sampled_from(["fuzz", "* title", "", "R1 a b 1k"]))]
    body = draw(st.lists(st.one_of(
        element(), MODELS,
        st.sampled_from([".param a=2", ".param is0=1e-20", ".param a={a}", ".subckt cell p q params: r=1k",
                         ".ends", ".subckt loop p", "X1 p loop", ".include nothere.inc", ".include /etc/passwd",
                         ".lib nothere.lib typ", ".global vdd", ".temp 27 -20", ".op", ".tran 1u 1m",
                         ".control", ".endc", "+ 1k", "* comment", ".end", "V1 vdd 0 3.3",
                         "VP pa 0 PULSE(0 3 0 1n 1n 0.25m 0.5m)", "CP pa x 10u", "D1 vdd x ds", "D2 x out ds",
                         "D3 out 0 dl", "R9 vdd 0 1M"])),
        min_size=0, max_size=25))
    return "\n".join(lines + body) + draw(st.sampled_from(["\n", "", "\r\n", "\n.end\n"]))


@FUZZ
@given(text=netlist())
def test_built_netlists_never_crash(tmp_path_factory, text):
    path = tmp_path_factory.mktemp("fuzz") / "built.cir"
    path.write_text(text, encoding="utf-8")
    assert_clean(path)


def mutate(text: str, rng: random.Random) -> str:
    lines = text.splitlines()
    for _ in range(rng.randint(1, 4)):
        if not lines:
            break
        kind = rng.choice(["delete", "duplicate", "truncate", "shuffle", "bracket", "bytes"])
        k = rng.randrange(len(lines))
        if kind == "delete":
            del lines[k]
        elif kind == "duplicate":
            lines.insert(k, lines[k])
        elif kind == "truncate":
            lines[k] = lines[k][: rng.randrange(len(lines[k]) + 1)]
        elif kind == "shuffle":
            lo = rng.randrange(len(lines))
            chunk = lines[lo:lo + rng.randint(2, 6)]
            rng.shuffle(chunk)
            lines[lo:lo + len(chunk)] = chunk
        elif kind == "bracket":
            line = lines[k]
            at = rng.randrange(len(line) + 1)
            lines[k] = line[:at] + rng.choice("(){}'\"=,;$+*") + line[at:]
        else:
            line = lines[k]
            at = rng.randrange(len(line) + 1)
            lines[k] = line[:at] + rng.choice(["\u00a0", "\t", "\u00b5", "\x7f", "é", "\ufeff"]) + line[at:]
    return "\n".join(lines) + "\n"


@FUZZ
@given(seed=st.integers(0, 2**32 - 1), which=st.integers(0, max(len(SAMPLES) - 1, 0)))
def test_mutated_samples_never_crash(tmp_path_factory, seed, which):
    sample = SAMPLES[which]
    folder = tmp_path_factory.mktemp("mut")
    # the sample's own config and includes come along, so the analysis runs too
    for f in sample.parent.glob(sample.stem + ".toml"):
        (folder / f.name).write_text(f.read_text())
    models = sample.parent / "models"
    if models.is_dir():
        (folder / "models").mkdir()
        for f in models.iterdir():
            (folder / "models" / f.name).write_text(f.read_text())
    path = folder / sample.name
    path.write_text(mutate(sample.read_text(), random.Random(seed)))
    assert_clean(path)


@FUZZ
@given(data=st.binary(min_size=0, max_size=400))
def test_binary_garbage_never_crashes(tmp_path_factory, data):
    path = tmp_path_factory.mktemp("bin") / "garbage.cir"
    path.write_bytes(data)
    assert_clean(path)


@pytest.mark.parametrize("path", REGRESSIONS, ids=[p.name for p in REGRESSIONS])
def test_kept_regressions(path):
    assert_clean(path)
