"""acidbase: checks and interprets blood-gas and electrolyte panels.

Public API: ``Panel``, ``interpret``, ``interpret_many``, ``Interpretation``,
``Finding``, ``Results``, ``Settings``, ``CAUTION`` and the errors.

Each name is imported on first use (``__getattr__`` below), so ``import acidbase``
and the command's start-up load only what they need: ``Panel`` alone brings in
pydantic, ``interpret`` the kernel and numpy, ``check_table`` the file layer.
"""

from __future__ import annotations

import importlib
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:  # the same names, eagerly, for type checkers and editors
    from .api import interpret, interpret_many
    from .compensation import plane_bands
    from .errors import AcidBaseError, BatchInputError, ColumnError, Problem, UnitError
    from .fields import also_ordinary, convert
    from .files.check import check_table as check_table
    from .files.check import panel_table as panel_table
    from .inputs.panel import Panel, describe, describe_fields
    from .reference import Settings
    from .results import CAUTION, Disorder, Finding, Interpretation, Results

#: Public name -> the module that defines it.
_WHERE: dict[str, str] = {
    "interpret": ".api", "interpret_many": ".api",
    "plane_bands": ".compensation",
    "AcidBaseError": ".errors", "BatchInputError": ".errors", "ColumnError": ".errors",
    "Problem": ".errors", "UnitError": ".errors",
    "also_ordinary": ".fields", "convert": ".fields",
    "Panel": ".inputs.panel", "describe": ".inputs.panel", "describe_fields": ".inputs.panel",
    "Settings": ".reference",
    "CAUTION": ".results", "Disorder": ".results", "Finding": ".results",
    "Interpretation": ".results", "Results": ".results",
    # the file layer: importable by name, not listed in __all__ (as before)
    "check_table": ".files.check", "panel_table": ".files.check",
}

__all__ = [
    "CAUTION", "AcidBaseError", "BatchInputError", "ColumnError", "Disorder", "Finding",
    "Interpretation", "Panel", "Problem", "Results", "Settings", "UnitError", "also_ordinary",
    "convert", "describe", "describe_fields", "interpret", "interpret_many",
    "plane_bands",
]
__version__ = "0.2.0"


def __getattr__(name: str) -> Any:
    """A public name, imported from its module on first use and kept here after."""
    where = _WHERE.get(name)
    if where is None:
        raise AttributeError(f"module 'acidbase' has no attribute {name!r}")
    value = getattr(importlib.import_module(where, __name__), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return sorted({*globals(), *_WHERE})
