"""Words for people: unit labels, short titles, the form's order and measured numbers
as reported (display only).

Files and the library keep UCUM codes (``mm[Hg]``, ``1``, ``a``); the screen shows
what a respiratory therapist reads on the analyser printout.
"""

from __future__ import annotations

from acidbase.chemistry import PH_MIN_DECIMALS, printed_half_step
from acidbase.fields import BY_NAME, NUMERIC
from acidbase.rules import number_text

#: UCUM code -> the label on screen.  A unit not listed is shown as its code.
UNIT_LABELS: dict[str, str] = {
    "mm[Hg]": "mmHg",
    "[pH]": "",
    "1": "fraction",
    "a": "years",
    "Cel": "°C",
    "mosm/kg": "mOsm/kg",
}

#: Titles too long for the form's title column, shortened for the form only.
SHORT_TITLES: dict[str, str] = {
    "bun": "BUN",
    "ica": "Ionised Ca",  # "Ionised Ca2+" filled the column and ran into its value
    "pb": "Barometric",
    "temperature": "Temperature",
}

#: The gas as the analyser prints it, then what the reading of the gas needs next.
GAS: tuple[str, ...] = ("ph", "pco2", "po2", "hco3")
AFTER_GAS: tuple[str, ...] = ("fio2",)
#: After the sample type: the electrolytes, then the rest.
ELECTROLYTES: tuple[str, ...] = ("na", "k", "cl", "ica", "lactate", "glucose", "hb")


#: Answer words too long for the form's answer column, shortened on screen only (the
#: library and files keep the word itself).
CHOICE_LABELS: dict[str, str] = {"third_trimester": "3rd trimester"}


def choice_label(word: str) -> str:
    """How an answer word is shown in the form ("3rd trimester" for ``third_trimester``)."""
    return CHOICE_LABELS.get(word, word)


def unit_label(unit: str) -> str:
    """How a unit is shown on screen ("mmHg" for ``mm[Hg]``, nothing for pH)."""
    return UNIT_LABELS.get(unit, unit)


def with_unit(value: object, unit: str) -> str:
    """``"60 mmHg"``; a value without a unit label alone (pH)."""
    label = unit_label(unit)
    return f"{value} {label}" if label else str(value)


def form_title(name: str) -> str:
    return SHORT_TITLES.get(name, BY_NAME[name].title)


def on_screen(text: str) -> str:
    """The library's text with unit codes as people write them (screen only)."""
    return text.replace("mm[Hg]", "mmHg")


def rest() -> tuple[str, ...]:
    """Every other numeric field, in the library's order (new fields land here)."""
    shown = set(GAS + AFTER_GAS + ELECTROLYTES)
    return tuple(s.name for s in NUMERIC if s.name not in shown)


#: The most decimals a value is shown with (``printed_half_step``'s own default).
MOST_DECIMALS = 3


def reported(name: str, value: float, typed: object = None, decimal: str = ".") -> str:
    """A measured value at the precision it was reported with: the decimals its number
    carries, as the engine reads a printed value (``chemistry.printed_half_step``), pH to
    at least two (``chemistry.PH_MIN_DECIMALS``): 7.40 is "7.40", 5.3 "5.3", 40 "40".

    ``typed``: the text it was keyed or read from, with its ``decimal`` mark; when the one
    reader reads it as this very value, its trailing zeros count too ("24.0" is "24.0",
    not "24": a measured value is shown as reported)."""
    least = PH_MIN_DECIMALS if name == "ph" else 0
    step = float(printed_half_step(value, least, MOST_DECIMALS))
    # the step is half of 10^-d for the decimals d it found: look d up, compute nothing
    decimals = next((d for d in range(least, MOST_DECIMALS + 1) if step == 0.5 * 10.0 ** -d),
                    MOST_DECIMALS)
    decimals = max(decimals, typed_decimals(typed, value, decimal))
    return number_text(value, f".{decimals}f")


def typed_decimals(typed: object, value: float, decimal: str = ".") -> int:
    """The digits after the decimal mark of ``typed`` when the one reader reads it as
    ``value`` (0 otherwise: a number without text, or text read as another number)."""
    if not isinstance(typed, str):
        return 0
    from .sitting import typed_number

    text = typed.strip()
    if decimal not in text or typed_number(text, decimal) != value:
        return 0
    fraction = text.split(decimal, 1)[1]
    return len(fraction) - len(fraction.lstrip("0123456789"))
