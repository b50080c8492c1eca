"""Headers -> fields: our field names, LOINC codes, a laboratory's mapping file.

A unit may follow a header in parentheses, ``pCO2 (kPa)``.
"""

from __future__ import annotations

import csv
import os
import re
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field

from .. import loinc
from .. import units as _units
from ..errors import BatchInputError, Problem, UnitError
from ..fields import BY_NAME, REQUIRED, TEXT_FIELDS, suggest
from ..inputs.vocab import CHOICES
from .formats import sniff_csv

#: Fields that are text, read as given: choices and identifiers.
CHOICE_FIELDS: tuple[str, ...] = tuple(c.name for c in CHOICES)
ALL_FIELDS: tuple[str, ...] = tuple(BY_NAME) + CHOICE_FIELDS + TEXT_FIELDS


@dataclass(frozen=True)
class Layout:
    """How the columns of one file are read."""

    headers: tuple[str, ...]
    """Every input column, in file order (all are passed through)."""
    field_of: dict[str, str]
    """Input header -> field name, for the columns that are read."""
    units: dict[str, str]
    """Numeric field -> unit label (UCUM), for every numeric field present."""
    notes: tuple[str, ...] = ()
    """Things the user should know (columns passed through unread...)."""
    missing: tuple[str, ...] = ()
    """Cell texts that mean "not measured" (``--missing``)."""
    code_of: dict[str, str] = field(default_factory=dict)
    """Input header -> its LOINC code, for the columns named by one."""
    duplicates: Mapping[int, tuple[str, ...]] = field(default_factory=dict)
    """Row (from 0, over the file) -> keys its JSON record gave twice (the source fills
    it as it reads; each such row is refused)."""
    row_problems: Mapping[int, tuple[Problem, ...]] = field(default_factory=dict)
    """Row (from 0, over the file) -> problems the source found before the cells (an HL7
    message that could not be read, two results for one field); each such row is refused."""

    @property
    def column_of(self) -> dict[str, str]:
        """Field -> its (first) input column."""
        out: dict[str, str] = {}
        for h, f in self.field_of.items():
            out.setdefault(f, h)
        return out

    @property
    def columns_of(self) -> dict[str, tuple[str, ...]]:
        """Field -> every input column read for it (several: one per specimen)."""
        out: dict[str, tuple[str, ...]] = {}
        for h, f in self.field_of.items():
            out[f] = (*out.get(f, ()), h)
        return out

    @property
    def unread(self) -> tuple[str, ...]:
        return tuple(h for h in self.headers if h not in self.field_of)


_UNIT_SUFFIX = re.compile(r"^(?P<base>.*?\S)\s*\((?P<unit>[^()]+)\)\s*$")


def split_unit(header: str) -> tuple[str, str | None]:
    """``"pCO2 (kPa)"`` -> ``("pCO2", "kPa")``; no suffix -> ``(header, None)``."""
    m = _UNIT_SUFFIX.match(header)
    if m:
        return m["base"].strip(), m["unit"].strip()
    return header.strip(), None


def _is_unit_of(fld: str, unit: str | None) -> bool:
    """True when ``unit`` is a unit the numeric field accepts ("pH (37C)" is no unit)."""
    spec = BY_NAME.get(fld)
    return spec is not None and unit is not None and _units.normalise(unit) in spec.units


