"""The panel model and the column screen now live in ``acidbase.inputs.panel`` (where a
value comes in); this module keeps their old import path."""

from .inputs.panel import (PROBLEM_KINDS, REQUIRED, Panel, Screened, _build_panel,  # noqa: F401
                           _length, cell_text, censored_problem, choice_codes, column_length,
                           describe, describe_fields, describe_value, range_problems, screen)

__all__ = ["Panel", "Screened", "screen", "describe", "describe_fields", "REQUIRED"]
