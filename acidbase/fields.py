"""The panel's fields: names, units, LOINC codes and ranges, declared once.

Two ranges per numeric field, both in the field's canonical unit:

* ``accepted`` -- outside it the value is refused.  It is set wide enough to admit
  every value a living patient can present, and narrow enough that a value typed
  in the wrong unit falls outside it (pCO2 5.3 "mm[Hg]", albumin 38 "g/dL",
  glucose 6 "mg/dL").  Where an analyser's measuring range is narrower, the
  analyser refuses first.  Design choice, documented in docs/methods.md
  ("Accepted ranges"), informed by the plausibility limits in the same file.
* ``physiologic`` -- outside it the value is accepted but flagged as extreme
  (rule ``TRUST-EXTREME-VALUE``), to be verified before acting on it.

Reference intervals (what is "normal") live in ``acidbase.reference``, because
they depend on the sample type.

LOINC codes are those of the terms we read as headers in batch files; they were
checked against the interoperability notes gathered for the project and must
be re-checked against a LOINC release file before they are relied on for
anything but column matching.
"""

from __future__ import annotations

import functools
from dataclasses import dataclass

from . import units as _units
from .inputs.vocab import CHOICE_BY_NAME, CHOICES  # noqa: F401  (re-exported)


@dataclass(frozen=True)
class FieldSpec:
    name: str
    """API, CLI (``--name``) and file column name."""
    title: str
    """The trade's name, as printed on a report."""
    kind: str
    """Kind of quantity: a key of ``acidbase.units.FACTORS``."""
    accepted: tuple[float, float]
    """Canonical unit; outside this range the value is refused."""
    physiologic: tuple[float, float]
    """Canonical unit; outside this range the value is flagged as extreme."""
    required: bool = False
    loinc: tuple[str, ...] = ()
    help: str = ""
    also: tuple[str, ...] = ()
    """Plain names of this same quantity ("sodium" for ``na``).  Never read as the
    field: a key spelled so is refused, with a hint naming the field (``suggest``)."""

    @property
    def unit(self) -> str:
        """Canonical unit (UCUM)."""
        return _units.canonical_unit(self.kind)

    @property
    def units(self) -> tuple[str, ...]:
        """Units accepted for this field (UCUM), canonical first."""
        return tuple(_units.FACTORS[self.kind])


# Order: the order a blood-gas report prints, then chemistry, then context.
NUMERIC: tuple[FieldSpec, ...] = (
    FieldSpec("ph", "pH", "ph", (6.0, 8.0), (6.8, 7.8), True,
              ("2744-1", "2746-6", "2745-8", "11558-4", "19213-8", "97536-7"),
              "pH of the sample at 37 degC as measured by the analyser."),
    FieldSpec("pco2", "pCO2", "pressure", (8.0, 250.0), (10.0, 150.0), True,
              ("2019-8", "2021-4", "11557-6", "2020-6", "19212-0", "97538-3"),
              "Partial pressure of carbon dioxide at 37 degC."),
    FieldSpec("hco3", "HCO3-", "electrolyte", (1.0, 80.0), (4.0, 50.0), True,
              ("1960-4", "14627-4", "1959-6", "1963-8", "2028-9"),
              "Bicarbonate: the analyser's calculated value, or a chemistry total CO2 "
              "(say which with hco3_source).", also=("bicarbonate", "bicarb")),
    FieldSpec("na", "Na+", "electrolyte", (80.0, 200.0), (110.0, 170.0), False,
              ("2951-2", "2947-0", "32717-1", "39791-9", "39792-7"), "Sodium.", also=("sodium",)),
    FieldSpec("cl", "Cl-", "electrolyte", (50.0, 160.0), (70.0, 135.0), False,
              ("2075-0", "41650-3", "2069-3", "41649-5", "51590-8"), "Chloride.", also=("chloride",)),
    FieldSpec("k", "K+", "electrolyte", (0.5, 15.0), (1.5, 8.0), False,
              ("2823-3", "6298-4", "32713-0", "39789-3", "39790-1"), "Potassium.", also=("potassium",)),
    FieldSpec("albumin", "Albumin", "albumin", (8.0, 80.0), (10.0, 60.0), False,
              ("1751-7",), "Serum or plasma albumin."),
    FieldSpec("lactate", "Lactate", "electrolyte", (0.0, 40.0), (0.0, 25.0), False,
              ("2524-7", "32693-4", "2518-9", "2519-7", "19239-3", "19240-1"), "Lactate."),
    FieldSpec("glucose", "Glucose", "glucose", (0.6, 70.0), (1.5, 60.0), False,
              ("2345-7", "14749-6", "2339-0", "15074-8"), "Glucose."),
    FieldSpec("urea", "Urea", "urea", (0.3, 100.0), (0.5, 80.0), False,
              ("22664-7", "3091-6"), "Urea (not urea nitrogen; for urea nitrogen use bun)."),
    FieldSpec("bun", "Urea nitrogen (BUN)", "bun", (0.8, 280.0), (1.4, 224.0), False,
              ("3094-0", "14937-7", "6299-2"), "Urea nitrogen (BUN); give urea or BUN, not both.",
              also=("urea_nitrogen", "blood_urea_nitrogen")),
    FieldSpec("osmolality", "Osmolality", "osmolality", (150.0, 500.0), (230.0, 400.0), False,
              ("2692-2",), "Measured serum osmolality (freezing point)."),
    FieldSpec("ica", "Ionised Ca2+", "calcium", (0.2, 4.0), (0.5, 2.5), False,
              ("1994-3", "34581-9", "41645-3", "41644-6", "41646-1", "1995-0"), "Ionised calcium.",
              also=("ionised_calcium", "ionized_calcium")),
    FieldSpec("mg", "Mg2+", "magnesium", (0.1, 5.0), (0.3, 3.0), False,
              ("2601-3", "19123-9"), "Magnesium (total), used as an approximation in the apparent SID.",
              also=("magnesium",)),
    FieldSpec("phosphate", "Phosphate", "phosphate", (0.1, 6.0), (0.2, 4.0), False,
              ("14879-1", "2777-1"), "Inorganic phosphate."),
    FieldSpec("hb", "Haemoglobin", "haemoglobin", (2.0, 25.0), (4.0, 22.0), False,
              ("718-7", "30313-1", "30350-3", "30352-9"), "Total haemoglobin.",
              also=("hemoglobin", "hgb")),
    FieldSpec("po2", "pO2", "pressure", (5.0, 800.0), (20.0, 700.0), False,
              ("2703-7", "2705-2", "11556-8", "2704-5"), "Partial pressure of oxygen at 37 degC."),
    FieldSpec("fio2", "FiO2", "fraction", (0.16, 1.0), (0.21, 1.0), False,
              ("3150-0",), "Inspired oxygen fraction (0.21-1.0, or 21-100 with unit %)."),
    FieldSpec("pb", "Barometric pressure", "pressure", (350.0, 800.0), (450.0, 800.0), False,
              (), "Barometric pressure; 760 mm[Hg] is assumed when not given."),
    FieldSpec("temperature", "Patient temperature", "temperature", (25.0, 45.0), (30.0, 42.0),
              False, ("8310-5",), "Patient temperature in degC.", also=("temp",)),
    FieldSpec("age", "Age", "age", (0.0, 120.0), (0.0, 120.0), False, ("30525-0",),
              "Age in years."),
)

