"""Generate docs/rules.md from the rule table: ``python -m acidbase.docs``.

A test compares the committed file with this output, so the docs cannot drift.
"""

from __future__ import annotations

import sys
from pathlib import Path

from .references import CITATIONS
from .rules import RULES, SECTIONS

HEADINGS = {
    "trust": "Can these numbers be trusted?",
    "process": "Which acid-base processes are present?",
    "detail": "What follows: derived values",
}


def _template(t: object) -> str:
    if callable(t):
        doc = " ".join((t.__doc__ or "").split())  # one line, as in the list
        return doc or "(worded from the row's values)"
    return str(t)


def _example(example: object) -> str:
    """One example panel as `key=value` pairs, in the order given."""
    return "`" + ", ".join(f"{k}={v:g}" if isinstance(v, float) else f"{k}={v}"
                           for k, v in dict(example).items()) + "`"


def rules_markdown() -> str:
    out = [
        "# Rules",
        "",
        "Generated from `acidbase/rules.py` by `python -m acidbase.docs`; do not edit by hand.",
        "Every finding the tool can make, in the order of the three questions. Codes are stable.",
        "Sources are keys into the bibliography below (`acidbase/references.py`).",
    ]
    used: list[str] = []
    for section in SECTIONS:
        out += ["", f"## {HEADINGS[section]}", ""]
        for r in RULES:
            if r.section != section:
                continue
            out.append(f"### `{r.code}`: {r.title} ({r.severity})")
            out.append("")
            out.append(f"- Statement: {_template(r.text)}")
            out.append(f"- Working: {_template(r.working)}")
            if r.why:
                out.append(f"- Why: {r.why}")
            out.append("- Sources: " + ", ".join(f"`{k}`" for k in r.refs))
            for ex in r.fires:
                out.append(f"- Fires on: {_example(ex)}")
            for ex in r.quiet:
                out.append(f"- Quiet on: {_example(ex)}")
            if not r.quiet:
                out.append("- Quiet on: none (fires on every panel that is read)")
            out.append("")
            used += [k for k in r.refs if k not in used]
    out += ["## Bibliography", ""]
    for key in sorted(CITATIONS):
        out.append(f"- `{key}`: {CITATIONS[key].full()}")
    return "\n".join(out) + "\n"


def main(argv: list[str] | None = None) -> int:
    target = Path(argv[0] if argv else "docs/rules.md")
    target.write_text(rules_markdown(), encoding="utf-8")
    print(f"wrote {target}")
    return 0


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main(sys.argv[1:]))
