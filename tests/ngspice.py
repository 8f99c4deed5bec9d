"""Run the reference simulator (Debian's ngspice) in batch mode and read back its numbers.

Tests that compare against ngspice call `require_ngspice()` first: where ngspice is missing
they skip, except under CI=true, where a missing simulator fails them (CI installs it).
"""

from __future__ import annotations

import os
import re
import shutil
import subprocess
import tempfile
from pathlib import Path

import numpy as np
import pytest

_ASSIGN = re.compile(r"^\s*(\S+)\s*=\s*([-+0-9.eE]+)\s*$")


def ngspice_path() -> str | None:
    return shutil.which("ngspice")


def require_ngspice() -> str:
    """The ngspice executable; skip (or, under CI=true, fail) when it is missing."""
    path = ngspice_path()
    if path is None:
        if os.environ.get("CI", "").lower() == "true":
            pytest.fail("ngspice is not installed, and CI=true: the reference comparisons must run")
        pytest.skip("ngspice is not installed (apt-get install -y ngspice)")
    return path


def _strip_end(netlist: str) -> str:
    """The netlist without its `.end` card, so a control block can be appended."""
    lines = netlist.rstrip().splitlines()
    while lines and lines[-1].strip().lower() in ("", ".end"):
        lines.pop()
    return "\n".join(lines) + "\n"


def run_batch(netlist: str, control: list[str], workdir: Path | None = None,
              timeout: float = 120) -> str:
    """Run `netlist` with a `.control` block of `control` lines; return stdout+stderr."""
    exe = require_ngspice()
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(workdir) if workdir is not None else Path(tmp)
        deck = folder / "_drc_reference.cir"
        text = _strip_end(netlist) + ".control\n" + "\n".join(control) + "\n.endc\n.end\n"
        deck.write_text(text)
        done = subprocess.run([exe, "-b", str(deck)], capture_output=True, text=True,
                              timeout=timeout, cwd=folder)
        if workdir is not None:
            deck.unlink()
        return done.stdout + done.stderr


def load_ok(path: Path, timeout: float = 60) -> tuple[bool, str]:
    """Does ngspice load the netlist file without an error? (True/False, its output)."""
    exe = require_ngspice()
    done = subprocess.run([exe, "-b", str(path)], capture_output=True, text=True,
                          timeout=timeout, cwd=Path(path).parent)
    out = done.stdout + done.stderr
    bad = re.search(r"(?im)^\s*(error|fatal)\b|unknown subckt|could not find|"
                    r"too few|no such file|cannot open|unable to find", out)
    return (done.returncode == 0 and bad is None), out


def op(netlist: str, vectors: list[str], temperatures_C: list[float] | None = None,
       workdir: Path | None = None) -> dict[float | None, dict[str, float]]:
    """Operating point: {temperature_C or None: {vector: value}} for each temperature."""
    control: list[str] = []
    temps: list[float | None] = list(temperatures_C) if temperatures_C else [None]
    for t in temps:
        if t is not None:
            control.append(f"set temp={t}")
        control.append("op")
        control.append("echo @@op-begin")
        control.append("print " + " ".join(vectors))
        control.append("echo @@op-end")
    out = run_batch(netlist, control, workdir)
    blocks = re.findall(r"@@op-begin(.*?)@@op-end", out, re.S)
    if len(blocks) != len(temps):
        raise AssertionError("ngspice did not run every .op:\n" + out)
    result: dict[float | None, dict[str, float]] = {}
    for t, block in zip(temps, blocks):
        values = {}
        for line in block.splitlines():
            m = _ASSIGN.match(line)
            if m:
                values[m.group(1).lower()] = float(m.group(2))
        missing = [v for v in vectors if v.lower() not in values]
        if missing:
            raise AssertionError(f"ngspice printed no {missing}:\n" + out)
        result[t] = values
    return result


def op_all(netlist: str, workdir: Path | None = None) -> dict[str, float]:
    """Every node voltage and branch current ngspice prints with `print all` after `.op`."""
    out = run_batch(netlist, ["op", "echo @@op-begin", "print all", "echo @@op-end"], workdir)
    block = re.search(r"@@op-begin(.*?)@@op-end", out, re.S)
    if block is None:
        raise AssertionError("ngspice did not run .op:\n" + out)
    values = {}
    for line in block.group(1).splitlines():
        m = _ASSIGN.match(line)
        if m:
            values[m.group(1).lower()] = float(m.group(2))
    return values


def tran(netlist: str, step_s: float, stop_s: float, vectors: list[str], uic: bool = True,
         temperature_C: float | None = None, max_step_s: float | None = None,
         workdir: Path | None = None) -> dict[str, np.ndarray]:
    """Transient run: {'time': array, vector: array, ...} (vectors as ngspice names them)."""
    with tempfile.TemporaryDirectory() as tmp:
        data = Path(tmp) / "wave.txt"
        control = []
        if temperature_C is not None:
            control.append(f"set temp={temperature_C}")
        spec = f"tran {step_s:g} {stop_s:g}"
        if max_step_s is not None:
            spec += f" 0 {max_step_s:g}"
        if uic:
            spec += " uic"
        control += ["set wr_singlescale", "set wr_vecnames", spec,
                    f"wrdata {data} " + " ".join(vectors)]
        out = run_batch(netlist, control, workdir)
        if not data.exists():
            raise AssertionError("ngspice wrote no transient data:\n" + out)
        rows = data.read_text().splitlines()
    header = rows[0].split()
    table = np.array([[float(x) for x in r.split()] for r in rows[1:] if r.strip()])
    result = {"time": table[:, 0]}
    for i, name in enumerate(vectors):
        result[name] = table[:, i + 1]
    assert len(header) == len(vectors) + 1, header
    return result


def tran_average(netlist: str, vector: str, period_s: float, periods: int, points: int = 400,
                 temperature_C: float | None = None, capped: bool = False) -> float:
    """The average of `vector` over the last of `periods` periods of a .tran (uic) run,
    printed every period / `points` (and, `capped`, with its step no longer than that)."""
    step = period_s / points
    w = tran(netlist, step, periods * period_s, [vector], temperature_C=temperature_C,
             max_step_s=step if capped else None)
    last = w["time"] >= (periods - 1) * period_s
    return float(np.trapezoid(w[vector][last], w["time"][last]) / period_s)
