"""Time drc's whole check against ngspice's load of the same generated board.

    python bench/run.py [N ...]          (default: 10000 100000)

For each N: generate bench/out/board_N.cir (bench/generate.py: designed values, 5 % of its
blocks drawn at random), and for the largest N also bench/out/board_N_random.cir (every
block drawn at random: nearly every branch fails, the stress case), time `ngspice -b` loading
it with no analysis, and time `python -m drc check FILE --format json --output /dev/null`
run from the repository root (after one untimed run, with Python's bytecode cache on, as an
installed drc has it); each the median of 3 runs, wall-clock. Prints one table.
The last two columns time drc's reading stage alone (bench/read_only.py: imports, design
context, read, expand, flatten; fresh interpreter, median of 3) and its ratio to ngspice.
Targets at 100k elements: the reading stage within 2x ngspice's load (the reading issue's
check), the whole check within 3x (the issues that add the analysis); drc's microseconds
per element at 100k within 1.3x that at 10k. See bench/README.md for what "load" means.
"""

from __future__ import annotations

import json
import os
import shutil
import statistics
import subprocess
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
OUT = HERE / "out"
RUNS = 3
DEFAULT_SIZES = (10_000, 100_000)

sys.path.insert(0, str(HERE))
from generate import FAULTY_SHARE, generate, config_text  # noqa: E402


def timed(cmd: list[str], cwd: Path, env: dict | None = None
          ) -> tuple[float, subprocess.CompletedProcess]:
    start = time.perf_counter()
    done = subprocess.run(cmd, cwd=cwd, capture_output=True, text=True, env=env)
    return time.perf_counter() - start, done


def installed_env() -> dict:
    """The environment with Python's bytecode cache on, as an installed drc runs: pip
    compiles an install's modules, so a user's `drc check` does not recompile its sources.
    A PYTHONDONTWRITEBYTECODE left in the shell would make every timed run pay that."""
    env = dict(os.environ)
    env.pop("PYTHONDONTWRITEBYTECODE", None)
    return env


def ngspice_loaded(done: subprocess.CompletedProcess) -> str | None:
    """None if ngspice read the whole deck; else why not. With no analysis ngspice-39
    exits 1 after its note 'no simulations run': that is a clean load."""
    out = done.stdout + done.stderr
    for line in out.splitlines():
        low = line.strip().lower()
        if low.startswith(("error", "fatal")) or "unknown subckt" in low:
            return line.strip()
    if done.returncode not in (0, 1):
        return f"exit status {done.returncode}"
    if done.returncode == 1 and "no simulations run" not in out:
        return "exit status 1 without the no-analysis note"
    return None


def reads_to_the_end(exe: str, deck: Path) -> bool:
    """Proof that a no-analysis load instantiates every card: a copy with one bad value
    on its last card before .end must make ngspice report an error on that line."""
    text = deck.read_text().rstrip().splitlines()
    assert text[-1].strip().lower() == ".end"
    probe = deck.with_name(deck.stem + "_probe.cir")
    probe.write_text("\n".join(text[:-1] + ["RPROBE v3v3 0 R47", ".end"]) + "\n")
    done = subprocess.run([exe, "-b", str(probe)], capture_output=True, text=True)
    probe.unlink()
    return f"line {len(text)}" in (done.stdout + done.stderr).lower()


def median_of_runs(cmd: list[str], cwd: Path, env: dict | None, problem, what: str
                   ) -> tuple[float | None, str]:
    """The median wall-clock time of RUNS runs of cmd, or (None, why) at the first run that
    `problem(done)` (a str, or None) finds wrong."""
    times = []
    for _ in range(RUNS):
        seconds, done = timed(cmd, cwd, env)
        why = problem(done)
        if why:
            return None, f"{what} failed: {why}"
        times.append(seconds)
    return statistics.median(times), ""


def _last_error(done: subprocess.CompletedProcess) -> str:
    return (done.stderr.strip().splitlines() or [f"exit status {done.returncode}"])[-1]


def time_ngspice(exe: str, deck: Path) -> tuple[float | None, str]:
    return median_of_runs([exe, "-b", str(deck)], deck.parent, None, ngspice_loaded, "ngspice")


def _drc_died(done: subprocess.CompletedProcess) -> str | None:
    # 0: clean, 1: findings at or above --fail-on; both are a finished check,
    # unless Python itself died (an import error also exits 1)
    if done.returncode not in (0, 1) or "Traceback" in done.stderr:
        return _last_error(done)
    return None


