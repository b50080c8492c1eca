"""The library's errors: one base class, each concrete error also a builtin.

Errors keep structured attributes and format only in ``__str__``, so every
surface (CLI, terminal app, batch reasons) shows the same sentence.
"""

from __future__ import annotations

from dataclasses import dataclass


class AcidBaseError(Exception):
    """Base of every error this library raises on purpose."""


@dataclass
class UnitError(ValueError, AcidBaseError):
    """A unit label that the field does not accept."""

    field: str
    unit: str
    accepted: tuple[str, ...]

    def __str__(self) -> str:
        return (
            f"{self.field}: unit {self.unit!r} is not accepted; "
            f"use one of {', '.join(self.accepted)}"
        )


class BatchInputError(ValueError, AcidBaseError):
    """A file (or a run's options) that cannot be read as panels at all: the run cannot start."""

    def __init__(self, message: str) -> None:
        super().__init__(message)
        self.message = message

    def __str__(self) -> str:
        return self.message


@dataclass
class Problem:
    """One refused input value, with everything needed to explain it."""

    field: str
    """Field name as used by the API, the CLI and file columns (``pco2``)."""
    title: str
    """The trade's name for the field (``pCO2``)."""
    value: object
    unit: str
    allowed: tuple[float, float] | None = None
    hint: str = ""
    kind: str = "out_of_range"

    def __str__(self) -> str:
        if self.kind == "out_of_range" and self.allowed is not None:
            lo, hi = self.allowed
            text = (
                f"{self.title} ({self.field}) {_num(self.value)} {self.unit} is outside the "
                f"accepted range {_num(lo)} to {_num(hi)} {self.unit}"
            )
        elif self.kind == "not_a_number":
            text = f"{self.title} ({self.field}) {self.value!r} is not a finite number"
        elif self.kind == "missing":
            text = f"{self.title} ({self.field}) is required and was not given"
        else:
            text = f"{self.title} ({self.field}) {self.value!r}: {self.kind}"
        # " - ", not "; ": a row's reasons are joined with "; ", one per problem
        return text + (f" - {self.hint}" if self.hint else "")


def _num(x: object) -> str:
    if isinstance(x, float):
        return f"{x:.4g}" if abs(x) < 1e5 else f"{x:.6g}"
    return str(x)
