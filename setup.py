"""The optional compiled edge (acidbase._csvfast); everything else is in pyproject.toml.

The extension is optional: without a C compiler, or when its build fails, ``pip
install .`` still installs acidbase, which then writes CSV with its Python code
(acidbase/csvtext.py).  Built against the limited API of Python 3.11 (one abi3
binary serves 3.11 and later), without fused multiply-add contraction or fast-math:
its rounding must be the same IEEE arithmetic as numpy's.
"""

import sys

from setuptools import Extension, setup

if sys.platform == "win32":
    flags = ["/O2", "/fp:precise"]
else:
    flags = ["-O2", "-ffp-contract=off", "-fno-fast-math", "-std=c99"]

setup(
    ext_modules=[
        Extension(
            "acidbase._csvfast",
            sources=["acidbase/_csvfast.c"],
            define_macros=[("Py_LIMITED_API", "0x030B0000")],
            py_limited_api=True,
            extra_compile_args=flags,
            optional=True,
        )
    ],
    options={"bdist_wheel": {"py_limited_api": "cp311"}},
)
