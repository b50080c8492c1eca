"""The command a command line names, read before anything else is loaded (imported by
``acidbase.process``, which must not load numpy, and by ``acidbase.cli``)."""

from __future__ import annotations

from collections.abc import Sequence


def command_word(argv: Sequence[str]) -> str:
    """The command word of ``argv``: its first word that is not an option (the top level
    takes no option with a value), or "" when there is none (``acidbase --help``)."""
    return next((a for a in argv if not a.startswith("-")), "")