def time_drc(deck: Path) -> tuple[float | None, str]:
    env = installed_env()
    # one untimed run first: it writes the bytecode cache and shows that a report comes out
    report = deck.with_suffix(".json")
    subprocess.run([sys.executable, "-m", "drc", "check", str(deck), "--format", "json",
                    "--output", str(report)], cwd=ROOT, capture_output=True, text=True, env=env)
    try:
        if json.loads(report.read_text()).get("schema") != "drc-report/1":
            raise ValueError("no drc-report/1 schema key")
    except (OSError, ValueError) as why:
        return None, f"drc failed: its report is not a drc report ({why})"
    return median_of_runs([sys.executable, "-m", "drc", "check", str(deck), "--format", "json",
                           "--output", "/dev/null"], ROOT, env, _drc_died, "drc")


def time_reading(deck: Path) -> tuple[float | None, str]:
    """drc's reading stage alone (bench/read_only.py: imports, design context, read, expand,
    flatten), in a fresh interpreter each run, after one untimed run: what the issue
    "Read SPICE-style netlists" built, before the analysis and rules there were."""
    env = installed_env()
    cmd = [sys.executable, str(HERE / "read_only.py"), str(deck)]
    subprocess.run(cmd, cwd=ROOT, capture_output=True, env=env)
    return median_of_runs(cmd, ROOT, env,
                          lambda done: _last_error(done) if done.returncode != 0 else None,
                          "drc's reading stage")


def startup_ngspice(exe: str) -> float:
    """ngspice's own start-up on a two-card deck, for the README's context."""
    tiny = OUT / "tiny.cir"
    tiny.write_text("start-up only\nV1 a 0 1\nR1 a 0 1k\n.end\n")
    return statistics.median(timed([exe, "-b", str(tiny)], OUT)[0] for _ in range(RUNS))


def main(argv: list[str]) -> int:
    sizes = [int(a.replace("_", "")) for a in argv[1:]] or list(DEFAULT_SIZES)
    exe = shutil.which("ngspice")
    OUT.mkdir(exist_ok=True)
    rows = []
    boards = [(n, FAULTY_SHARE) for n in sizes] + [(max(sizes), 1.0)]
    for n, faulty in boards:
        deck = OUT / (f"board_{n}.cir" if faulty == FAULTY_SHARE else f"board_{n}_random.cir")
        text, count = generate(n, faulty)
        deck.write_text(text)
        deck.with_suffix(".toml").write_text(config_text())
        ng, ng_note = (None, "ngspice not installed") if exe is None else time_ngspice(exe, deck)
        if exe is not None and ng is not None and not reads_to_the_end(exe, deck):
            ng_note = "ngspice did not reach the deck's last card: its time is not a full load"
        drc, drc_note = time_drc(deck)
        reading, reading_note = time_reading(deck)
        for note in (ng_note, drc_note, reading_note):
            if note:
                print(f"N={count}: {note}")
        rows.append((count, f"{faulty:.0%}", drc, ng, reading))
    if exe is not None:
        print(f"ngspice start-up (two-card deck): {startup_ngspice(exe):.3f} s")

    def cell(x: float | None, fmt: str) -> str:
        return "-" if x is None else format(x, fmt)

    print(f"{'N':>8} {'random':>6} {'drc s':>8} {'ngspice s':>10} {'ratio':>6} {'drc us/elem':>12} "
          f"{'reading s':>10} {'ratio':>6}")
    per_element = []
    for count, random_share, drc, ng, reading in rows:
        ratio = drc / ng if drc is not None and ng else None
        us = drc / count * 1e6 if drc is not None else None
        reading_ratio = reading / ng if reading is not None and ng else None
        if random_share == f"{FAULTY_SHARE:.0%}":
            per_element.append((count, us))
        print(f"{count:>8} {random_share:>6} {cell(drc, '.3f'):>8} {cell(ng, '.3f'):>10} "
              f"{cell(ratio, '.2f'):>6} {cell(us, '.2f'):>12} {cell(reading, '.3f'):>10} "
              f"{cell(reading_ratio, '.2f'):>6}")
    small = next((us for c, us in per_element if 9_000 <= c <= 11_000), None)
    large = next((us for c, us in per_element if 90_000 <= c <= 110_000), None)
    if small is not None and large is not None:
        print(f"us/element at 100k / at 10k: {large / small:.2f} (target <= 1.3)")
    else:
        print("us/element at 100k / at 10k: - (needs both sizes and a working drc)")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))
