"""The optional compiled edges (acidbase._csvfast, acidbase._idhash); everything else is
in pyproject.toml.

The extensions are optional: without a C compiler, or when a build fails, ``pip
install .`` still installs acidbase, which then writes CSV with its Python code
(acidbase/csvtext.py) and hashes the history store's patient ids with hashlib
(acidbase/history.py).  Built against the limited API of Python 3.11 (one abi3
binary serves 3.11 and later), without fused multiply-add contraction or fast-math:
its rounding must be the same IEEE arithmetic as numpy's.
"""

import sys

from setuptools import Extension, setup

if sys.platform == "win32":
    flags = ["/O2", "/fp:precise"]
else:
    flags = ["-O2", "-ffp-contract=off", "-fno-fast-math", "-std=c99"]


def edge(name: str) -> Extension:
    """One optional compiled edge, acidbase/<name>.c, on the limited API of 3.11."""
    return Extension(f"acidbase.{name}", sources=[f"acidbase/{name}.c"],
                     define_macros=[("Py_LIMITED_API", "0x030B0000")], py_limited_api=True,
                     extra_compile_args=flags, optional=True)


setup(
    ext_modules=[edge("_csvfast"), edge("_idhash")],
    options={"bdist_wheel": {"py_limited_api": "cp311"}},
)
