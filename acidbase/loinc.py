"""LOINC codes accepted as column headers in batch files.

The codes themselves are declared once, in ``acidbase.fields`` (``FieldSpec.loinc``);
this module only inverts that table (code -> field) and adds, for the batch
documentation, the specimen each code names.  A LOINC header maps a column to a
field and nothing more: the specimen in the code does not set the sample type
(give that in a ``sample_type`` column), because an export may label a column
with one code whatever the specimen of each row.

Specimens are those of the LOINC long common names in the project's
interoperability notes (Regenstrief Institute, LOINC, https://loinc.org), read
there from LOINC term pages and published value sets; codes listed in
``acidbase.fields.LOINC_FROM_MEMORY`` are from memory and must be verified
against a LOINC release file before they are relied on for anything but
column matching.
"""

from __future__ import annotations

from .fields import LOINC_FROM_MEMORY, NUMERIC

#: LOINC code -> field name, built from ``acidbase.fields.NUMERIC``.
HEADER_CODES: dict[str, str] = {code: spec.name for spec in NUMERIC for code in spec.loinc}

#: Specimen named by each code (documentation only; see the module docstring).
SPECIMEN: dict[str, str] = {
    # pH
    "2744-1": "arterial blood", "2746-6": "venous blood", "2745-8": "capillary blood",
    "11558-4": "blood",
    # pCO2
    "2019-8": "arterial blood", "2021-4": "venous blood", "11557-6": "blood",
    # bicarbonate / total CO2
    "1960-4": "arterial blood", "14627-4": "venous blood", "1959-6": "blood",
    "1963-8": "serum or plasma", "2028-9": "serum or plasma (total CO2)",
    # electrolytes
    "2951-2": "serum or plasma", "2947-0": "blood", "32717-1": "arterial blood",
    "39791-9": "venous blood",
    "2075-0": "serum or plasma", "41650-3": "arterial blood", "2069-3": "blood",
    "2823-3": "serum or plasma", "6298-4": "blood", "32713-0": "arterial blood",
    "39789-3": "venous blood",
    # chemistry
    "1751-7": "serum or plasma",
    "2524-7": "serum or plasma", "32693-4": "blood", "2518-9": "arterial blood",
    "2519-7": "venous blood",
    "2345-7": "serum or plasma (mass)", "14749-6": "serum or plasma (molar)",
    "2339-0": "blood (mass)", "15074-8": "blood (molar)",
    "22664-7": "serum or plasma (urea, molar)",
    "3094-0": "serum or plasma (mass)", "14937-7": "serum or plasma (molar)",
    "6299-2": "blood (mass)",
    "2692-2": "serum or plasma",
    "1994-3": "blood (ionised calcium)", "19123-9": "serum or plasma (mass)",
    "2601-3": "serum or plasma (molar)",
    "2777-1": "serum or plasma (mass)", "14879-1": "serum or plasma (molar)", "718-7": "blood",
    # oxygenation and context
    "2703-7": "arterial blood", "2705-2": "venous blood", "11556-8": "blood",
    "3150-0": "inhaled gas", "8310-5": "body temperature", "30525-0": "age",
}


#: Unit implied by the LOINC property of a code where it differs from, or must be
#: told apart from, the field's canonical unit: "[Mass/volume]" terms are reported
#: as mass concentrations, "[Moles/volume]" terms as substance concentrations
#: (property as in the long common names of the interoperability notes).  A column
#: under one of these headers with no unit given is read in this unit, never in
#: the canonical one: glucose 95 under 2345-7 is 95 mg/dL, not 95 mmol/L.
IMPLIED_UNIT: dict[str, str] = {
    "2345-7": "mg/dL", "2339-0": "mg/dL",     # glucose, mass
    "14749-6": "mmol/L", "15074-8": "mmol/L",  # glucose, molar
    "3094-0": "mg/dL", "6299-2": "mg/dL",     # urea nitrogen, mass
    "14937-7": "mmol/L",                        # urea nitrogen, molar
    "22664-7": "mmol/L",                        # urea, molar
    "2601-3": "mmol/L", "14879-1": "mmol/L",    # magnesium, phosphate, molar (from memory)
}

#: Codes whose property we hold only from memory to be a mass concentration
#: (phosphate 2777-1, magnesium 19123-9: value from memory; their molar twins
#: 14879-1 and 2601-3 likewise from memory) while the field's canonical unit is molar.  Reading mg/dL as mmol/L would be wrong by a factor
#: of 2.4 to 3.1 and still look plausible, so a column under these headers must
#: state its unit (``--unit``, a header suffix, or the mapping file).
UNIT_REQUIRED: frozenset[str] = frozenset({"2777-1", "19123-9"})


def field_for(code: str) -> str | None:
    """The field a LOINC code header maps to, or None."""
    return HEADER_CODES.get(code.strip())


def from_memory(code: str) -> bool:
    """True when the code was recorded from memory and awaits verification."""
    return code in LOINC_FROM_MEMORY


__all__ = ["HEADER_CODES", "IMPLIED_UNIT", "SPECIMEN", "UNIT_REQUIRED", "field_for", "from_memory",
           "header_table"]


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
