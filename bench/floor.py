"""How near a check written in Python can come to ngspice's load at all: lower bounds.

    python bench/floor.py [N]            (default: 100000)

On the board bench/run.py times (bench/generate.py, N elements), side by side with ngspice's
load of it (median of 3 each, as bench/run.py times them):

- imports:       a fresh interpreter importing what `drc check` imports, and nothing else;
- least reading: the same imports, then the least any Python reader of the file must do:
                 split each element card into its words and make one drc Element (with its
                 Location and its node names lower-cased through one table) per card. No
                 value, parameter, continuation line, subcircuit or error is read; it is a
                 floor, not a reader;
- least report:  the check's own JSON report of the board (drc run once), each finding and
                 branch entry made again as fresh dicts from its values and written with
                 orjson, as the report stage ends: the cost of putting that many findings
                 into a report at all, with every one of them already known.

It prints each against ngspice's load. What the sum leaves out is the whole analysis and
every rule, so a check cannot be faster than it; the targets are the reading stage within
2x and the whole check within 3x ngspice's load at 100k elements (see bench/README.md).
"""

from __future__ import annotations

import json
import shutil
import subprocess
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
OUT = HERE / "out"

sys.path.insert(0, str(HERE))
from generate import config_text, generate  # noqa: E402
from run import installed_env, median_of_runs, time_ngspice  # noqa: E402

IMPORTS = "import drc.cli, drc.engine, drc.report"

# the least reading, run in a fresh interpreter with the deck's path as its argument
# (in a function, as drc's own loops are: its names are locals)
LEAST_READING = IMPORTS + """
import gc, os, sys
from drc.design import Element
from drc.errors import Location


def least(path):
    new = tuple.__new__
    keys = {}
    elements = []
    with open(path) as handle:
        lines = handle.read().split("\\n")
    for number, line in enumerate(lines[1:], 2):
        words = line.split()
        if not words or words[0][0] in "*.+;":
            continue
        nodes = []
        for node in words[1:3]:
            key = keys.get(node)
            if key is None:
                key = keys[node] = node.lower()
            nodes.append(key)
        name = words[0]
        elements.append(Element(name, name.lower(), name[0].upper(), tuple(nodes),
                                new(Location, (path, number, 1))))
    return elements


gc.disable()
sys.stdout.write(f"{len(least(sys.argv[1]))}\\n")
sys.stdout.flush()
os._exit(0)
"""


def _fresh(code: str, deck: Path, elements: int | None = None) -> tuple[float | None, str]:
    """Median seconds of `code` in a fresh interpreter (after one untimed run), or (None,
    why). With `elements`, the code must print that many elements made: every card."""
    cmd = [sys.executable, "-c", code, str(deck)]
    env = installed_env()
    subprocess.run(cmd, cwd=ROOT, capture_output=True, env=env)    # the bytecode cache

    def problem(done):
        if done.returncode:
            return (done.stderr.strip().splitlines() or ["?"])[-1]
        if elements is not None and done.stdout.strip() != str(elements):
            return f"it made {done.stdout.strip()} elements, not the board's {elements}"
        return None
    return median_of_runs(cmd, ROOT, env, problem, "python")


def _fresh_dicts(entries: list[dict]) -> list[dict]:
    """Each entry again as a new dict, its dict and list values new too (one level down)."""
    out = []
    for entry in entries:
        made = {}
        for key, value in entry.items():
            kind = type(value)
            made[key] = dict(value) if kind is dict else list(value) if kind is list else value
        out.append(made)
    return out


def least_report(deck: Path) -> tuple[float, int]:
    """Seconds to make the board's report's findings and branch entries again and write the
    report with orjson (best of 3), and how many findings it has."""
    import orjson
    report_path = OUT / f"{deck.stem}_floor.json"
    subprocess.run([sys.executable, "-m", "drc", "check", str(deck), "--format", "json",
                    "--output", str(report_path)], cwd=ROOT, capture_output=True,
                   env=installed_env())
    report = json.loads(report_path.read_text())
    report_path.unlink()
    best = float("inf")
    for _ in range(3):
        start = time.perf_counter()
        made = dict(report, findings=_fresh_dicts(report["findings"]),
                    branches=_fresh_dicts(report["branches"]))
        orjson.dumps(made, option=orjson.OPT_INDENT_2 | orjson.OPT_APPEND_NEWLINE)
        best = min(best, time.perf_counter() - start)
    return best, len(report["findings"])


def main(argv: list[str]) -> int:
    n = int(argv[1].replace("_", "")) if len(argv) > 1 else 100_000
    exe = shutil.which("ngspice")
    if exe is None:
        print("ngspice is not installed: the floors need its load time beside them")
        return 2
    OUT.mkdir(exist_ok=True)
    deck = OUT / f"board_{n}.cir"
    text, count = generate(n)
    deck.write_text(text)
    deck.with_suffix(".toml").write_text(config_text())
    ng, why = time_ngspice(exe, deck)
    imports, why2 = _fresh(IMPORTS, deck)
    reading, why3 = _fresh(LEAST_READING, deck, count)
    for problem in (why, why2, why3):
        if problem:
            print(problem)
            return 1
    report, findings = least_report(deck)
    print(f"board of {count} elements, {findings} findings; ngspice load {ng:.3f} s")
    print(f"{'floor':>28} {'s':>7} {'x ngspice':>10}")
    for label, seconds in (("imports", imports), ("least reading (imports too)", reading),
                           ("least report", report),
                           ("reading + report floors", reading + report)):
        print(f"{label:>28} {seconds:>7.3f} {seconds / ng:>10.2f}")
    print("targets: reading stage <= 2x, whole check <= 3x; the floors leave out the analysis"
          " and the rules")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))
