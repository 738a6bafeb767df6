"""Build of the optional native loops (pqcheck/_cext.c); everything else is in pyproject.toml.

The extension is optional: where no C compiler is found the install still succeeds and
pqcheck runs its numba forms of the same loops (slower to start, same results)."""

from setuptools import Extension, setup

setup(
    ext_modules=[
        Extension(
            "pqcheck._cext",
            sources=["pqcheck/_cext.c"],
            # no fused multiply-adds: the same IEEE operations as the Python definitions
            extra_compile_args=["-O3", "-ffp-contract=off", "-fno-math-errno"],
            optional=True,
        )
    ]
)
