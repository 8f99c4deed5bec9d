"""Hostile input: netlists built from the grammar's pieces, and the samples mutated (lines
deleted, duplicated, truncated, shuffled, stray brackets). Whatever comes in, `drc check`
ends with exit status 0, 1 or 2 and never a traceback (status 3 is drc's own internal error).
Any input that once failed is kept in tests/fuzz_regressions/ and checked on every run.

Six strategies: built netlists, mutated samples, binary garbage, parameter expressions
from the expression grammar's pieces, folders of files that include each other (cycles,
escapes, links, deep nests), and design-context configs from the TOML schema's pieces.

The number of examples: DRC_FUZZ_EXAMPLES per strategy (default 700, about four thousand in
all; about two minutes on two cores). `DRC_FUZZ_EXAMPLES=3000 pytest tests/test_fuzz.py` for
a longer hunt; a failure found that way is saved to tests/fuzz_regressions/ as a *.cir.
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


def copy_models(sample: Path, folder: Path) -> None:
    """The sample's include folder beside the copy, so its .include still resolves."""
    models = sample.parent / "models"
    if models.is_dir():
        (folder / "models").mkdir()
        for f in models.iterdir():
            (folder / "models" / f.name).write_text(f.read_text())


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
    copy_models(sample, folder)
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


# ------------------------------------------------------------------ parameter expressions

ATOMS = st.sampled_from(["1", "2.5", "1k", "1e-3", "1e308", "1e999", "0", "-1", "a", "b", "pi",
                         "undefined", "1MEG", "10µ", ".5", "1e", "", "'x'"])
OPERATORS = st.sampled_from(["+", "-", "*", "/", "%", "**", "^", "==", "!=", "<", ">=", "&&",
                             "||", " ? ", " : ", ",", " "])
FUNCTION_NAMES = st.sampled_from(["sqrt", "exp", "log", "ln", "log10", "abs", "min", "max",
                                  "pow", "sin", "floor", "int", "sgn", "nosuch", ""])


@st.composite
def expression(draw, depth=0):
    kind = draw(st.integers(0, 5 if depth < 6 else 0))
    if kind == 0:
        return draw(ATOMS)
    if kind == 1:
        return draw(expression(depth + 1)) + draw(OPERATORS) + draw(expression(depth + 1))
    if kind == 2:
        args = draw(st.lists(expression(depth + 1), min_size=0, max_size=3))
        return f"{draw(FUNCTION_NAMES)}({','.join(args)})"
    if kind == 3:
        return draw(st.sampled_from(["-", "!", "+", "("])) + draw(expression(depth + 1))
    if kind == 4:              # deep or long on purpose: past the limits, or just under them
        n = draw(st.sampled_from([10, 63, 64, 65, 200, 3000]))
        wrap = draw(st.sampled_from(["(", "-", "!", "sqrt(", "f(", "2**", "1+"]))
        close = ")" * n if wrap.endswith("(") else ""
        return wrap * n + draw(ATOMS) + close
    return f"({draw(expression(depth + 1))})"


@FUZZ
@given(values=st.lists(expression(), min_size=1, max_size=4),
       quoting=st.lists(st.sampled_from(["{%s}", "'%s'", "%s", "{%s", "%s}"]), min_size=4,
                        max_size=4))
def test_expressions_never_crash(tmp_path_factory, values, quoting):
    lines = ["expressions", ".param a=2 b={a*3}"]
    for k, value in enumerate(values):
        q = quoting[k % len(quoting)] % value
        lines += [f".param p{k}={q}", f"R{k} n{k} 0 {q}"]
    lines += ["V1 n0 0 {p0}", "D1 n0 n1 LR", ".model LR D(IS={p0} N=1.8)", ".end"]
    path = tmp_path_factory.mktemp("expr") / "expr.cir"
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    assert_clean(path)


# ------------------------------------------------- folders of files including each other

INCLUDE_TARGETS = st.sampled_from(["f0.inc", "f1.inc", "f2.inc", "sub/f3.inc", "../f0.inc",
                                   "sub/../f1.inc", "/etc/hostname", "../../outside.inc",
                                   "nothere.inc", "link.inc", "sub", "top.cir", "{f1.inc}",
                                   "'f2.inc'", '"sub/f3.inc"'])
