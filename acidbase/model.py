"""The input boundary: a validated panel, and the same checks over columns.

Ranges and units come from ``acidbase.fields`` (declared once).  Two gates share
one check:

* ``Panel`` (pydantic v2) for one panel: every problem is collected into one
  ``pydantic.ValidationError``, each located at its field; a cross-field problem
  has an empty location and belongs to the panel as a whole.
* ``screen`` for columns of many panels (the batch path): the same range check
  over numpy arrays, returning the refused rows and their reasons instead of
  raising, so a file never loses a row.

A value outside its accepted range is refused, never converted.  When the same
number would be ordinary in another unit of the field, the message says so.
"""

from __future__ import annotations

import functools
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any, Literal

import numpy as np
from pydantic import (
    BaseModel,
    ConfigDict,
    Field,
    ValidationError,
    ValidationInfo,
    create_model,
    field_validator,
    model_validator,
)
from pydantic_core import PydanticCustomError

from . import units as _units
from .errors import Problem, UnitError
from .fields import (
    BY_NAME,
    HCO3_SOURCES,
    NUMERIC,
    PREGNANCY_STATES,
    REQUIRED,
    SAMPLE_TYPES,
    TEXT_FIELDS,
    FieldSpec,
)

# ---------------------------------------------------------------------------
# The one range check, over arrays


def _hint(spec: FieldSpec, values: np.ndarray, unit: str) -> np.ndarray:
    """For each value, the other unit in which it would be accepted (or "")."""
    hints = np.full(values.shape, "", dtype=object)
    lo, hi = spec.accepted
    given = _units.normalise(unit)
    for other, f in _units.FACTORS[spec.kind].items():
        if other == given:
            continue
        with np.errstate(over="ignore", invalid="ignore"):
            fits = (values * f >= lo) & (values * f <= hi) & (hints == "")
        hints[fits] = (
            f"{spec.title} would be ordinary at this value in {other}: if that is the unit, "
            f"state it ({spec.name} unit {other}), the value was not converted"
        )
    return hints


def range_problems(spec: FieldSpec, raw: np.ndarray, unit: str) -> tuple[np.ndarray, np.ndarray]:
    """Check values of one field given in ``unit``.

    Returns ``(canonical, bad)``: the values in the canonical unit (always a new
    array, never the caller's), and a mask of refused values (not finite, or
    outside the accepted range).  NaN is "not measured" and is not refused here.
    """
    f = _units.factor(spec.name, spec.kind, unit)
    lo, hi = spec.accepted
    with np.errstate(over="ignore", invalid="ignore"):
        canonical = raw * f
        bad = (canonical < lo) | (canonical > hi)  # +/-inf fall outside too
    return canonical, bad


def describe_value(spec: FieldSpec, value: float, unit: str) -> Problem:
    """The Problem for one refused value (message built in one place)."""
    code = _units.normalise(unit)
    f = _units.factor(spec.name, spec.kind, unit)
    if not np.isfinite(value):
        return Problem(spec.name, spec.title, value, code, kind="not_a_number")
    lo, hi = spec.accepted
    hint = str(_hint(spec, np.array([value]), unit)[0])
    return Problem(spec.name, spec.title, float(value), code, (lo / f, hi / f), hint)


@dataclass
class Screened:
    """Columns after the boundary: canonical units, refused rows marked."""

    n: int
    values: dict[str, np.ndarray]
    """Numeric fields in canonical units; NaN where not measured or refused."""
    sample_type: np.ndarray
    """int8 codes: index into ``SAMPLE_TYPES``."""
    hco3_source: np.ndarray
    """int8 codes: index into ``HCO3_SOURCES``."""
    refused: np.ndarray
    """Boolean mask of refused rows."""
    problems: dict[int, list[Problem]]
    """Refused row index -> its problems."""
    present: frozenset[str] = frozenset()
    """Numeric fields with at least one measured value; the kernel skips the rest."""
    pregnancy: np.ndarray | None = None
    """int8 codes: index into ``PREGNANCY_STATES`` (None: not given for any row)."""

    @functools.cached_property
    def reasons(self) -> np.ndarray:
        """Object array: "" for accepted rows, the problems joined by "; " otherwise
        (built when first asked for: the kernel itself never needs it)."""
        out = np.full(self.n, "", dtype=object)
        for i, plist in self.problems.items():
            out[i] = "; ".join(str(p) for p in plist)
        return out


