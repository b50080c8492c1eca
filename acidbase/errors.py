"""The library's errors: one base class, each concrete error also a builtin.

Errors keep structured attributes and format only in ``__str__``, so every
surface (CLI, terminal app, batch reasons) shows the same sentence.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import ClassVar


class AcidBaseError(Exception):
    """Base of every error this library raises on purpose."""


@dataclass
class UnitError(ValueError, AcidBaseError):
    """A unit label that the field does not accept."""

    field: str
    unit: str
    accepted: tuple[str, ...]
    hint: str = ""
    """What to do, where more can be said (a unit of the quantity not taken: [degF])."""

    def __str__(self) -> str:
        return (
            f"{self.field}: unit {self.unit!r} is not accepted; "
            f"use one of {', '.join(self.accepted)}"
        ) + (f" - {self.hint}" if self.hint else "")


class BatchInputError(ValueError, AcidBaseError):
    """A file (or a run's options) that cannot be read as panels at all: the run cannot start."""

    def __init__(self, message: str) -> None:
        super().__init__(message)
        self.message = message

    def __str__(self) -> str:
        return self.message


@dataclass
class Problem:
    """One refused input value, with everything needed to explain it.

    A refusal travels as this object from the reader to the surface that prints
    it; only ``__str__`` makes a sentence, and ``code`` (field and kind) is what
    summaries count.  ``kind`` is one of ``KINDS``.
    """

    field: str
    """Field name as used by the API, the CLI and file columns (``pco2``)."""
    title: str
    """The trade's name for the field (``pCO2``)."""
    value: object
    """The value as given (text as read, or a number)."""
    unit: str
    allowed: tuple[float, float] | None = None
    """Accepted range in ``unit``, where one applies."""
    hint: str = ""
    kind: str = "outside_accepted_range"
    choices: tuple[str, ...] = ()
    """The words allowed, for a choice."""

    KINDS: ClassVar[dict[str, str]] = {
        "outside_accepted_range": "outside the accepted range",
        "not_a_number": "not a number",
        "missing": "required and not given",
        "censored": "censored value in a required field",
        "not_a_choice": "not one of the allowed words",
        "urea_and_bun": "urea and urea nitrogen both given",
        "specimen_conflict": "specimens disagree (LOINC-coded columns or sample type)",
        "duplicate_key": "a key given twice in one record",
        "unknown_field": "not a field of the panel",
    }

    @property
    def code(self) -> str:
        """A stable key for counting: field and kind (``pco2:outside_accepted_range``)."""
        return f"{self.field}:{self.kind}"

    @property
    def label(self) -> str:
        """The code in words (``pCO2 (pco2): outside the accepted range``)."""
        return f"{self.title} ({self.field}): {self.KINDS.get(self.kind, self.kind)}"

    def __str__(self) -> str:
        head = f"{self.title} ({self.field})"
        unit = f" {self.unit}" if self.unit and self.unit not in UNITLESS else ""
        if self.kind == "outside_accepted_range" and self.allowed is not None:
            lo, hi = self.allowed
            text = (f"{head} {_value(self.value)}{unit} is outside the accepted range "
                    f"{_num(lo)} to {_num(hi)}{unit}")
        elif self.kind == "not_a_number":
            text = f"{head} {_shown(self.value)} is not a number"
        elif self.kind == "missing":
            text = f"{head} is required and was not given"
        elif self.kind == "censored" and self.allowed is not None:
            lo, hi = self.allowed
            text = (f"{head} {_shown(self.value)}{unit} is a censored value (beyond the reporting "
                    f"limit), but a required field needs an exact number (accepted range "
                    f"{_num(lo)} to {_num(hi)}{unit})")
        elif self.kind == "not_a_choice":
            text = f"{head} {_shown(self.value)} is not one of {', '.join(self.choices)}"
        elif self.kind == "unknown_field":
            # "<key>: ..." as pydantic's other lines name a field that is not numeric
            key = self.field if len(self.field) <= SHOWN_CHARACTERS else _shown(self.field)
            text = f"{key}: not a field of the panel"
        elif self.kind == "urea_and_bun":
            text = "give urea or urea nitrogen (bun), not both"
        else:
            text = f"{head} {_shown(self.value)}: {self.KINDS.get(self.kind, self.kind)}"
        # " - ", not "; ": a row's reasons are joined with "; ", one per problem
        return text + (f" - {self.hint}" if self.hint else "")


@dataclass
class ColumnError(ValueError, AcidBaseError):
    """Columns that cannot be read as panels at all: an unknown name, unequal lengths,
    a container that is not columns."""

    message: str
    names: tuple[str, ...] = ()
    """The offending column names."""
    known: tuple[str, ...] = ()
    """The names that would be read."""
    suggested: tuple[str | None, ...] = ()
    """For each of ``names``, the column it names in other words (``sodium`` -> ``na``:
    ``fields.suggest``), else None; a hint only, the column is not read."""

    def __str__(self) -> str:
        return self.message


#: UCUM codes of no unit (FiO2 as a fraction, pH), left out of a sentence as the text
#: report leaves them out: "21 1 ... 0.16 to 1 1" reads as nonsense.
UNITLESS: frozenset[str] = frozenset({"1", "[pH]"})

#: A value longer than this is shown by its start and its length (``Problem.value``
#: keeps it whole): a 10,000-character cell would flood a terminal and a reason column.
SHOWN_CHARACTERS = 60


def _shown(x: object) -> str:
    """The value as given, quoted (``repr``); a long one shortened, with its length."""
    text = repr(x)
    if len(text) <= SHOWN_CHARACTERS:
        return text
    n = len(x) if isinstance(x, str) else len(text)
    return f"{text[:SHOWN_CHARACTERS - 20]}... ({n} characters)"


def _num(x: object) -> str:
    """A range's bound (converted bounds to four significant digits)."""
    if isinstance(x, float):
        return f"{x:.4g}" if abs(x) < 1e5 else f"{x:.6g}"
    return str(x)


def _value(x: object) -> str:
    """A value as read: the shortest text that reads back as the same float (650.25
    stays 650.25; four significant digits had made it 650.2, not the value given),
    without a bare ".0"."""
    if isinstance(x, float):
        text = repr(x)
        return text[:-2] if text.endswith(".0") else text
    return str(x)