PIECES = st.sampled_from([
    "R1 a b 1k", "V1 a 0 3", "D1 b 0 LR", ".model LR D(IS=1e-20 N=1.8)", ".subckt s p q",
    ".subckt s p q r=1k", ".ends", "X1 a b s", "X2 a b s r=2k", "X3 a b t", ".subckt t p q",
    "X9 p q s", "X8 p q t", ".lib typ", ".endl", ".param r=1k", "R2 p q {r}", ".global a"])


@st.composite
def file_body(draw):
    lines = draw(st.lists(st.one_of(PIECES, INCLUDE_TARGETS.map(lambda t: f".include {t}"),
                                    INCLUDE_TARGETS.map(lambda t: f".lib {t} typ")),
                          max_size=10))
    return "\n".join(lines) + "\n"


@FUZZ
@given(bodies=st.lists(file_body(), min_size=5, max_size=5), top=file_body(),
       link=st.booleans(), fan=st.integers(1, 12), depth=st.integers(0, 12))
def test_included_files_never_crash(tmp_path_factory, bodies, top, link, fan, depth):
    root = tmp_path_factory.mktemp("inc")
    (root / "outside.inc").write_text("R1 a 0 OUTSIDE_MARKER\n")
    project = root / "p"
    (project / "sub").mkdir(parents=True)
    for k, body in enumerate(bodies[:3]):
        (project / f"f{k}.inc").write_text(body)
    (project / "sub" / "f3.inc").write_text(bodies[3])
    if link:
        (project / "link.inc").symlink_to(root / "outside.inc")
    nest = [f".subckt n0 p q", "R1 p q 1k", ".ends"]
    for k in range(1, depth + 1):       # fan**depth elements: some past the million limit
        nest += [f".subckt n{k} p q"] + [f"X{i} p q n{k - 1}" for i in range(fan)] + [".ends"]
    path = project / "top.cir"
    path.write_text("top\n" + top + "\n".join(nest) + f"\nXN a 0 n{depth}\n" + bodies[4])
    status, err = run(path)
    assert status in (0, 1, 2) and "Traceback" not in err, err
    assert "OUTSIDE_MARKER" not in err
    assert_clean(path)


# ---------------------------------------------------------------- configs are input too

KEYS = st.sampled_from([
    "[supply.VBAT]", "[supply.V1]", "[pin.PA]", "[led.D1]", "[led.LR]", "[ambient]",
    "[tolerance]", "[limits]", "[rule.led-headroom]", "[rule.nosuch]", "[tool.drc]", "[[waiver]]",
    'source = "V1"', 'net = "a"', 'range = ["2.0 V", "3.2 V"]', 'range = ["3 V", "2 V"]',
    'range = ["2 mA", "3 mA"]', 'nominal = "3.0 V"', 'nominal = "1e999 V"', 'battery = "lithium-coin"',
    'battery = "nosuch"', "cells = 0", "cells = 1e3", 'supply = "V1"', 'output_resistance = "40 ohm"',
    'max_current = "20 mA"', 'max_current = "-1 mA"', 'drive = "toggle"', 'frequency = "2 kHz"',
    'duty = "150 %"', 'phase = "inverted"', 'colour = "red"', 'colour = "ultraviolet"',
    'visible_current = "0.5 mA"', 'temperature = ["-20 degC", "60 degC"]', 'resistor = "5 %"',
    'capacitor = "abc"', "max_elements = 0", "max_elements = 10", 'max_file_bytes = "1 KiB"',
    'include_folders = ["..", "/"]', 'house_rule_time = "1 ms"', 'severity = "fatal"',
    "enabled = 3", "rnage = 1", "= 3", "[supply", 'x = "', "key = [1, 2", "\x00", "\u00b5 = 1"])


@FUZZ
@given(lines=st.lists(KEYS, min_size=0, max_size=12), which=st.integers(0, max(len(SAMPLES) - 1, 0)))
def test_configs_never_crash(tmp_path_factory, lines, which):
    sample = SAMPLES[which]
    folder = tmp_path_factory.mktemp("cfg")
    copy_models(sample, folder)
    path = folder / sample.name
    path.write_text(sample.read_text())
    (folder / (sample.stem + ".toml")).write_text("\n".join(lines) + "\n", encoding="utf-8")
    assert_clean(path)