def _as_float(name: str, raw: Any, n: int) -> tuple[np.ndarray, np.ndarray]:
    """A float64 column and a mask of cells that are not numbers at all."""
    if raw is None:
        return np.full(n, np.nan), np.zeros(n, dtype=bool)
    arr = np.asarray(raw)
    if arr.ndim == 0:
        arr = np.full(n, arr.item())
    if arr.dtype.kind in "fiu":
        return arr.astype(np.float64, copy=False), np.zeros(n, dtype=bool)
    if arr.dtype.kind == "b":
        return np.full(n, np.nan), np.ones(n, dtype=bool)
    out = np.full(n, np.nan)
    bad = np.zeros(n, dtype=bool)
    for i, cell in enumerate(arr.tolist()):
        if cell is None or (isinstance(cell, str) and cell.strip() == ""):
            continue
        if isinstance(cell, bool):
            bad[i] = True
            continue
        try:
            out[i] = float(cell)
        except (TypeError, ValueError):
            bad[i] = True
            continue
        if isinstance(cell, str) and not np.isfinite(out[i]):  # "nan", "inf": not a value
            out[i] = np.nan
            bad[i] = True
    return out, bad


def choice_codes(raw: Any, n: int, allowed: tuple[str, ...], default: str) -> tuple[np.ndarray, np.ndarray]:
    """Codes (int8 index into ``allowed``) for a text column, and a mask of bad cells.

    Accepts strings (any case, surrounding spaces) or integer codes already
    encoded.  Empty cells take the default.  A uniform column costs one
    comparison; a mixed one, one comparison per allowed spelling, and a dictionary
    look-up for each cell that is not spelled exactly as allowed.
    """
    default_code = allowed.index(default)
    if raw is None:
        return np.full(n, default_code, dtype=np.int8), np.zeros(n, dtype=bool)
    arr = np.asarray(raw)
    if arr.ndim == 0:
        arr = np.full(n, arr.item(), dtype=object)
    if arr.dtype.kind in "iu":
        bad = (arr < 0) | (arr >= len(allowed))
        return np.where(bad, default_code, arr).astype(np.int8), bad
    first = arr.reshape(-1)[0] if n else None
    if n and isinstance(first, str) and bool((arr == first).all()):
        code, bad = choice_code(first, allowed, default_code)
        return np.full(n, code, dtype=np.int8), np.full(n, bad)
    flat = arr.reshape(-1)
    if flat.dtype.kind in "OU" and n:
        # The vocabulary is tiny: one vectorised comparison per canonical spelling
        # settles the usual cells; only the others are looked up one by one.
        # Each pass compares only the cells still unsettled, so a column that is
        # mostly one word costs little more than one pass.
        codes = np.full(n, default_code, dtype=np.int8)
        rest = np.arange(n)
        cells = flat
        for code, word in enumerate(allowed):
            hit = cells == word
            if hit.any():
                codes[rest[hit]] = code
                rest = rest[~hit]
                if rest.size == 0:
                    return codes, np.zeros(n, dtype=bool)
                cells = flat[rest]
        sub, sub_bad = _choice_lookup(cells, allowed, default_code)
        codes[rest] = sub
        bad = np.zeros(n, dtype=bool)
        bad[rest] = sub_bad
        return codes, bad
    return _choice_lookup(flat, allowed, default_code)


