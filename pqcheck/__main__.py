"""`python -m pqcheck` runs the command line."""

from .cli import run

if __name__ == "__main__":  # not when a spawned worker imports it as __mp_main__
    run()
