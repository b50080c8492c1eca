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
import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from dataclasses import field as dataclass_field
import threading
from typing import TYPE_CHECKING, Any, Literal

import numpy as np

from .. import units as _units
from .._arrow import is_arrow
from ..errors import Problem, UnitError
from ..fields import BY_NAME, NUMERIC, REQUIRED, TEXT_FIELDS, FieldSpec, suggest
from .cells import (ParsedColumn, is_column, number_hint, read_choice, read_choices, read_number,
                    read_numbers_many)
from .vocab import CHOICES, Choice

if TYPE_CHECKING:  # pydantic is imported when ``Panel`` is first used (module __getattr__)
    from pydantic import BaseModel, ValidationError, ValidationInfo

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
    for other, (name, to_canonical) in _units.NOT_TAKEN.get(spec.kind, {}).items():
        if other == given:
            continue
        with np.errstate(over="ignore", invalid="ignore"):
            there = to_canonical(values)
            fits = (there >= lo) & (there <= hi) & (hints == "")
        hints[fits] = (
            f"{spec.title} would be ordinary at this value in {other} ({name}), which "
            f"acidbase does not take: give it in {spec.unit}; the value was not converted"
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
    return describe_values(spec, np.array([value], dtype=np.float64), unit)[0]


def describe_values(spec: FieldSpec, values: np.ndarray, unit: str) -> list[Problem]:
    """The Problem for each refused value of ``values`` (float64): the unit, the range
    and the hints worked out once for them all."""
    code = _units.normalise(unit)
    f = _units.factor(spec.name, spec.kind, unit)
    lo, hi = spec.accepted
    allowed = (lo / f, hi / f)
    hints = _hint(spec, values, unit).tolist()
    return [Problem(spec.name, spec.title, v, code, allowed, str(h)) if math.isfinite(v)
            else Problem(spec.name, spec.title, v, code, kind="not_a_number")
            for v, h in zip(values.tolist(), hints)]


@dataclass
class Screened:
    """Columns after the boundary: canonical units, refused rows marked."""

    n: int
    values: dict[str, np.ndarray]
    """Numeric fields in canonical units; NaN where not measured or refused."""
    choices: dict[str, np.ndarray]
    """Choice fields (``acidbase.inputs.vocab.CHOICES``) as int8 codes into their words."""
    refused: np.ndarray
    """Boolean mask of refused rows."""
    problems: dict[int, list[Problem]]
    """Refused row index -> its problems (structured; printed only by a surface)."""
    present: frozenset[str] = frozenset()
    """Numeric fields with at least one measured value; the kernel skips the rest."""
    readings: dict[str, ParsedColumn] = dataclass_field(default_factory=dict)
    """Numeric fields read from text: their comparators and laboratory flags."""
    plain: frozenset[str] = frozenset()
    """Fields whose every cell is empty, a bare number or an allowed word, as written
    (a writer may skip formula escaping for them)."""

    @property
    def sample_type(self) -> np.ndarray:
        """int8 codes: index into ``SAMPLE_TYPES``."""
        return self.choices["sample_type"]

    @property
    def hco3_source(self) -> np.ndarray:
        """int8 codes: index into ``HCO3_SOURCES``."""
        return self.choices["hco3_source"]

    @property
    def pregnancy(self) -> np.ndarray:
        """int8 codes: index into ``PREGNANCY_STATES``."""
        return self.choices["pregnancy"]

    @functools.cached_property
    def reasons(self) -> np.ndarray:
        """Object array: "" for accepted rows, the problems joined by "; " otherwise
        (text for a file's reason column; built when first asked for)."""
        out = np.full(self.n, "", dtype=object)
        for i, plist in self.problems.items():
            out[i] = "; ".join(str(p) for p in plist)
        return out

    def qualifiers(self) -> list[tuple[str, ...]]:
        """Per row: the censored values read ("lactate <0.3")."""
        return self._marks(lambda p: p.comparator, with_text=True)

    def lab_flags(self) -> list[tuple[str, ...]]:
        """Per row: the laboratory flags read off values ("ph L")."""
        return self._marks(lambda p: p.flag, with_text=False)

    def _marks(self, part, with_text: bool) -> list[tuple[str, ...]]:
        out: list[tuple[str, ...]] = [()] * self.n
        for i, marks in self.marked_rows(with_text).items():
            out[i] = marks
        return out

    def marked_rows(self, with_text: bool) -> dict[int, tuple[str, ...]]:
        """Only the rows with marks: row -> its censored values (``with_text``, as
        "lactate <0.3") or its laboratory flags ("ph L"), in field order."""
        out: dict[int, tuple[str, ...]] = {}
        for name, p in self.readings.items():
            for i, mark in p.marks("comparator" if with_text else "flag"):
                out[i] = (*out.get(i, ()), f"{name} {mark.strip()}")
        return out


def choice_codes(raw: Any, n: int, allowed: tuple[str, ...], default: str
                 ) -> tuple[np.ndarray, np.ndarray]:
    """Codes and bad cells of a choice column (``read_choices`` by its words)."""
    choice = next(c for c in CHOICES if c.words == tuple(allowed))
    out = read_choices(raw, choice, n=n)
    return out.codes, out.bad


def column_length(columns: Mapping[str, Any]) -> int:
    """The common length of the columns (1 when every value is a single cell)."""
    for value in columns.values():
        n = _length(value)
        if n is not None:
            return n
    return 1


def _length(value: Any) -> int | None:
    if not is_column(value):
        return None
    if is_arrow(value):
        return len(value)
    shape = getattr(value, "shape", None)
    if shape is not None:
        return int(shape[0]) if len(shape) else None
    try:
        return len(value)
    except TypeError:
        return None


def cell_text(p: ParsedColumn, i: int) -> str | None:
    return p.cell(i)


def screen(columns: Mapping[str, Any], units: Mapping[str, str] | None = None, *,
           decimal: str = ".", missing: Sequence[str] = (),
           row_problems: Mapping[int, Sequence[Problem]] | None = None) -> Screened:
    """Apply the boundary checks to columns of panels.

    ``columns`` maps field names to columns of any kind the cell reader takes
    (``acidbase.inputs.cells``); ``units`` maps field names to unit labels (a field
    not named is in its canonical unit).  An unknown unit raises ``UnitError`` (it
    concerns the whole column, not a row).  Each row is decided alone.
    """
    units = dict(units or {})
    unknown = set(units) - set(BY_NAME)
    if unknown:
        raise UnitError(field=", ".join(sorted(unknown)), unit="(any)", accepted=tuple(BY_NAME))
    n = column_length(columns)
    refused = np.zeros(n, dtype=bool)
    # Problems found before the cells (a file's specimen conflicts) come first.
    problems: dict[int, list[Problem]] = {int(i): list(p) for i, p in (row_problems or {}).items()
                                          if p and 0 <= int(i) < n}
    if problems:
        refused[np.fromiter(problems, dtype=np.int64)] = True
    # (row, field) already refused before the cells (an HL7 value refused in the unit its
    # message states, then left out): not also said to be "not given".
    told = {(i, p.field) for i, found in problems.items() for p in found}
    # A row refused whole before its cells (an HL7 message that could not be read): no
    # field of it is "not given", it was not read.
    unread = [i for i, found in problems.items()
              if any(getattr(p, "whole_row", False) for p in found)]

    def add(rows: np.ndarray, make) -> None:
        for i in np.flatnonzero(rows).tolist():
            problems.setdefault(i, []).append(make(i))

    values: dict[str, np.ndarray] = {}
    readings: dict[str, ParsedColumn] = {}
    present: set[str] = set()
    plain: set[str] = set()
    absent = np.full(n, np.nan)  # shared by every missing column: never written to
    unit_of = {}
    for spec in NUMERIC:
        unit = units.get(spec.name, spec.unit)
        _units.factor(spec.name, spec.kind, unit)  # an unknown unit fails the whole column
        if columns.get(spec.name) is None and not spec.required:
            values[spec.name] = absent
            continue
        unit_of[spec.name] = unit
    # Read together: a chunk's Arrow columns share one pass of the reader's pattern.
    parsed = dict(zip(unit_of, read_numbers_many([columns.get(k) for k in unit_of], decimal,
                                                 missing, n=n)))
    for spec in NUMERIC:
        if spec.name not in unit_of:
            continue
        unit, p = unit_of[spec.name], parsed[spec.name]
        if p.comparator is not None or p.flag is not None:
            readings[spec.name] = p
        if p.plain:
            plain.add(spec.name)
        raw = p.values
        canonical, bad = range_problems(spec, raw, unit)
        code = _units.normalise(unit)
        if p.bad.any():
            rows = np.flatnonzero(p.bad)
            texts = p.cells(rows)
            hint_of: dict[Any, str] = {}  # a chunk's refused cells repeat a few texts
            for i, t in zip(rows.tolist(), texts):
                hint = hint_of.get(t)
                if hint is None:
                    hint = hint_of[t] = number_hint(t, decimal, code, spec.name, spec.units)
                problems.setdefault(i, []).append(Problem(
                    spec.name, spec.title, t, code, kind="not_a_number", hint=hint))
        if bad.any():
            rows = np.flatnonzero(bad)
            for i, problem in zip(rows.tolist(), describe_values(spec, raw[rows], unit)):
                problems.setdefault(i, []).append(problem)
        bad = bad | p.bad
        if spec.required:
            censored = p.censored
            add(censored, lambda i, s=spec, c=code, p=p: censored_problem(
                s, cell_text(p, i), c))
            missing_rows = np.isnan(raw) & ~p.bad & ~censored
            if told:
                missing_rows[[i for i, f in told if f == spec.name]] = False
                missing_rows[unread] = False
            add(missing_rows, lambda i, s=spec, c=code: Problem(s.name, s.title, None, c,
                                                                kind="missing"))
            bad = bad | missing_rows | censored
        refused |= bad
        values[spec.name] = canonical
        if spec.required or not np.isnan(canonical).all():
            present.add(spec.name)
        else:
            values[spec.name] = absent

    both = ~np.isnan(values["urea"]) & ~np.isnan(values["bun"])
    add(both, lambda i: Problem("urea", "Urea", "urea and bun", "", kind="urea_and_bun"))
    refused |= both

    choices: dict[str, np.ndarray] = {}
    for choice in CHOICES:
        c = read_choices(columns.get(choice.name), choice, missing, n=n)
        choices[choice.name] = c.codes
        if c.plain and not c.bad.any():
            plain.add(choice.name)
        add(c.bad, lambda i, ch=choice, c=c: Problem(
            ch.name, ch.title, c.cell(i), "",
            kind="not_a_choice", choices=ch.words))
        refused |= c.bad

    if refused.any():
        rows = np.flatnonzero(refused)
        for name in present:
            values[name][rows] = np.nan  # each is range_problems' own new array
    return Screened(n, values, choices, refused, problems, frozenset(present), readings,
                    frozenset(plain))


def censored_problem(spec: FieldSpec, cell: object, unit: str) -> Problem:
    """A censored value ("<10") in a required field: no exact number to compute with."""
    f = _units.factor(spec.name, spec.kind, unit)
    lo, hi = spec.accepted
    return Problem(spec.name, spec.title, cell, _units.normalise(unit), (lo / f, hi / f),
                   kind="censored")


# ---------------------------------------------------------------------------
# The single-panel model (pydantic v2)


#: A unit its field does not accept, as ``Panel`` and ``acidbase check`` say it (the
#: line is ``<field>_unit: `` and this sentence; ``describe_fields``, ``unit_refusal``).
UNIT_NOT_ACCEPTED = "unit '{unit}' is not accepted for {title}; use one of {accepted}{hint}"


def _unit_context(spec: FieldSpec, unit: object) -> dict[str, str]:
    hint = _units.not_taken_hint(spec.kind, unit)
    return {"unit": unit, "title": spec.title, "accepted": ", ".join(spec.units),
            "hint": f" - {hint}" if hint else ""}


def unit_refusal(spec: FieldSpec, unit: object) -> str | None:
    """The readable line for a unit given for ``spec`` that it does not accept (None when
    it does): the same line ``describe`` makes of ``Panel``'s error."""
    if isinstance(unit, str) and _units.normalise(unit) in spec.units:
        return None
    return f"{spec.name}_unit: " + UNIT_NOT_ACCEPTED.format(**_unit_context(spec, unit))


# pydantic and the model are built when ``Panel`` is first asked for (``__getattr__``
# below): a single panel read from options or columns (``acidbase check``,
# ``interpret_many``) goes through ``screen`` and never needs them, and importing
# pydantic and building fifty fields is most of a cold start (docs/performance.md).


def _raise(problem: Problem) -> None:
    """A Problem as pydantic's error: its kind is the error type, its sentence the message."""
    from pydantic_core import PydanticCustomError

    raise PydanticCustomError(problem.kind, "{message}", {
        "message": str(problem), "field": problem.field, "value": problem.value,
        "unit": problem.unit, "low": problem.allowed[0] if problem.allowed else None,
        "high": problem.allowed[1] if problem.allowed else None, "hint": problem.hint,
        "code": problem.code})


def _decimal(info: ValidationInfo) -> str:
    ctx = info.context or {}
    return ctx.get("decimal", ".") if isinstance(ctx, Mapping) else "."


class _PanelMethods:
    """What a ``Panel`` does besides validating (mixed into the pydantic model)."""

    def columns(self) -> tuple[dict[str, np.ndarray], dict[str, str]]:
        """This panel as columns of length one, with its units (a batch of one)."""
        cols: dict[str, Any] = {}
        for spec in NUMERIC:
            v = getattr(self, spec.name)
            cols[spec.name] = np.array([np.nan if v is None else v], dtype=np.float64)
        for choice in CHOICES:
            cols[choice.name] = np.array([getattr(self, choice.name)], dtype=object)
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
                out[spec.name] = v * _units.factor(spec.name, spec.kind,
                                                   getattr(self, f"{spec.name}_unit"))
        return out


def _marks(cls, data: Any, info: ValidationInfo) -> Any:
    """Censored values and laboratory flags, recorded as read (the values themselves
    are read again, and refused if need be, by each field's validator)."""
    if not isinstance(data, Mapping):
        return data
    data = dict(data)
    quals, flags = [], []
    for spec in NUMERIC:
        if spec.name not in data:
            continue
        cell = read_number(data[spec.name], _decimal(info))
        if cell.bad:
            continue
        if cell.comparator is not None:
            quals.append(f"{spec.name} {str(cell.text).strip()}")
        if cell.flag is not None:
            flags.append(f"{spec.name} {cell.flag}")
    data["qualifiers"], data["lab_flags"] = tuple(quals), tuple(flags)
    return data


def unknown_field(key: object, value: object) -> Problem:
    """The Problem for a key that is no field of the panel: refused, never read as another
    field; the hint names the field it is a plain name of (``sodium``: ``na``), else the
    fields there are."""
    name = suggest(key)
    if name is None:
        names = (*BY_NAME, *(c.name for c in CHOICES), *TEXT_FIELDS)
        hint = f"the fields are {', '.join(names)}, and <field>_unit for a unit"
    elif name.endswith("_unit"):
        hint = f"use {name} (the unit of {BY_NAME[name[:-5]].title})"
    else:
        hint = f"use {name}" + (f" ({BY_NAME[name].title})" if name in BY_NAME else "")
    return Problem(str(key), str(key), value, "", kind="unknown_field", hint=hint)


def _known_fields(cls, data: Any, handler, info: ValidationInfo) -> Any:
    """Each key that is no field (pydantic's "Extra inputs are not permitted") as the
    Problem ``unknown_field`` says it, the other problems kept as they were, in order."""
    from pydantic import ValidationError
    from pydantic_core import PydanticCustomError

    try:
        return handler(data)
    except ValidationError as e:
        errors = e.errors(include_url=False)
        if not any(err["type"] == "extra_forbidden" for err in errors):
            raise
        again = []
        for err in errors:
            ctx = dict(err.get("ctx") or {})
            if err["type"] == "extra_forbidden":
                problem = unknown_field(err["loc"][-1], err["input"])
                kind = PydanticCustomError(problem.kind, "{message}", {
                    "message": str(problem), "field": problem.field, "value": problem.value,
                    "hint": problem.hint, "code": problem.code})
            elif err["type"] in PROBLEM_KINDS or err["type"] == "unit_not_accepted":
                kind = PydanticCustomError(err["type"], "{message}",
                                           {**ctx, "message": err["msg"]})
            else:  # pydantic's own type: it knows its message
                again.append({"type": err["type"], "loc": err["loc"], "input": err["input"],
                              **({"ctx": ctx} if ctx else {})})
                continue
            again.append({"type": kind, "loc": err["loc"], "input": err["input"]})
        raise ValidationError.from_exception_data(e.title, again) from None


def _urea_or_bun(self: BaseModel) -> BaseModel:
    if getattr(self, "urea") is not None and getattr(self, "bun") is not None:
        _raise(Problem("urea", "Urea", "urea and bun", "", kind="urea_and_bun"))
    return self


def _panel_base() -> type[BaseModel]:
    from pydantic import BaseModel, ConfigDict, model_validator

    class _PanelBase(BaseModel, _PanelMethods):
        model_config = ConfigDict(extra="forbid", frozen=True)
        _known_fields = model_validator(mode="wrap")(classmethod(_known_fields))
        _marks = model_validator(mode="before")(classmethod(_marks))
        _urea_or_bun = model_validator(mode="after")(_urea_or_bun)

    return _PanelBase


def _unit_validator(spec: FieldSpec):
    from pydantic import field_validator
    from pydantic_core import PydanticCustomError

    def check(cls, value: object) -> str:
        # before pydantic's type check: a unit that is no text (None from an empty
        # database column, a number) is refused as any unit not taken, with the units
        code = _units.normalise(value) if isinstance(value, str) else None
        if code not in spec.units:
            raise PydanticCustomError("unit_not_accepted", UNIT_NOT_ACCEPTED,
                                      _unit_context(spec, value if isinstance(value, str)
                                                    else str(value)))
        return code
    return field_validator(f"{spec.name}_unit", mode="before")(check)


def _read_validator(spec: FieldSpec):
    """The cell, read by the one reader (``acidbase.inputs.cells``), before any type check."""
    from pydantic import field_validator

    def read(cls, value: Any, info: ValidationInfo) -> float | None:
        unit = info.data.get(f"{spec.name}_unit") or spec.unit
        cell = read_number(value, _decimal(info))
        if cell.bad:
            _raise(Problem(spec.name, spec.title, cell.text, unit, kind="not_a_number",
                           hint=number_hint(cell.text, _decimal(info), unit, spec.name,
                                            spec.units)))
        if cell.comparator is not None and spec.required:
            _raise(censored_problem(spec, cell.text, unit))
        if cell.value is None and spec.required:
            _raise(Problem(spec.name, spec.title, None, unit, kind="missing"))
        return cell.value
    return field_validator(spec.name, mode="before")(read)


def _value_validator(spec: FieldSpec):
    from pydantic import field_validator

    def check(cls, value: float | None, info: ValidationInfo) -> float | None:
        if value is None:
            return None
        unit = info.data.get(f"{spec.name}_unit")
        if unit is None:  # the unit itself was refused; that error says enough
            return value
        raw = np.array([value], dtype=np.float64)
        _, bad = range_problems(spec, raw, unit)
        if bad[0]:
            _raise(describe_value(spec, value, unit))
        return value
    return field_validator(spec.name)(check)


def _text_validator(name: str):
    """An id given as a whole number (a database's integer key, numpy's int64) is its
    decimal text, as a file's cell is; anything else but text is left to the type check."""
    from pydantic import field_validator

    def read(cls, value: Any) -> Any:
        if isinstance(value, (int, np.integer)) and not isinstance(value, (bool, np.bool_)):
            return str(int(value))
        return value
    return field_validator(name, mode="before")(read)


def _choice_validator(choice: Choice):
    from pydantic import field_validator

    def read(cls, value: Any) -> str:
        word, bad = read_choice(value, choice)
        if bad:
            text = value if isinstance(value, str) else str(value)[:60]
            _raise(Problem(choice.name, choice.title, text, "", kind="not_a_choice",
                           choices=choice.words))
        return word
    return field_validator(choice.name, mode="before")(read)


_PANEL_DOC = """One blood-gas and electrolyte panel, validated.

Required: ph, pco2, hco3 (``acidbase.fields.REQUIRED``).  Every numeric field has a ``<name>_unit``
(UCUM) defaulting to its canonical unit; see ``acidbase.fields`` for the ranges.
Each value is read by the one cell reader (``acidbase.inputs.cells``: numbers or
text such as "7.21 L" or "<0.3"); a decimal comma is read when the validation
context says so (``Panel.model_validate(data, context={"decimal": ","})``).
Invalid input raises ``pydantic.ValidationError`` with every problem; each
error's type is the Problem's kind and its message the Problem's sentence.
"""


def _build_panel() -> type[BaseModel]:
    """A new ``Panel`` model from the field declarations (``Panel`` itself is built once,
    on first use; tests build variants with other declarations)."""
    from pydantic import Field, create_model

    definitions: dict[str, Any] = {}
    validators: dict[str, Any] = {}
    # Units first: a value's validator reads its unit from the fields already validated.
    for spec in NUMERIC:
        definitions[f"{spec.name}_unit"] = (
            str, Field(default=spec.unit,
                       description=f"Unit of {spec.title}: {', '.join(spec.units)}"))
        validators[f"_check_{spec.name}_unit"] = _unit_validator(spec)
    for choice in CHOICES:
        definitions[choice.name] = (
            Literal[choice.words], Field(default=choice.default, description=choice.help))
        validators[f"_read_{choice.name}"] = _choice_validator(choice)
    for name in TEXT_FIELDS:
        definitions[name] = (str | None, Field(default=None, max_length=200))
        validators[f"_text_{name}"] = _text_validator(name)
    for spec in NUMERIC:
        default = ... if spec.required else None
        definitions[spec.name] = (
            float | None, Field(default=default, title=spec.title, description=spec.help,
                                allow_inf_nan=False, json_schema_extra={
                                    "accepted": spec.accepted, "unit": spec.unit,
                                    "loinc": list(spec.loinc)}))
        validators[f"_read_{spec.name}"] = _read_validator(spec)
        validators[f"_check_{spec.name}"] = _value_validator(spec)
    definitions["qualifiers"] = (tuple[str, ...], Field(default=(), description=(
        "Censored values read (\"lactate <0.3\"): set by the reader, not by the caller.")))
    definitions["lab_flags"] = (tuple[str, ...], Field(default=(), description=(
        "Laboratory flags read off values (\"ph L\"): set by the reader.")))
    model = create_model("Panel", __base__=_panel_base(), __validators__=validators,
                         __module__=__name__, **definitions)
    model.__doc__ = _PANEL_DOC
    return model


_building = threading.Lock()


def __getattr__(name: str) -> Any:
    """``Panel`` is built on first use, once (a lock, so two threads get one class)."""
    if name != "Panel":
        raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
    with _building:
        model = globals().get("Panel")
        if model is None:
            model = globals()["Panel"] = _build_panel()
    return model


def __dir__() -> list[str]:
    return sorted({*globals(), "Panel"})


if TYPE_CHECKING:
    class Panel(BaseModel, _PanelMethods):
        """What type checkers and editors see; the class itself is built on first use."""

#: Error types whose message is already the Problem's full sentence.
PROBLEM_KINDS: frozenset[str] = frozenset(Problem.KINDS)


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
        if e["type"] == "missing" and spec is not None:
            line = str(Problem(spec.name, spec.title, None, spec.unit, kind="missing"))
        elif e["type"] in PROBLEM_KINDS:
            line = msg
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
