"""The two entry points: ``interpret`` (one panel) and ``interpret_many`` (columns).

Both run the same code: ``interpret`` is ``interpret_many`` of a batch of one.
"""

from __future__ import annotations

import dataclasses
import os
from collections.abc import Mapping, Sequence
from typing import TYPE_CHECKING, Any

import numpy as np

from . import engine, rules
from ._arrow import is_arrow
from .errors import ColumnError, Problem
from .fields import BY_NAME, TEXT_FIELDS, suggest
from .inputs.cells import _objects, is_column, read_choices
from .inputs.vocab import CHOICES
from .inputs.panel import _length, screen
from .reference import Settings
from .results import Interpretation, Part, Results
from .units import factor

if TYPE_CHECKING:
    from .inputs.panel import Panel

#: Rows per slice: large enough that Python's per-call overhead and the threads'
#: hand-overs of the interpreter lock (one per numpy call) are small against the
#: work, small enough that the two threads share the slices evenly.  On the 2-core
#: benchmark machine 65,536 beat 32,768 by about a fifth (docs/performance.md).
SLICE_ROWS = 65536
#: Slices run on this many threads: numpy releases the GIL inside each operation.
THREADS = min(2, os.cpu_count() or 1)


def _part(columns: Mapping[str, Any], units: Mapping[str, str] | None, settings: Settings,
          start: int, decimal: str, missing: Sequence[str],
          row_problems: Mapping[int, Sequence[Problem]] | None = None) -> Part:
    screened = screen(columns, units, decimal=decimal, missing=missing,
                      row_problems=row_problems)
    frame = engine.compute(screened, settings)
    return Part(start, screened, frame, rules.evaluate(frame))


#: Column names ``interpret_many`` reads; any other name is refused.
KNOWN_COLUMNS: tuple[str, ...] = (*BY_NAME, *(c.name for c in CHOICES))
#: Columns carried beside a panel that the kernel does not read (accepted, ignored).
CARRIED_COLUMNS: tuple[str, ...] = TEXT_FIELDS


def as_columns(data: Any) -> dict[str, Any]:
    """A mapping of columns from a mapping, a pandas or polars DataFrame, or an Arrow
    table or record batch (Arrow columns stay Arrow: the reader takes them as they are).
    """
    if is_arrow(data, ("Table", "RecordBatch")):
        return {name: data.column(i) for i, name in enumerate(data.schema.names)}
    if isinstance(data, Mapping):
        return dict(data)
    module = type(data).__module__.split(".")[0]
    if module == "polars" and hasattr(data, "to_arrow"):
        return as_columns(data.to_arrow())
    if module == "pandas" and hasattr(data, "columns"):
        return {str(k): data[k].to_numpy(dtype=object) if str(data[k].dtype) in (
            "category", "string") else data[k].to_numpy() for k in data.columns}
    raise ColumnError(f"columns must be a mapping of name -> column, a pandas or polars "
                      f"DataFrame, or an Arrow table; got {type(data).__name__}")


def check_columns(columns: Mapping[str, Any]) -> int:
    """The common length of the columns; refuses unknown names and unequal lengths."""
    names = [str(k) for k in columns]
    unknown = [k for k in names if k not in KNOWN_COLUMNS and k not in CARRIED_COLUMNS]
    if unknown:
        hints = tuple(h if (h := suggest(k)) in KNOWN_COLUMNS else None for k in unknown)
        said = ", ".join(repr(k) + (f" (use {h!r})" if h else "") for k, h in zip(unknown, hints))
        raise ColumnError(
            f"column(s) {said} not known; the columns read are "
            f"{', '.join(KNOWN_COLUMNS)} (carried, not read: {', '.join(CARRIED_COLUMNS)})",
            tuple(unknown), KNOWN_COLUMNS, hints)
    lengths = {k: n for k, v in columns.items() if (n := _length(v)) is not None}
    if len(set(lengths.values())) > 1:
        shown = ", ".join(f"{k} {n}" for k, n in lengths.items())
        raise ColumnError(f"columns have unequal lengths ({shown}); give one value per panel "
                          "in every column", tuple(lengths))
    return next(iter(lengths.values()), 1)


def check_units(units: Mapping[str, str] | None) -> None:
    """A bad unit (or a unit for a field that has none) fails before any work."""
    if units is None:
        return
    if not isinstance(units, Mapping):
        raise ColumnError(f"units must be a mapping of field -> unit; got {type(units).__name__}")
    for name, unit in units.items():
        if name not in BY_NAME:
            raise ColumnError(f"units: {str(name)!r} is not a numeric field; the fields that "
                              f"take a unit are {', '.join(BY_NAME)}", names=(str(name),),
                              known=tuple(BY_NAME))
        factor(name, BY_NAME[name].kind, unit)


