"""The container fixture: every behaviour checked as a single panel, a batch of one and
a batch of many (after MetPy's habit of running each test over every container type)."""

from __future__ import annotations

from collections.abc import Callable

import pytest

import acidbase

from .panels import catalogue, columns_of

CONTAINERS = ("single", "batch of one", "batch of many")

#: Neighbours for the "batch of many" run: the target panel sits between them, so a
#: result that leaks between rows, or depends on row position, shows.
_NEIGHBOURS = list(catalogue().values())
_POSITION = len(_NEIGHBOURS) // 2

Interpreter = Callable[..., acidbase.Interpretation]


def interpret_as(
    kind: str, panel: acidbase.Panel, settings: acidbase.Settings | None = None
) -> acidbase.Interpretation:
    """Interpret ``panel`` through one container."""
    if kind == "single":
        return acidbase.interpret(panel, settings)
    if kind == "batch of one":
        cols, units = panel.columns()
        return acidbase.interpret_many(cols, units, settings).interpretation(0)
    if kind == "batch of many":
        rows = _NEIGHBOURS[:_POSITION] + [panel] + _NEIGHBOURS[_POSITION:]
        return acidbase.interpret_many(columns_of(rows), None, settings).interpretation(_POSITION)
    raise ValueError(kind)


@pytest.fixture(params=CONTAINERS)
def interpret(request) -> Interpreter:
    """``interpret(panel, settings=None)`` through the container of this run."""
    kind = request.param

    def run(panel: acidbase.Panel, settings: acidbase.Settings | None = None):
        return interpret_as(kind, panel, settings)

    return run
