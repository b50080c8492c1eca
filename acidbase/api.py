"""The two entry points: ``interpret`` (one panel) and ``interpret_many`` (columns).

Both run the same code: ``interpret`` is ``interpret_many`` of a batch of one.
"""

from __future__ import annotations

import os
from collections.abc import Mapping
from concurrent.futures import ThreadPoolExecutor
from typing import Any

import numpy as np

from . import engine, rules
from .fields import BY_NAME, HCO3_SOURCES, PREGNANCY_STATES, SAMPLE_TYPES
from .model import Panel, choice_codes, column_length, screen
from .reference import Settings
from .results import Interpretation, Part, Results
from .units import factor

#: Rows per slice: large enough that Python's per-call overhead and the threads'
#: hand-overs of the interpreter lock (one per numpy call) are small against the
#: work, small enough that the two threads share the slices evenly.  On the 2-core
#: benchmark machine 65,536 beat 32,768 by about a fifth (docs/performance.md).
SLICE_ROWS = 65536
#: Slices run on this many threads: numpy releases the GIL inside each operation.
THREADS = min(2, os.cpu_count() or 1)


def _part(columns: Mapping[str, Any], units: Mapping[str, str] | None, settings: Settings,
          start: int) -> Part:
    screened = screen(columns, units)
    frame = engine.compute(screened, settings)
    return Part(start, screened, frame, rules.evaluate(frame))


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
    n = column_length(columns)
    for name, unit in (units or {}).items():  # a bad unit fails before any work
        if name in BY_NAME:
            factor(name, BY_NAME[name].kind, unit)
    if n <= SLICE_ROWS:
        return Results([_part(columns, units, settings, 0)], settings)
    arrays = {k: (np.asarray(v) if v is not None and np.ndim(v) else v) for k, v in columns.items()}
    # Text choices are encoded once for the whole column, here: per slice, on the
    # threads, their Python-level look-ups would hold the GIL.  A column with bad cells
    # is left as text, so each slice can name the cell in its refusal.
    for name, allowed in (("sample_type", SAMPLE_TYPES), ("hco3_source", HCO3_SOURCES),
                          ("pregnancy", PREGNANCY_STATES)):
        col = arrays.get(name)
        if isinstance(col, np.ndarray) and col.dtype.kind in "OUS":
            codes, bad = choice_codes(col, n, allowed, "unknown")
            if not bad.any():
                arrays[name] = codes
    starts = range(0, n, SLICE_ROWS)

    def run(start: int) -> Part:
        stop = start + SLICE_ROWS
        cols = {k: (v[start:stop] if isinstance(v, np.ndarray) else v) for k, v in arrays.items()}
        return _part(cols, units, settings, start)

    if THREADS > 1:
        with ThreadPoolExecutor(THREADS) as pool:
            parts = list(pool.map(run, starts))
    else:
        parts = [run(s) for s in starts]
    return Results(parts, settings)


def interpret(panel: Panel, settings: Settings | None = None) -> Interpretation:
    """Check and interpret one validated panel."""
    columns, units = panel.columns()
    return interpret_many(columns, units, settings).interpretation(0)
