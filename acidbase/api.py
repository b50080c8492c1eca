"""The two entry points: ``interpret`` (one panel) and ``interpret_many`` (columns).

Both run the same code: ``interpret`` is ``interpret_many`` of a batch of one.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

import numpy as np

from . import engine, rules
from .model import Panel, screen
from .reference import Settings
from .results import Interpretation, Results


def interpret_many(
    columns: Mapping[str, Any],
    units: Mapping[str, str] | None = None,
    settings: Settings | None = None,
) -> Results:
    """Check and interpret many panels at once.

    ``columns`` maps field names (see ``acidbase.fields``) to equal-length arrays;
    numeric fields are floats with NaN for "not measured", ``sample_type`` and
    ``hco3_source`` are strings (or their integer codes).  ``units`` maps field
    names to UCUM unit labels (default: each field's canonical unit).  Rows that
    fail the input checks are kept, marked refused with their reasons; nothing
    is dropped or reordered.
    """
    settings = settings or Settings()
    screened = screen(columns, units)
    frame = engine.compute(screened, settings)
    frame["large_gap"] = np.float64(settings.large_anion_gap)
    frame["ref_albumin"] = np.float64(settings.reference_albumin_g_l)
    frame["sig_high"] = np.float64(settings.strong_ion_gap_high)
    frame["osm_gap_high"] = np.float64(settings.osmolal_gap_high)
    fired = rules.evaluate(frame)
    return Results(screened, frame, fired, settings)


def interpret(panel: Panel, settings: Settings | None = None) -> Interpretation:
    """Check and interpret one validated panel."""
    columns, units = panel.columns()
    return interpret_many(columns, units, settings).interpretation(0)
