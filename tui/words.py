"""What the app says about a refused or doubtful value, in its own short words.

Built from the engine's structured errors (type, field, value, unit, range), never
by reading its message back; a refusal of another kind is shown as the engine
words it.
"""

from __future__ import annotations

from pydantic import ValidationError

import acidbase
from acidbase.fields import BY_NAME

from .labels import on_screen, unit_label


def f2_hint(name: str, value: object, unit: str) -> str:
    """"press F2 for kPa" when the value is out of the ordinary in its unit and ordinary in
    the field's other unit (the physiologic ranges of ``acidbase.fields``).

    A value ordinary as it stands gets no hint: nearly every pO2 in mm[Hg] is also a
    plausible number of kPa, and a hint under each would teach users to ignore it.
    """
    spec = BY_NAME.get(name)
    if spec is None:
        return ""
    try:
        canonical = acidbase.convert(name, value, unit, spec.unit)
    except ValueError:  # not a number, or not a unit of the field (UnitError)
        return ""
    low, high = spec.physiologic
    if low <= canonical <= high:
        return ""
    others = acidbase.also_ordinary(name, value, unit)
    return f"press F2 for {unit_label(others[0]) or others[0]}" if others else ""


def refusal(error: dict, engine_line: str, mixed_marks: bool = False) -> str:
    """One refused value in the app's words: "refused: not in 8-200 mmHg; press F2 for kPa".

    The value itself is in the field beside it.  ``mixed_marks``: the form's values use
    a decimal comma and a decimal point (``sitting.typed_decimal``), so they were read
    with a point.
    """
    return f"refused: {refusal_words(error, engine_line, mixed_marks)}"


def refusal_words(error: dict, engine_line: str, mixed_marks: bool = False) -> str:
    """``refusal`` without its leading "refused: " (for a line that names the field)."""
    ctx = error.get("ctx") or {}
    kind = error.get("type")
    if kind == "outside_accepted_range" and {"field", "value", "unit", "low", "high"} <= set(ctx):
        unit = ctx["unit"]
        label = unit_label(unit)
        where = f"{ctx['low']:.4g}-{ctx['high']:.4g}" + (f" {label}" if label else "")
        line = f"not in {where}"
        hint = f2_hint(ctx["field"], ctx["value"], unit)
        return f"{line}; {hint}" if hint else line
    if kind == "float_parsing":
        return f"{error.get('input')!r} is not a number"
    typed = error.get("input")
    if kind == "not_a_number" and mixed_marks and isinstance(typed, str) and "," in typed:
        # The library's hint names --decimal, an option the form cannot take: the form's
        # mark is that of its values, one mark for the whole panel.
        return "other values have a decimal point; type every value with the same decimal mark"
    return on_screen(engine_line)


def titled_refusals(error: ValidationError, mixed_marks: bool = False) -> list[str]:
    """Each refusal of a panel in the app's words, led by its field's title where the line
    does not stand beside the field ("pCO2 not in 8-250 mmHg; press F2 for kPa"), and the
    required values not given ("needed: HCO3-")."""
    lines, missing = [], []
    for e, line in zip(error.errors(include_url=False), acidbase.describe(error)):
        name = str(e["loc"][0]) if e["loc"] else ""
        title = BY_NAME[name].title if name in BY_NAME else ""
        if e["type"] == "missing":
            missing.append(title or name)
            continue
        words = refusal_words(e, line, mixed_marks)
        # the library's own sentence (another kind of refusal) names the field already
        lines.append(words if words == on_screen(line) or not title else f"{title} {words}")
    if missing:
        lines.append("needed: " + ", ".join(missing))
    return lines


def problems_by_field(error: ValidationError, mixed_marks: bool = False
                      ) -> tuple[dict[str, list[str]], list[str]]:
    """The app's lines keyed by field ("panel" for the whole), and the missing fields.

    ``acidbase.describe`` gives one line per error, in the order of ``errors()``.
    """
    by_field: dict[str, list[str]] = {}
    missing: list[str] = []
    for e, line in zip(error.errors(include_url=False), acidbase.describe(error)):
        name = str(e["loc"][0]) if e["loc"] else "panel"
        if e["type"] == "missing":
            missing.append(name)
        else:
            by_field.setdefault(name, []).append(refusal(e, line, mixed_marks))
    return by_field, missing
