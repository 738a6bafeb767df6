"""`python -m pqcheck.cli` runs the command line."""

from . import run

if __name__ == "__main__":  # not when a spawned worker imports it as __mp_main__
    run()