def _choice_lookup(flat: np.ndarray, allowed: tuple[str, ...],
                   default_code: int) -> tuple[np.ndarray, np.ndarray]:
    """Codes and bad cells, one dictionary look-up per cell."""
    table = _CHOICE_CACHE.setdefault(allowed, {})
    if len(table) > 10_000:  # bounded: a column of free text cannot grow it for ever
        table.clear()
    cells = flat.tolist()
    try:
        for cell in set(cells) - table.keys():
            table[cell] = choice_code(cell, allowed, default_code)
        pairs = [table[c] for c in cells]
    except TypeError:  # unhashable cells (lists and the like): no cache
        pairs = [choice_code(c, allowed, default_code) for c in cells]
    codes = np.fromiter((p[0] for p in pairs), dtype=np.int8, count=len(pairs))
    bad = np.fromiter((p[1] for p in pairs), dtype=bool, count=len(pairs))
    return codes, bad


#: Cell -> (code, refused) per vocabulary.
_CHOICE_CACHE: dict[tuple[str, ...], dict[object, tuple[int, bool]]] = {}


def choice_code(cell: object, allowed: tuple[str, ...], default_code: int) -> tuple[int, bool]:
    """(code, refused) of one choice cell: case and surrounding spaces ignored;
    empty, "none" and "nan" take the default; any other word is refused."""
    if cell is None or (isinstance(cell, float) and np.isnan(cell)):
        return default_code, False
    text = str(cell).strip().lower()
    if text in ("", "none", "nan"):
        return default_code, False
    if text in allowed:
        return allowed.index(text), False
    return default_code, True


def column_length(columns: Mapping[str, Any]) -> int:
    for value in columns.values():
        arr = np.asarray(value, dtype=object) if not isinstance(value, np.ndarray) else value
        if arr.ndim:
            return int(arr.shape[0])
    return 1


def screen(columns: Mapping[str, Any], units: Mapping[str, str] | None = None) -> Screened:
    """Apply the boundary checks to columns of panels.

    ``columns`` maps field names to arrays (floats, NaN or None for not measured;
    strings for ``sample_type`` and ``hco3_source``).  ``units`` maps field names
    to unit labels; a field not named is in its canonical unit.  An unknown unit
    raises ``UnitError`` (it concerns the whole column, not a row).
    """
    units = dict(units or {})
    unknown = set(units) - set(BY_NAME)
    if unknown:
        raise UnitError(field=", ".join(sorted(unknown)), unit="(any)", accepted=tuple(BY_NAME))
    n = column_length(columns)
    refused = np.zeros(n, dtype=bool)
    problems: dict[int, list[Problem]] = {}

    def add(rows: np.ndarray, make) -> None:
        for i in np.flatnonzero(rows).tolist():
            problems.setdefault(i, []).append(make(i))

    values: dict[str, np.ndarray] = {}
    present: set[str] = set()
    absent = np.full(n, np.nan)  # shared by every missing column: never written to
    for spec in NUMERIC:
        unit = units.get(spec.name, spec.unit)
        _units.factor(spec.name, spec.kind, unit)  # an unknown unit fails the whole column
        if columns.get(spec.name) is None and not spec.required:
            values[spec.name] = absent
            continue
        raw, not_number = _as_float(spec.name, columns.get(spec.name), n)
        canonical, bad = range_problems(spec, raw, unit)
        code = _units.normalise(unit)
        add(not_number, lambda i, s=spec, c=code, r=columns.get(spec.name): Problem(
            s.name, s.title, np.asarray(r, dtype=object).reshape(-1)[i] if np.ndim(r) else r,
            c, kind="not_a_number"))
        add(bad, lambda i, s=spec, r=raw, u=unit: describe_value(s, float(r[i]), u))
        if spec.required:
            missing = np.isnan(raw) & ~not_number
            add(missing, lambda i, s=spec, c=code: Problem(s.name, s.title, None, c, kind="missing"))
            bad = bad | missing
        refused |= bad | not_number
        values[spec.name] = canonical
        if spec.required or not np.isnan(canonical).all():
            present.add(spec.name)
        else:
            values[spec.name] = absent

    both = ~np.isnan(values["urea"]) & ~np.isnan(values["bun"])
    add(both, lambda i: Problem("urea", "Urea", "urea and bun", "", kind=(
        "give urea or urea nitrogen (bun), not both")))
    refused |= both

    sample_type, bad_st = choice_codes(columns.get("sample_type"), n, SAMPLE_TYPES, "unknown")
    add(bad_st, lambda i: Problem("sample_type", "Sample type",
        np.asarray(columns["sample_type"], dtype=object).reshape(-1)[i], "",
        kind=f"not one of {', '.join(SAMPLE_TYPES)}"))
    hco3_source, bad_src = choice_codes(columns.get("hco3_source"), n, HCO3_SOURCES, "unknown")
    add(bad_src, lambda i: Problem("hco3_source", "HCO3- source",
        np.asarray(columns["hco3_source"], dtype=object).reshape(-1)[i], "",
        kind=f"not one of {', '.join(HCO3_SOURCES)}"))
    refused |= bad_st | bad_src
    pregnancy, bad_preg = choice_codes(columns.get("pregnancy"), n, PREGNANCY_STATES, "unknown")
    add(bad_preg, lambda i: Problem("pregnancy", "Pregnancy",
        np.asarray(columns["pregnancy"], dtype=object).reshape(-1)[i], "",
        kind=f"not one of {', '.join(PREGNANCY_STATES)}"))
    refused |= bad_preg

    if refused.any():
        rows = np.flatnonzero(refused)
        for name in present:
            values[name][rows] = np.nan  # each is range_problems' own new array
    return Screened(n, values, sample_type, hco3_source, refused, problems, frozenset(present),
                    pregnancy)


