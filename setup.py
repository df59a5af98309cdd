"""Builds the optional compiled kernels (checker/dsp/kernels.c); everything else is in pyproject.toml.

optional=True: without a C compiler the install still succeeds and the meters use their
numpy code (checker/dsp/native.py says which path is active).
"""

from setuptools import Extension, setup

setup(
    ext_modules=[
        Extension(
            "checker.dsp._kernels",
            sources=["checker/dsp/kernels.c"],
            # No fused multiply-add: the K-weighting recursion matches scipy's sosfilt bit for bit.
            extra_compile_args=["-O3", "-ffp-contract=off", "-fvisibility=hidden"],
            optional=True,
        )
    ]
)