def interpret_many(
    columns: Any,
    units: Mapping[str, str] | None = None,
    settings: Settings | None = None,
    *,
    decimal: str = ".",
    missing: Sequence[str] = (),
    row_problems: Mapping[int, Sequence[Problem]] | None = None,
) -> Results:
    """Check and interpret many panels at once.

    ``columns``: a mapping of field name -> column, a pandas or polars DataFrame, or
    an Arrow table or record batch.  Columns may hold numbers, text as laboratories
    write it ("7.21 L", "<0.3"), None or NaN for "not measured"; every cell is read
    by the one cell reader (``acidbase.inputs.cells``; docs/input.md), each row
    alone.  ``sample_type`` and ``hco3_source`` hold words (or, as a numpy integer
    array, their codes).  ``units`` maps field names to UCUM unit labels (default:
    each field's canonical unit).  ``decimal`` is "." or ","; ``missing`` lists cell
    texts that mean "not measured".  ``row_problems`` (row -> Problems found before
    the cells, such as a file's specimen conflicts) refuses those rows too.

    Rows that fail the input checks are kept, marked refused with their problems;
    nothing is dropped or reordered.  Raises only ``ColumnError`` (unknown column,
    unequal lengths, not columns at all) and ``UnitError`` (a unit the field does
    not accept), both ``ValueError`` and ``AcidBaseError``; and ``TypeError`` when
    ``settings`` is not a ``Settings``.
    """
    if settings is None:
        settings = Settings()
    elif not isinstance(settings, Settings):
        raise TypeError(f"settings must be an acidbase.Settings (or None for the defaults), "
                        f"not {type(settings).__name__}")
    if decimal not in (".", ","):
        raise ColumnError(f"decimal must be '.' or ','; got {decimal!r}")
    if isinstance(missing, str) or not all(isinstance(m, str) for m in missing):
        raise ColumnError("missing must be a list of cell texts")
    columns = as_columns(columns)
    n = check_columns(columns)
    check_units(units)
    columns = {k: v for k, v in columns.items() if k in KNOWN_COLUMNS}
    if n <= SLICE_ROWS:
        return Results([_part(columns, units, settings, 0, decimal, missing, row_problems)],
                       settings)
    arrays = {k: _sliceable(v, n) for k, v in columns.items()}
    # Choice columns are encoded once for the whole column, here: per slice, on the
    # threads, their Python-level look-ups would hold the GIL.  A column with refused
    # cells is left as it is, so each slice can name the cell in its refusal.
    for choice in CHOICES:
        col = arrays.get(choice.name)
        if col is not None and not (isinstance(col, np.ndarray) and col.dtype.kind in "iu"):
            read = read_choices(col, choice, missing, n=n)
            if not read.bad.any():
                arrays[choice.name] = read.codes
    starts = range(0, n, SLICE_ROWS)

    def run(start: int) -> Part:
        stop = start + SLICE_ROWS
        cols = {k: (v[start:stop] if is_column(v) else v) for k, v in arrays.items()}
        mine = {i - start: p for i, p in (row_problems or {}).items() if start <= i < stop}
        return _part(cols, units, settings, start, decimal, missing, mine)

    if THREADS > 1:
        from concurrent.futures import ThreadPoolExecutor  # only columns this long need it

        with ThreadPoolExecutor(THREADS) as pool:
            parts = list(pool.map(run, starts))
    else:
        parts = [run(s) for s in starts]
    return Results(parts, settings)


def _sliceable(value: Any, n: int) -> Any:
    """A column that slices by rows (Arrow and numpy as they are; lists as object arrays)."""
    if not is_column(value) or is_arrow(value) or isinstance(value, np.ndarray):
        return value
    return _objects(value)


def interpret(panel: Panel, settings: Settings | None = None) -> Interpretation:
    """Check and interpret one validated panel."""
    if not callable(getattr(panel, "columns", None)):  # Panel itself is imported lazily
        raise TypeError(
            f"interpret takes an acidbase.Panel, not {type(panel).__name__}: build one with "
            "Panel(ph=..., ...) or Panel.model_validate(mapping); for columns of panels use "
            "interpret_many")
    columns, units = panel.columns()
    it = interpret_many(columns, units, settings).interpretation(0)
    # The panel was read from its cells already: its marks are the panel's own.
    return dataclasses.replace(it, qualifiers=panel.qualifiers, lab_flags=panel.lab_flags)
