"""The reading stage of `drc check` alone, in a fresh interpreter, for bench/run.py.

    python bench/read_only.py BOARD.cir

It does what `drc check BOARD.cir` does before its analysis - imports the modules the
command loads (drc.cli, drc.engine, drc.report), finds and reads the design context, and
reads, expands and flattens the netlist with the context's limits - then ends the process
as `drc` does (os._exit, no teardown). It prints the element count. This is the part of a
check that the issue "Read SPICE-style netlists" built, timed as a user would see it.
"""

from __future__ import annotations

import gc
import os
import sys


def main(path: str) -> None:
    gc.disable()                      # as drc/cli.py runs a check
    import drc.cli  # noqa: F401
    import drc.report  # noqa: F401
    from drc.engine import read_design
    _, flat = read_design(path, None)
    sys.stdout.write(f"{len(flat.elements)}\n")
    sys.stdout.flush()
    os._exit(0)


if __name__ == "__main__":
    main(sys.argv[1])