def read_mapping(path: str | os.PathLike[str]) -> dict[str, tuple[str, str | None]]:
    """A mapping file: CSV with columns ``header``, ``field`` and optionally ``unit``."""
    try:
        dialect = sniff_csv(path)
    except BatchInputError as e:
        raise BatchInputError(f"mapping file: {e}") from None
    except OSError as e:
        raise BatchInputError(f"mapping file {path}: {e.strerror}") from None
    cols = [h.lower() for h in dialect.headers]
    if "header" not in cols or "field" not in cols:
        raise BatchInputError(
            f"mapping file {path}: needs columns 'header' and 'field' (and optionally 'unit'); "
            f"found {', '.join(dialect.headers)}")
    with open(path, encoding="utf-8-sig", newline="") as f:
        rows = list(csv.reader(f, delimiter=dialect.delimiter))
    ih, jf = cols.index("header"), cols.index("field")
    ju = cols.index("unit") if "unit" in cols else None
    out: dict[str, tuple[str, str | None]] = {}
    for lineno, row in enumerate(rows[1:], start=2):
        if not any(c.strip() for c in row):
            continue
        header = row[ih].strip() if ih < len(row) else ""
        fld = row[jf].strip().lower() if jf < len(row) else ""
        unit = row[ju].strip() if ju is not None and ju < len(row) and row[ju].strip() else None
        if not header:
            raise BatchInputError(f"mapping file {path} line {lineno}: the header cell is "
                                  f"empty (field {fld!r}); name the column it maps")
        if fld not in ALL_FIELDS:
            name = suggest(fld)  # a plain name of a field ("bicarbonate"): named, not read
            raise BatchInputError(
                f"mapping file {path} line {lineno}: field {fld!r} is not one of "
                f"{', '.join(ALL_FIELDS)}" + (f" (use {name})" if name else ""))
        if header in out:
            raise BatchInputError(f"mapping file {path} line {lineno}: header {header!r} "
                                  "is mapped twice")
        out[header] = (fld, unit)
    return out


