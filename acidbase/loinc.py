"""LOINC codes read as column headers, each with its specimen and the unit it implies.

The codes are declared once, in ``acidbase.fields`` (``FieldSpec.loinc``); this
module inverts that table (code -> field) and adds what each code says beyond
the field: its LOINC system (specimen), the unit of its property where that
differs from the field's canonical one, and the HCO3- source a bicarbonate or
total CO2 code implies.

Source of every row: the LOINC long common name (component, property, system,
scale) as published in FHIR implementation guides and terminology value sets,
gathered in the project's notes (research/loinc.md, sections 1.2 and 1.3):
HL7 Germany GECCO profiles (for example the PaO2 profile's capillary slice
2704-5), Medizininformatik-Initiative value sets on LOINC 2.75, DICOM CID 3524,
VSAC (Regenstrief Institute, LOINC, https://loinc.org).  They were not checked
against a LOINC release file; ``LOINC_FROM_MEMORY`` lists none.

How the specimen is used (docs/input.md, "LOINC headers"):

* A code for arterial, venous, capillary, mixed venous or central venous blood
  sets the row's sample type when the row has no sample type of its own (mixed
  and central venous blood are read with the venous intervals: the tool has no
  intervals of their own).  A row whose ``sample_type`` contradicts the code, or
  whose filled columns name two specimens, is refused with a ``specimen_conflict``
  problem: neither reading is silently chosen.
* Several columns for one field are allowed when their codes name different
  specimens (one column per specimen, as laboratory systems export); a row
  reads the one that is filled, and is refused when two are.
* 1960-4, 14627-4, 1959-6 (bicarbonate in blood) imply ``hco3_source``
  analyser; 1963-8 (bicarbonate in serum or plasma) and 2028-9 (total CO2)
  imply chemistry, unless the row says otherwise (a contradiction is refused).
"""

from __future__ import annotations

from .fields import LOINC_FROM_MEMORY, NUMERIC

#: LOINC code -> field name, built from ``acidbase.fields.NUMERIC``.
HEADER_CODES: dict[str, str] = {code: spec.name for spec in NUMERIC for code in spec.loinc}

#: LOINC system (specimen) of each code, as in its long common name.
SYSTEM: dict[str, str] = {
    # pH
    "2744-1": "BldA", "2746-6": "BldV", "2745-8": "BldC", "11558-4": "Bld",
    "19213-8": "BldMV", "97536-7": "BldCV",
    # pCO2
    "2019-8": "BldA", "2021-4": "BldV", "11557-6": "Bld", "2020-6": "BldC",
    "19212-0": "BldMV", "97538-3": "BldCV",
    # bicarbonate / total CO2
    "1960-4": "BldA", "14627-4": "BldV", "1959-6": "Bld", "1963-8": "Ser/Plas",
    "2028-9": "Ser/Plas",
    # electrolytes
    "2951-2": "Ser/Plas", "2947-0": "Bld", "32717-1": "BldA", "39791-9": "BldV",
    "39792-7": "BldC",
    "2075-0": "Ser/Plas", "41650-3": "BldA", "2069-3": "Bld", "41649-5": "BldV",
    "51590-8": "BldC",
    "2823-3": "Ser/Plas", "6298-4": "Bld", "32713-0": "BldA", "39789-3": "BldV",
    "39790-1": "BldC",
    # chemistry
    "1751-7": "Ser/Plas",
    "2524-7": "Ser/Plas", "32693-4": "Bld", "2518-9": "BldA", "2519-7": "BldV",
    "19239-3": "BldC", "19240-1": "BldMV",
    "2345-7": "Ser/Plas", "14749-6": "Ser/Plas", "2339-0": "Bld", "15074-8": "Bld",
    "22664-7": "Ser/Plas", "3091-6": "Ser/Plas",
    "3094-0": "Ser/Plas", "14937-7": "Ser/Plas", "6299-2": "Bld",
    "2692-2": "Ser/Plas",
    "1994-3": "Bld", "34581-9": "BldA", "41645-3": "BldV", "41644-6": "BldC",
    "41646-1": "BldMV", "1995-0": "Ser/Plas",
    "19123-9": "Ser/Plas", "2601-3": "Ser/Plas",
    "2777-1": "Ser/Plas", "14879-1": "Ser/Plas",
    "718-7": "Bld", "30313-1": "BldA", "30350-3": "BldV", "30352-9": "BldC",
    # oxygenation and context
    "2703-7": "BldA", "2705-2": "BldV", "11556-8": "Bld", "2704-5": "BldC",
    "3150-0": "Inhl gas", "8310-5": "^Patient", "30525-0": "^Patient",
}

#: The words for each LOINC system.
SYSTEM_WORDS: dict[str, str] = {
    "BldA": "arterial blood", "BldV": "venous blood", "BldC": "capillary blood",
    "BldMV": "mixed venous blood", "BldCV": "central venous blood", "Bld": "blood",
    "Ser/Plas": "serum or plasma", "Inhl gas": "inhaled gas", "^Patient": "patient",
}

#: The sample type a LOINC system sets (systems absent here set none).
SAMPLE_TYPE_OF_SYSTEM: dict[str, str] = {
    "BldA": "arterial", "BldV": "venous", "BldMV": "venous", "BldCV": "venous",
    "BldC": "capillary",
}

