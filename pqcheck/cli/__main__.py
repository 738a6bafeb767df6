"""`python -m pqcheck.cli` runs the command line."""

from . import run

run()
