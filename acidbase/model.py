"""The panel model and the column screen now live in ``acidbase.inputs.panel`` (where a
value comes in); this module keeps their old import path."""

from typing import TYPE_CHECKING, Any

from .inputs.panel import (PROBLEM_KINDS, REQUIRED, Screened, _build_panel,  # noqa: F401
                           _length, cell_text, censored_problem, choice_codes, column_length,
                           describe, describe_fields, describe_value, range_problems, screen)

if TYPE_CHECKING:
    from .inputs.panel import Panel


def __getattr__(name: str) -> Any:
    """``Panel`` as ``acidbase.inputs.panel`` builds it: on first use (pydantic then)."""
    if name == "Panel":
        from .inputs import panel

        return panel.Panel
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


__all__ = ["Panel", "Screened", "screen", "describe", "describe_fields", "REQUIRED"]
