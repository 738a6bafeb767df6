"""`python -m pqcheck` runs the command line."""

from .cli import run

run()
