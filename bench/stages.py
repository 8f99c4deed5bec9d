"""Time each stage of one `drc check` separately on a generated board.

    python bench/stages.py [N ...] [--repeat R] [--faulty SHARE]   (default: 10000 100000)

For each N, a fresh interpreter (so imports are timed cold) generates bench/out/board_N.cir
and its design context (bench/generate.py; --faulty: the share of blocks drawn at random,
1 for the stress board), then runs the check the way `drc check FILE
--format json --output /dev/null` does (gc off, as drc/cli.py does), timing:

- import:  importing the modules `drc check` loads (drc.cli, drc.engine, drc.report);
- context: finding and reading the design context (TOML);
- read:    reading the files into cards (read_source, read_text), includes too;
- expand:  the rest of expansion (parameters, subcircuits, flattening);
- analyse: drc.analysis.analyse;
- rules:   every rule's check, its findings gathered;
- report:  gathering the report dict and rendering it as JSON, written to /dev/null.

Each stage's time is printed as µs per element, with the total, best of --repeat runs of
the stages after import (import is timed once: it happens once per process). What drc
remembers between checks in one process is emptied before each run, so every run does the
work a fresh `drc check` does.
"""

from __future__ import annotations

import json
import subprocess
import sys
import time
from dataclasses import replace
from pathlib import Path

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
OUT = HERE / "out"
STAGES = ("import", "context", "read", "expand", "analyse", "rules", "report")
DEFAULT_SIZES = (10_000, 100_000)


def _one(n: int, repeat: int, faulty: float) -> dict:
    sys.path.insert(0, str(HERE))
    from generate import FAULTY_SHARE, config_text, generate

    OUT.mkdir(exist_ok=True)
    deck = OUT / (f"board_{n}.cir" if faulty == FAULTY_SHARE else f"board_{n}_random{faulty:g}.cir")
    text, count = generate(n, faulty)
    if not deck.exists() or deck.read_text() != text:
        deck.write_text(text)
    deck.with_suffix(".toml").write_text(config_text())

    import gc
    gc.disable()
    start = time.perf_counter()
    import drc.cli  # noqa: F401
    import drc.engine as engine
    import drc.expand as expand_mod
    from drc.report import render_bytes
    from drc.registry import load_rules
    imported = time.perf_counter() - start

    best: dict[str, float] | None = None
    for _ in range(repeat):
        _forget()
        spent = dict.fromkeys(STAGES[1:], 0.0)

        def timed(stage, fn):
            def wrapper(*args, **kwargs):
                t = time.perf_counter()
                try:
                    return fn(*args, **kwargs)
                finally:
                    spent[stage] += time.perf_counter() - t
            return wrapper

        originals = (engine.load_context, engine.expand, engine.analyse,
                     expand_mod.read_source, expand_mod.read_text)
        engine.load_context = timed("context", originals[0])
        engine.expand = timed("expand", originals[1])
        engine.analyse = timed("analyse", originals[2])
        expand_mod.read_source = timed("read", originals[3])
        expand_mod.read_text = timed("read", originals[4])
        t = time.perf_counter()
        rules, failures = load_rules([])
        loading = time.perf_counter() - t
        timed_rules = [replace(r, check=_gathered(r.check, spent)) for r in rules]
        engine.load_rules = lambda folders: (timed_rules, failures)
        try:
            t = time.perf_counter()
            report, sources, loaded = engine.run_check([str(deck)], None, [])
            out = render_bytes(report, "json", sources=sources,
                               rules=engine.rule_metadata(loaded), color=False, quiet=False,
                               fail_on="error")
            with open("/dev/null", "wb") as sink:
                sink.write(out)
            total = time.perf_counter() - t + loading
        finally:
            (engine.load_context, engine.expand, engine.analyse,
             expand_mod.read_source, expand_mod.read_text) = originals
            engine.load_rules = load_rules
        spent["expand"] -= spent["read"]          # expand() includes the reading
        spent["report"] = total - sum(spent.values())
        if best is None or sum(spent.values()) < sum(best.values()):
            best = spent
        gc.collect()
    return {"n": count, "import": imported, **best}


# Module-level tables of the rules and helpers that remember work between checks.
_REMEMBERED = ("_OUTCOMES", "_FIXES", "_DESCRIBED")


def _forget() -> None:
    """Empty everything drc remembers between checks in one process (its Memo tables, the
    rules' tables of fixes, functools caches), so that each repeat does the work a fresh
    `drc check` does: a repeat that found the pumps already simulated timed too little."""
    from drc.memo import Memo
    for name, module in list(sys.modules.items()):
        if not (name == "drc" or name.startswith(("drc.", "rules."))) or module is None:
            continue
        for attribute, value in list(vars(module).items()):
            if isinstance(value, Memo):
                value.store.clear()
            elif attribute in _REMEMBERED and isinstance(value, dict):
                value.clear()
            elif callable(getattr(value, "cache_clear", None)):
                value.cache_clear()


def _gathered(check, spent):
    """A rule's check that gathers its findings, timed under "rules"."""
    def run(design, settings):
        t = time.perf_counter()
        try:
            return list(check(design, settings) or ())
        finally:
            spent["rules"] += time.perf_counter() - t
    return run


def main(argv: list[str]) -> int:
    args = argv[1:]
    options = {"--repeat": "1", "--faulty": None}
    for flag in options:
        if flag in args:
            k = args.index(flag)
            options[flag] = args[k + 1]
            del args[k:k + 2]
    repeat = int(options["--repeat"])
    if options["--faulty"] is None:
        sys.path.insert(0, str(HERE))
        from generate import FAULTY_SHARE
        options["--faulty"] = str(FAULTY_SHARE)
    faulty = float(options["--faulty"])
    if args and args[0] == "--one":
        print(json.dumps(_one(int(args[1]), repeat, faulty)))
        return 0
    sizes = [int(a.replace("_", "")) for a in args] or list(DEFAULT_SIZES)
    rows = []
    for n in sizes:
        done = subprocess.run([sys.executable, str(Path(__file__).resolve()), "--one", str(n),
                               "--repeat", str(repeat), "--faulty", str(faulty)],
                              cwd=ROOT, capture_output=True, text=True)
        if done.returncode != 0:
            print(f"N={n}: failed: {(done.stderr.strip().splitlines() or ['?'])[-1]}")
            continue
        rows.append(json.loads(done.stdout.strip().splitlines()[-1]))
    print(f"{'stage':>8} " + " ".join(f"{'N=' + str(r['n']):>12}" for r in rows)
          + "   (µs per element; import: ms)")
    for stage in STAGES:
        cells = []
        for r in rows:
            cells.append(f"{r[stage] * 1e3:>9.1f} ms" if stage == "import"
                         else f"{r[stage] / r['n'] * 1e6:>12.2f}")
        print(f"{stage:>8} " + " ".join(cells))
    totals = [sum(r[s] for s in STAGES) for r in rows]
    print(f"{'total':>8} " + " ".join(f"{t / r['n'] * 1e6:>12.2f}" for t, r in zip(totals, rows)))
    print(f"{'total s':>8} " + " ".join(f"{t:>12.3f}" for t in totals))
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))
