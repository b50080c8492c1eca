"""pyarrow, loaded on its first use.

The modules that read and write files (the cell reader's column path, the serial checks)
name ``pa``, ``pc`` and ``ipc`` as usual, but through the stand-ins below, which import
the real module when an attribute is first asked for.  So a single panel (``acidbase
check``, ``Panel``, ``interpret``), which never touches a column of Arrow, starts without
importing pyarrow (about 100 ms; docs/performance.md, "Start-up").

``is_arrow`` asks ``sys.modules`` instead of importing: no value can be an Arrow object
before pyarrow has been imported by someone.  ``tests/test_startup.py`` holds the
single-panel path to this.
"""

from __future__ import annotations

import importlib
import sys
from typing import Any


class _Module:
    """Stands in for a module until an attribute is asked for, then imports it."""

    def __init__(self, name: str) -> None:
        self._name = name
        self._module = None

    def __getattr__(self, attr: str) -> Any:
        # Called only for a name not yet looked up: each is kept on the stand-in, so
        # the next lookup is a plain attribute (the batch asks for pyarrow's functions
        # tens of thousands of times a run).
        module = self._module
        if module is None:
            module = self._module = importlib.import_module(self._name)
        value = getattr(module, attr)
        self.__dict__[attr] = value
        return value

    def __repr__(self) -> str:
        return f"<{self._name}, imported on first use>"


pa: Any = _Module("pyarrow")
pc: Any = _Module("pyarrow.compute")
ipc: Any = _Module("pyarrow.ipc")
pq: Any = _Module("pyarrow.parquet")  # about 60 ms, needed only for Parquet files


def is_arrow(x: object, kinds: tuple[str, ...] = ("Array", "ChunkedArray")) -> bool:
    """True when ``x`` is one of pyarrow's ``kinds`` (by default an Array or a
    ChunkedArray), without importing pyarrow."""
    module = sys.modules.get("pyarrow")
    return module is not None and isinstance(x, tuple(getattr(module, k) for k in kinds))
