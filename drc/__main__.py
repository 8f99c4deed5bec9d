"""`python -m drc` runs the same command line as the `drc` script."""

from drc.cli import run

run()
