"""`python -m pqcheck` runs the command line."""

from .cli import main

main()
