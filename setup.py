"""The package's one compiled module; everything else is declared in pyproject.toml.

``service/sampling/_hypergeometric_tails.c`` holds the scalar hypergeometric tails of
``service/sampling/hypergeometric.py``: the same operations as the Python code in the same
order, so ``-ffp-contract=off`` keeps the compiler from fusing a multiply and an add that
Python rounds separately. The module is optional: where no C compiler is found the install
goes on, and the Python code computes the same bits, more slowly.
"""

from setuptools import Extension, setup

setup(
    ext_modules=[
        Extension(
            "service.sampling._hypergeometric_tails",
            sources=["service/sampling/_hypergeometric_tails.c"],
            extra_compile_args=["-O2", "-ffp-contract=off", "-fno-fast-math"],
            optional=True,
        )
    ]
)