#: Specimen named by each code, in words (documentation and messages).
SPECIMEN: dict[str, str] = {code: SYSTEM_WORDS[system] for code, system in SYSTEM.items()}

#: The HCO3- source a code implies: bicarbonate in blood is the blood-gas
#: analyser's calculation; bicarbonate in serum or plasma and total CO2 are a
#: chemistry analyser's measurement (research/loinc.md 1.3, recommendation 4).
HCO3_SOURCE_OF_CODE: dict[str, str] = {
    "1960-4": "analyser", "14627-4": "analyser", "1959-6": "analyser",
    "1963-8": "chemistry", "2028-9": "chemistry",
}

#: Unit implied by the LOINC property (or the usual unit) of a code where it differs
#: from, or must be told apart from, the field's canonical unit: "[Mass/volume]"
#: terms are mass concentrations, "[Moles/volume]" terms substance concentrations.
#: A column under one of these headers with no unit given is read in this unit,
#: never in the canonical one: glucose 95 under 2345-7 is 95 mg/dL, not mmol/L.
IMPLIED_UNIT: dict[str, str] = {
    "2345-7": "mg/dL", "2339-0": "mg/dL",     # glucose, mass
    "14749-6": "mmol/L", "15074-8": "mmol/L",  # glucose, molar
    "3094-0": "mg/dL", "6299-2": "mg/dL",     # urea nitrogen, mass
    "14937-7": "mmol/L",                        # urea nitrogen, molar
    "22664-7": "mmol/L",                        # urea, molar
    "3091-6": "mg/dL",                          # urea, mass
    "2601-3": "mmol/L", "14879-1": "mmol/L",    # magnesium, phosphate, molar
    # FiO2 3150-0 "Inhaled oxygen concentration": the GECCO profile fixes the unit
    # to % (research/loinc.md 1.2), so 40 under this header is 40 %, not 40 x 1.
    "3150-0": "%",
    # Albumin 1751-7 [Mass/volume]: g/dL is the unit the published profiles permit
    # (VUL, GECCO; research/loinc.md 1.2); g/L exports must say so.
    "1751-7": "g/dL",
    "718-7": "g/dL", "30313-1": "g/dL", "30350-3": "g/dL", "30352-9": "g/dL",
}

#: Codes whose property is a mass concentration while the field's canonical unit is
#: molar (phosphate 2777-1, magnesium 19123-9, mg/dL in the published value sets).
#: Reading mg/dL as mmol/L would be wrong by a factor of 2.4 to 3.1 and still look
#: plausible, so a column under these headers must state its unit.
UNIT_REQUIRED: frozenset[str] = frozenset({"2777-1", "19123-9"})

#: Codes that look like a field but are never read as it: the value is adjusted
#: or derived, not the measured value the formulas need (research/loinc.md 1.3).
NOT_READ: dict[str, str] = {
    **dict.fromkeys(("33254-4", "39486-6", "49701-6", "50980-2", "97537-5"),
                    "pH adjusted to the patient's temperature, not the value measured at 37 degC"),
    **dict.fromkeys(("32771-8", "40619-9", "40620-7", "34705-4", "50981-0"),
                    "pCO2 adjusted to the patient's temperature, not the value measured at "
                    "37 degC"),
    "19255-9": "pO2 adjusted to the patient's temperature, not the value measured at 37 degC",
    "19230-2": "standard bicarbonate (recalculated to pCO2 40 mm[Hg]), not the actual HCO3-",
    "19235-1": "standard base excess, a derived value (the tool derives its own)",
    **dict.fromkeys(("47598-8", "53138-4", "53139-2", "53140-0", "19072-8"),
                    "ionised calcium adjusted to pH 7.4, not the value measured"),
    "18182-6": "calculated osmolality, not the measured osmolality",
}


def field_for(code: str) -> str | None:
    """The field a LOINC code header maps to, or None."""
    return HEADER_CODES.get(code.strip())


def sample_type_for(code: str) -> str | None:
    """The sample type a code's specimen sets, or None (blood, serum, other)."""
    return SAMPLE_TYPE_OF_SYSTEM.get(SYSTEM.get(code.strip(), ""))


def from_memory(code: str) -> bool:
    """True when the code was recorded from memory and awaits verification."""
    return code in LOINC_FROM_MEMORY


def header_table() -> str:
    """The Markdown table of docs/batch.md ("LOINC codes read as headers")."""
    from .fields import BY_NAME

    lines = ["| field | code | specimen | unit when none is stated |", "|---|---|---|---|"]
    for code, name in HEADER_CODES.items():
        specimen = SPECIMEN[code] + (" (memory)" if from_memory(code) else "")
        if code in UNIT_REQUIRED:
            unit = "must be stated"
        else:
            unit = IMPLIED_UNIT.get(code, BY_NAME[name].unit)
        lines.append(f"| {name} | {code} | {specimen} | {unit} |")
    return "\n".join(lines)


__all__ = ["HCO3_SOURCE_OF_CODE", "HEADER_CODES", "IMPLIED_UNIT", "NOT_READ", "SAMPLE_TYPE_OF_SYSTEM",
           "SPECIMEN", "SYSTEM", "UNIT_REQUIRED", "field_for", "from_memory", "header_table",
           "sample_type_for"]
