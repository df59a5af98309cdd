"""Builds the optional compiled kernels (checker/dsp/kernels.c); everything else is in pyproject.toml.

optional=True: without a C compiler the install still succeeds and the meters use their
numpy code (checker/dsp/native.py says which path is active).
"""

import re
from pathlib import Path

from setuptools import Extension, setup


def abi_version() -> str:
    """The kernels' ABI number, written once: ABI_VERSION in checker/dsp/native.py."""
    text = (Path(__file__).parent / "checker" / "dsp" / "native.py").read_text(encoding="utf-8")
    found = re.search(r"^ABI_VERSION = (\d+)$", text, re.MULTILINE)
    if found is None:
        raise SystemExit("setup.py: ABI_VERSION = <int> not found in checker/dsp/native.py")
    return found.group(1)


setup(
    ext_modules=[
        Extension(
            "checker.dsp._kernels",
            sources=["checker/dsp/kernels.c"],
            define_macros=[("DC_ABI_VERSION", abi_version())],
            # No fused multiply-add: the K-weighting recursion matches scipy's sosfilt bit for bit.
            extra_compile_args=["-O3", "-ffp-contract=off", "-fvisibility=hidden"],
            optional=True,
        )
    ]
)
