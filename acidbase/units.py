"""The few unit conversions, applied at the input boundary only.

Every quantity is converted to one canonical unit on the way in; the chemistry
never sees anything else.  Unit labels are UCUM codes (Regenstrief Institute,
"The Unified Code for Units of Measure", https://ucum.org/ucum); a handful of
common non-UCUM spellings seen in laboratory exports are accepted as aliases of
the same unit and normalised (this is a spelling fix, never a conversion).
"""

from __future__ import annotations

from collections.abc import Callable

from .errors import UnitError

#: 1 mm[Hg] = 0.133322 kPa (UCUM defines m[Hg] as 133.3220 kPa).
KPA_PER_MMHG = 0.133322
MMHG_PER_KPA = 1.0 / KPA_PER_MMHG

#: Molar masses used for mass <-> substance conversions.
#: Glucose C6H12O6 180.16 g/mol; urea CH4N2O 60.06 g/mol; urea nitrogen 2 x 14.007
#: = 28.01 g per mol of urea; phosphorus 30.97 g/mol; magnesium 24.305 g/mol (IUPAC
#: standard atomic weights).
GLUCOSE_G_PER_MOL = 180.16
UREA_G_PER_MOL = 60.06
UREA_N_G_PER_MOL = 28.014
PHOSPHORUS_G_PER_MOL = 30.974
MAGNESIUM_G_PER_MOL = 24.305

#: Spellings accepted on input and the UCUM code they mean.
ALIASES: dict[str, str] = {
    "mmhg": "mm[Hg]",
    "mm hg": "mm[Hg]",
    "torr": "mm[Hg]",
    "mm[hg]": "mm[Hg]",
    "kpa": "kPa",
    "mmol/l": "mmol/L",
    "meq/l": "mEq/L",
    "g/dl": "g/dL",
    "g/l": "g/L",
    "mg/dl": "mg/dL",
    "mosm/kg": "mosm/kg",
    "mosmol/kg": "mosm/kg",
    "%": "%",
    "1": "1",
    "fraction": "1",
    "cel": "Cel",
    "°c": "Cel",
    "degc": "Cel",
    "c": "Cel",
    "a": "a",
    "y": "a",
    "years": "a",
    "[ph]": "[pH]",
    "ph": "[pH]",
    # Degrees Fahrenheit: named so that its refusal can say what it is (NOT_TAKEN).
    "[degf]": "[degF]",
    "degf": "[degF]",
    "°f": "[degF]",
    "fahrenheit": "[degF]",
}

#: For each kind of quantity: unit -> factor that takes a value in that unit to
#: the kind's canonical unit (the first entry).
FACTORS: dict[str, dict[str, float]] = {
    "ph": {"[pH]": 1.0},
    "pressure": {"mm[Hg]": 1.0, "kPa": MMHG_PER_KPA},
    # mEq/L -> mmol/L divides by the ion's charge (IUPAC: an equivalent is the amount
    # of substance carrying one mole of charge): 1 for Na+ K+ Cl- HCO3- lactate,
    # 2 for Ca2+ and Mg2+.  Phosphate takes no mEq/L: its mean charge depends on pH.
    "electrolyte": {"mmol/L": 1.0, "mEq/L": 1.0},
    "calcium": {"mmol/L": 1.0, "mEq/L": 0.5},
    "albumin": {"g/L": 1.0, "g/dL": 10.0},
    "haemoglobin": {"g/dL": 1.0, "g/L": 0.1},
    "glucose": {"mmol/L": 1.0, "mg/dL": 10.0 / GLUCOSE_G_PER_MOL},
    "urea": {"mmol/L": 1.0, "mg/dL": 10.0 / UREA_G_PER_MOL},
    "bun": {"mg/dL": 1.0, "mmol/L": UREA_N_G_PER_MOL / 10.0},
    "phosphate": {"mmol/L": 1.0, "mg/dL": 10.0 / PHOSPHORUS_G_PER_MOL},
    "magnesium": {"mmol/L": 1.0, "mg/dL": 10.0 / MAGNESIUM_G_PER_MOL, "mEq/L": 0.5},
    "osmolality": {"mosm/kg": 1.0},
    "fraction": {"1": 1.0, "%": 0.01},
    "temperature": {"Cel": 1.0},
    "age": {"a": 1.0},
}


#: Units of a field's own quantity that acidbase does not take, and never converts: unit
#: -> (its name, the function taking a value in it to the canonical unit).  The function
#: only decides whether a refused number would be ordinary in that unit, for the hint;
#: no value is ever converted with it.  Degrees Fahrenheit: t/Cel = (t/[degF] - 32) / 1.8
#: (UCUM [ucum], "[degF]" defined as degF(5 K/9) on the Fahrenheit scale; value from
#: memory), docs/methods.md section 1.
NOT_TAKEN: dict[str, dict[str, tuple[str, Callable[[float], float]]]] = {
    "temperature": {"[degF]": ("degrees Fahrenheit", lambda f: (f - 32.0) / 1.8)},
}


def not_taken_hint(kind: str, unit: object) -> str:
    """The hint for a unit of the field's quantity that acidbase does not take ("" for any
    other unit): what it is, the unit to give instead, and that nothing is converted."""
    if not isinstance(unit, str):
        return ""
    code = normalise(unit)
    if code not in NOT_TAKEN.get(kind, {}):
        return ""
    name = NOT_TAKEN[kind][code][0]
    return (f"{code} is {name}, which acidbase does not take or convert: give the value "
            f"in {canonical_unit(kind)}")


def normalise(unit: str) -> str:
    """The UCUM code for a unit label, accepting the common aliases."""
    if not isinstance(unit, str):
        return repr(unit)
    text = unit.strip()
    return ALIASES.get(text.lower(), text)


def factor(field: str, kind: str, unit: str) -> float:
    """Factor taking a value in ``unit`` to the canonical unit of ``kind``.

    Raises ``UnitError`` naming the field and the units it accepts.
    """
    table = FACTORS[kind]
    if not isinstance(unit, str):
        raise UnitError(field=field, unit=repr(unit), accepted=tuple(table))
    code = normalise(unit)
    if code not in table:
        raise UnitError(field=field, unit=unit, accepted=tuple(table),
                        hint=not_taken_hint(kind, unit))
    return table[code]


def canonical_unit(kind: str) -> str:
    return next(iter(FACTORS[kind]))