# ---------------------------------------------------------------------------
# The single-panel model (pydantic v2)


class _PanelBase(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True)

    @model_validator(mode="after")
    def _urea_or_bun(self) -> _PanelBase:
        if getattr(self, "urea") is not None and getattr(self, "bun") is not None:
            raise PydanticCustomError(
                "urea_and_bun", "give urea or urea nitrogen (bun), not both"
            )
        return self

    def columns(self) -> tuple[dict[str, np.ndarray], dict[str, str]]:
        """This panel as columns of length one, with its units (a batch of one)."""
        cols: dict[str, Any] = {}
        for spec in NUMERIC:
            v = getattr(self, spec.name)
            cols[spec.name] = np.array([np.nan if v is None else v], dtype=np.float64)
        cols["sample_type"] = np.array([self.sample_type], dtype=object)
        cols["hco3_source"] = np.array([self.hco3_source], dtype=object)
        cols["pregnancy"] = np.array([self.pregnancy], dtype=object)
        unit_map = {s.name: getattr(self, f"{s.name}_unit") for s in NUMERIC}
        return cols, unit_map

    def canonical(self) -> dict[str, float | None]:
        """Numeric fields in canonical units (None where not measured)."""
        out: dict[str, float | None] = {}
        for spec in NUMERIC:
            v = getattr(self, spec.name)
            if v is None:
                out[spec.name] = None
            else:
                out[spec.name] = v * _units.factor(spec.name, spec.kind, getattr(self, f"{spec.name}_unit"))
        return out


def _unit_validator(spec: FieldSpec):
    def check(cls, value: str) -> str:
        code = _units.normalise(value)
        if code not in spec.units:
            raise PydanticCustomError(
                "unit_not_accepted",
                "unit '{unit}' is not accepted for {title}; use one of {accepted}",
                {"unit": value, "title": spec.title, "accepted": ", ".join(spec.units)},
            )
        return code
    return field_validator(f"{spec.name}_unit")(check)


