"""Test set-up: tests/ on sys.path, so test files can `from ngspice import ...`."""

import os
import sys

sys.path.insert(0, os.path.dirname(__file__))
