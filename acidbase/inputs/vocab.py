"""Choice vocabularies, declared once.

Every categorical input the library reads (sample type, HCO3- source, ...) is a
``StrEnum`` here and one ``Choice`` row in ``CHOICES``; the CLI's ``choices=``,
``Panel``'s ``Literal`` types, the file reader and the app's selects are built
from these rows.  A new choice input is one enum and one row.

How a choice cell is read (the same on every path, ``acidbase.inputs.cells``):
case and surrounding spaces are ignored, and inner runs of spaces, hyphens and
underscores count as one underscore ("Arterial", " VENOUS ", "mixed-venous");
an empty cell (or a declared missing token) takes the default; any other text,
a number or a yes/no value is refused, naming the field and the words allowed.
"""

from __future__ import annotations

from dataclasses import dataclass
from enum import StrEnum


class SampleType(StrEnum):
    """Where the blood came from; selects the reference intervals (``acidbase.reference``)."""

    ARTERIAL = "arterial"
    VENOUS = "venous"
    CAPILLARY = "capillary"
    UNKNOWN = "unknown"


class Hco3Source(StrEnum):
    """Where the HCO3- value comes from."""

    ANALYSER = "analyser"
    """Calculated by the blood-gas analyser from its pH and pCO2."""
    CHEMISTRY = "chemistry"
    """A chemistry analyser's measured total CO2."""
    UNKNOWN = "unknown"


class Pregnancy(StrEnum):
    """Whether the patient is pregnant; selects third-trimester intervals (``acidbase.reference``)."""

    UNKNOWN = "unknown"
    NO = "no"
    THIRD_TRIMESTER = "third_trimester"


@dataclass(frozen=True)
class Choice:
    """One categorical input: its field name, title, words and default."""

    name: str
    """API, CLI (``--name``) and file column name."""
    title: str
    """The trade's name, as printed."""
    vocabulary: type[StrEnum]
    default: str
    help: str = ""

    @property
    def words(self) -> tuple[str, ...]:
        """The allowed words, in declaration order (the kernel's integer codes)."""
        return tuple(str(v) for v in self.vocabulary)

    @property
    def default_code(self) -> int:
        return self.words.index(self.default)


#: Every choice input, in the order forms and files list them.
CHOICES: tuple[Choice, ...] = (
    Choice("sample_type", "Sample type", SampleType, "unknown",
           "arterial, venous or capillary blood; selects the reference intervals"),
    Choice("hco3_source", "HCO3- source", Hco3Source, "unknown",
           "analyser: HCO3- calculated by the blood-gas analyser; chemistry: measured "
           "total CO2"),
    Choice("pregnancy", "Pregnancy", Pregnancy, "unknown",
           "third_trimester: read pH, pCO2 and HCO3- against published third-trimester "
           "intervals; no and unknown use the adult intervals"),
)

CHOICE_BY_NAME: dict[str, Choice] = {c.name: c for c in CHOICES}


def normalise_word(text: str) -> str:
    """The spelling a choice cell is compared in (see the module docstring)."""
    out = []
    gap = False
    for ch in text.strip().lower():
        if ch in " \t-_":
            gap = True
            continue
        if gap and out:
            out.append("_")
        gap = False
        out.append(ch)
    return "".join(out)


__all__ = ["CHOICES", "CHOICE_BY_NAME", "Choice", "Hco3Source", "Pregnancy", "SampleType",
           "normalise_word"]