BY_NAME: dict[str, FieldSpec] = {f.name: f for f in NUMERIC}
REQUIRED: tuple[str, ...] = tuple(f.name for f in NUMERIC if f.required)

#: LOINC codes above held from memory only.  Empty: every code was checked against
#: published FHIR implementation guides and value sets that carry the LOINC long
#: common name (the project's notes, research/loinc.md sections 1.2 and 1.3: HL7
#: Germany GECCO profiles, Medizininformatik-Initiative value sets on LOINC 2.75,
#: DICOM CID 3524, VSAC), not against a LOINC release file.
LOINC_FROM_MEMORY: frozenset[str] = frozenset()

#: The words of the choice inputs (declared once, in ``acidbase.inputs.vocab``).
SAMPLE_TYPES: tuple[str, ...] = CHOICE_BY_NAME["sample_type"].words
HCO3_SOURCES: tuple[str, ...] = CHOICE_BY_NAME["hco3_source"].words
#: Pregnancy: "third_trimester" selects the published third-trimester intervals
#: (acidbase.reference); "no" and "unknown" use the adult intervals.
PREGNANCY_STATES: tuple[str, ...] = CHOICE_BY_NAME["pregnancy"].words

#: Text fields carried with a panel; they do not enter the chemistry.
TEXT_FIELDS: tuple[str, ...] = ("sample_id", "patient_id", "collected_at")


def _squash(text: str) -> str:
    """A spelling reduced to its letters and digits, lower case ("Na+" -> "na")."""
    return "".join(ch for ch in text.lower() if ch.isascii() and ch.isalnum())


@functools.cache
def _spellings() -> dict[str, str]:
    """Squashed spelling -> field: each field's name and title (the words a report
    prints), a numeric field's plain names (``FieldSpec.also``), the choice and text
    fields' names."""
    out: dict[str, str] = {}
    for spec in NUMERIC:
        for word in (spec.name, spec.title, *spec.also):
            if out.setdefault(_squash(word), spec.name) != spec.name:
                raise AssertionError(f"{word!r} names two fields")
    for name in (*CHOICE_BY_NAME, *TEXT_FIELDS):
        out.setdefault(_squash(name), name)
    return out


def suggest(key: object) -> str | None:
    """The field that a key which is not one names in other words (``sodium`` -> ``na``,
    ``Na+`` -> ``na``, ``sodium_unit`` -> ``na_unit``), or None.  For a hint only: the
    key itself is refused, never read as that field."""
    text = str(key)
    if _squash(text) in _spellings():
        return _spellings()[_squash(text)]
    if text.lower().endswith("unit"):
        base = _spellings().get(_squash(text[:-4]))
        if base in BY_NAME:
            return f"{base}_unit"
    return None


def convert(field: str, value: float | str, from_unit: str, to_unit: str) -> float:
    """``value`` of the panel field ``field`` given in ``from_unit``, expressed in ``to_unit``.

    The same factors as the input boundary (``acidbase.units.FACTORS``), for surfaces that
    offer to convert a typed value.  Raises ``ValueError`` for a value that is not a number
    and ``UnitError`` for a unit the field does not accept.
    """
    kind = BY_NAME[field].kind
    number = float(value)
    return number * _units.factor(field, kind, from_unit) / _units.factor(field, kind, to_unit)


def also_ordinary(field: str, value: float | str, unit: str) -> tuple[str, ...]:
    """The field's other units in which ``value`` would lie inside its physiologic range.

    A value ordinary in two units is ambiguous (pO2 45: mm[Hg] or kPa?); surfaces use
    this to say so, never to convert.  Empty for a value that is not a number.
    """
    spec = BY_NAME[field]
    try:
        number = float(value)
    except (TypeError, ValueError):
        return ()
    lo, hi = spec.physiologic
    table = _units.FACTORS[spec.kind]
    same = table.get(_units.normalise(unit))
    # a unit with the same factor (mEq/L of a monovalent ion) reads the number the same
    return tuple(other for other, f in table.items()
                 if f != same and lo <= number * f <= hi)