def map_headers(headers: Sequence[str], mapping: Mapping[str, tuple[str, str | None]] | None = None,
                units: Mapping[str, str] | None = None, strict: bool = False,
                defaults: Mapping[str, str] | None = None,
                repeats: Mapping[str, str] | None = None) -> Layout:
    """Decide which input column feeds which field, and in which unit.

    Precedence for a column: the mapping file, then our field name, then a LOINC
    code.  Precedence for a unit: ``units`` (the ``--unit`` options), the
    mapping file or a header suffix, the unit implied by a LOINC code, the
    site's default unit (``defaults``, the configuration file), the field's canonical
    unit.  Two columns for one field, a unit a field does not
    accept, or a missing required field stop the run (``BatchInputError``).
    ``repeats`` (``Source.repeats``): a column renamed because its header came again
    (``"ph (2)"`` -> ``"ph"``) is read as the header it repeats, so ``ph,ph`` stops the
    run as ``pH,PH`` does instead of passing the second column through unread.
    """
    mapping = dict(mapping or {})
    given_units = {k.lower(): v for k, v in (units or {}).items()}
    field_of: dict[str, str] = {}
    code_of: dict[str, str] = {}
    stated: dict[str, tuple[str, str]] = {}  # field -> (unit, where)
    needs_unit: dict[str, str] = {}
    not_read: list[str] = []
    for h in headers:
        given = (repeats or {}).get(h, h)  # the header as the file gives it
        base, suffix = split_unit(given)
        fld = unit = None
        where = ""
        if given in mapping:
            fld, unit = mapping[given]
            where = f"mapping file for column {h!r}"
        elif given.strip().lower() in ALL_FIELDS:
            fld, where = given.strip().lower(), f"header {h!r}"
        elif base.lower() in ALL_FIELDS and _is_unit_of(base.lower(), suffix):
            fld, unit, where = base.lower(), suffix, f"header {h!r}"
        elif (code_field := loinc.field_for(base)) is not None and (
                suffix is None or _is_unit_of(code_field, suffix)):
            fld, where = code_field, f"header {h!r}"
            unit = suffix or loinc.IMPLIED_UNIT.get(base)
            code_of[h] = base
            if unit is None and base in loinc.UNIT_REQUIRED:
                needs_unit[code_field] = h
        elif base in loinc.NOT_READ:
            not_read.append(f"{h!r} (LOINC {base}: {loinc.NOT_READ[base]})")
        elif (base.lower() in BY_NAME and suffix is not None
              and (hint := _units.not_taken_hint(BY_NAME[base.lower()].kind, suffix))):
            # a field in a unit of its quantity that is not taken ([degF]): refused, not
            # passed through unread as a header that names no field would be
            raise BatchInputError(f"header {h!r}: {hint}")
        if fld is None:
            continue
        if fld in field_of.values():
            others = [k for k, v in field_of.items() if v == fld]
            if not _specimen_columns([*others, h], code_of):
                raise BatchInputError(
                    f"columns {others[0]!r} and {h!r} both map to {fld}; keep one, or map one "
                    "with a mapping file to another field (columns of one field are read "
                    "together only when their LOINC codes name different specimens)")
        field_of[h] = fld
        if unit is not None:
            if fld not in BY_NAME:
                raise BatchInputError(f"{where}: {fld} is text and takes no unit")
            if fld in stated and _units.normalise(stated[fld][0]) != _units.normalise(unit):
                raise BatchInputError(
                    f"{fld}: the {stated[fld][1]} says {stated[fld][0]!r} but the {where} says "
                    f"{unit!r}; columns of one field are read in one unit (map them with --map)")
            stated[fld] = (unit, where)

    present = set(field_of.values())
    for fld in given_units:
        if fld not in BY_NAME:
            raise BatchInputError(f"--unit {fld}=...: {fld!r} is not a numeric field "
                                  f"({', '.join(BY_NAME)})")
        if fld not in present:
            raise BatchInputError(f"--unit {fld}=... given, but no column maps to {fld}")
    resolved: dict[str, str] = {}
    for fld in present & set(BY_NAME):
        spec = BY_NAME[fld]
        if fld in given_units:
            unit = given_units[fld]
            if fld in stated and _units.normalise(stated[fld][0]) != _units.normalise(unit):
                raise BatchInputError(
                    f"{fld}: --unit says {unit!r} but the {stated[fld][1]} says "
                    f"{stated[fld][0]!r}; state one unit")
        elif fld in stated:
            unit = stated[fld][0]
        elif fld in needs_unit:
            raise BatchInputError(
                f"column {needs_unit[fld]!r} ({spec.title}): this LOINC code may be a mass "
                f"concentration; state the unit (--unit {fld}=..., accepted: "
                f"{', '.join(spec.units)})")
        else:
            unit = (defaults or {}).get(fld, spec.unit)
        try:
            _units.factor(fld, spec.kind, unit)
        except UnitError as e:
            raise BatchInputError(str(e)) from None
        resolved[fld] = _units.normalise(unit)

    missing = [f for f in REQUIRED if f not in present]
    if missing:
        names = ", ".join(f"{BY_NAME[f].title} ({f})" for f in missing)
        raise BatchInputError(
            f"no column for required field(s) {names}; columns found: "
            f"{', '.join(repr(h) for h in headers)}. Name columns with the field names, "
            "LOINC codes, or give a mapping file (--map)")
    unread = [h for h in headers if h not in field_of]
    notes: list[str] = []
    if unread:
        if strict:
            raise BatchInputError(
                f"columns not recognised: {', '.join(repr(h) for h in unread)} "
                "(--strict-columns); map them with --map or drop --strict-columns")
        notes.append("passed through, not read: " + ", ".join(repr(h) for h in unread))
    if not_read:
        notes.append("LOINC columns deliberately not read: " + "; ".join(not_read))
    several = {f: hs for f, hs in _columns_of(field_of).items() if len(hs) > 1}
    if several:
        notes.append("one column per specimen, read row by row (a row with two filled is "
                     "refused): " + "; ".join(f"{f}: {', '.join(repr(h) for h in hs)}"
                                                for f, hs in several.items()))
    unused = [h for h in mapping if h not in headers]
    if unused:
        notes.append("mapping file headers not in this file: " + ", ".join(repr(h) for h in unused))
    return Layout(tuple(headers), field_of, resolved, tuple(notes), code_of=code_of)


def _columns_of(field_of: Mapping[str, str]) -> dict[str, list[str]]:
    out: dict[str, list[str]] = {}
    for h, f in field_of.items():
        out.setdefault(f, []).append(h)
    return out


def _specimen_columns(headers: Sequence[str], code_of: Mapping[str, str]) -> bool:
    """True when every header is a LOINC code and each names its own specimen."""
    kinds = [loinc.SYSTEM.get(code_of.get(h, "")) for h in headers]
    return all(k is not None for k in kinds) and len(set(kinds)) == len(kinds)

