"""`python -m drc` runs the same command line as the `drc` script."""

import sys

from drc.cli import main

sys.exit(main())