def _value_validator(spec: FieldSpec):
    def check(cls, value: float | None, info: ValidationInfo) -> float | None:
        if value is None:
            return None
        unit = info.data.get(f"{spec.name}_unit")
        if unit is None:  # the unit itself was refused; that error says enough
            return value
        raw = np.array([value], dtype=np.float64)
        _, bad = range_problems(spec, raw, unit)
        if bad[0]:
            p = describe_value(spec, value, unit)
            raise PydanticCustomError(
                "outside_accepted_range", str(p),
                {"field": spec.name, "value": value, "unit": p.unit,
                 "low": p.allowed[0] if p.allowed else None,
                 "high": p.allowed[1] if p.allowed else None, "hint": p.hint},
            )
        return value
    return field_validator(spec.name)(check)


def _build_panel() -> type[_PanelBase]:
    definitions: dict[str, Any] = {}
    validators: dict[str, Any] = {}
    # Units first: a value's validator reads its unit from the fields already validated.
    for spec in NUMERIC:
        definitions[f"{spec.name}_unit"] = (
            str, Field(default=spec.unit, description=f"Unit of {spec.title}: {', '.join(spec.units)}"))
        validators[f"_check_{spec.name}_unit"] = _unit_validator(spec)
    definitions["sample_type"] = (
        Literal[SAMPLE_TYPES], Field(default="unknown", description="Sample type."))
    definitions["hco3_source"] = (
        Literal[HCO3_SOURCES],
        Field(default="unknown", description=(
            "Where HCO3- comes from: 'analyser' (calculated by the blood-gas analyser "
            "from its pH and pCO2) or 'chemistry' (measured total CO2).")))
    definitions["pregnancy"] = (
        Literal[PREGNANCY_STATES],
        Field(default="unknown", description=(
            "'third_trimester' reads pH, pCO2 and HCO3- against published third-trimester "
            "intervals; 'no' and 'unknown' use the adult intervals.")))
    for name in TEXT_FIELDS:
        definitions[name] = (str | None, Field(default=None, max_length=200))
    for spec in NUMERIC:
        annotation = float if spec.required else float | None
        default = ... if spec.required else None
        definitions[spec.name] = (
            annotation, Field(default=default, title=spec.title, description=spec.help,
                              allow_inf_nan=False, json_schema_extra={
                                  "accepted": spec.accepted, "unit": spec.unit,
                                  "loinc": list(spec.loinc)}))
        validators[f"_check_{spec.name}"] = _value_validator(spec)
    return create_model("Panel", __base__=_PanelBase, __validators__=validators, **definitions)


Panel = _build_panel()
Panel.__doc__ = """One blood-gas and electrolyte panel, validated.

Required: ph, pco2, hco3 (a bare blood gas is read; without Na+ and Cl- the
gap-based readings are not assessable).  Every numeric field has a ``<name>_unit``
(UCUM) defaulting to its canonical unit; see ``acidbase.fields`` for the ranges.
Construct with keywords or ``Panel.model_validate(mapping)``; invalid input
raises ``pydantic.ValidationError`` with every problem.
"""


def describe_fields(error: ValidationError) -> list[tuple[str, str]]:
    """(field, readable line) for each problem of a ValidationError from ``Panel``.

    ``field`` is the field name ("" for a problem of the panel as a whole), so a form
    can put each message beside its field.
    """
    out: list[tuple[str, str]] = []
    for e in error.errors(include_url=False):
        loc = ".".join(str(x) for x in e["loc"])
        spec = BY_NAME.get(loc)
        msg = e["msg"]
        if e["type"] == "outside_accepted_range":
            line = msg
        elif e["type"] == "missing" and spec is not None:
            line = str(Problem(spec.name, spec.title, None, spec.unit, kind="missing"))
        elif spec is not None:
            line = f"{spec.title} ({loc}) {e.get('input')!r}: {msg}"
        else:
            line = f"{loc or 'panel'}: {msg}"
        out.append((loc, line))
    return out


def describe(error: ValidationError) -> list[str]:
    """Readable lines for a ValidationError from ``Panel`` (field first)."""
    return [line for _, line in describe_fields(error)]


__all__ = ["Panel", "Screened", "screen", "describe", "describe_fields", "REQUIRED"]
