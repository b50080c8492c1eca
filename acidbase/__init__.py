"""acidbase: checks and interprets blood-gas and electrolyte panels.

Public API: ``Panel``, ``interpret``, ``interpret_many``, ``Interpretation``,
``Finding``, ``Results``, ``Settings``, ``CAUTION`` and the errors.
"""

from .api import interpret, interpret_many
from .compensation import plane_bands
from .errors import AcidBaseError, BatchInputError, ColumnError, Problem, UnitError
from .fields import also_ordinary, convert
from .inputs.panel import Panel, describe, describe_fields
from .reference import Settings
from .results import CAUTION, Disorder, Finding, Interpretation, Results

__all__ = [
    "CAUTION", "AcidBaseError", "BatchInputError", "ColumnError", "Disorder", "Finding",
    "Interpretation", "Panel", "Problem", "Results", "Settings", "UnitError", "also_ordinary",
    "convert", "describe", "describe_fields", "interpret", "interpret_many",
    "plane_bands",
]
__version__ = "0.2.0"


def __getattr__(name: str):
    """``check_table`` and ``panel_table`` (the file layer) load on first use."""
    if name in ("check_table", "panel_table"):
        from .files import check

        return getattr(check, name)
    raise AttributeError(f"module 'acidbase' has no attribute {name!r}")
