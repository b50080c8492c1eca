"""Single panel, batch of one and batch of many give the same answer (MetPy's
one-fixture-over-every-container habit; issue 2: "one panel is a batch of one").

The panels are the suite's published and edge panels (panels.catalogue); nothing here
has an expected value of its own: the three containers are checked against each other.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

import acidbase
from acidbase import api

from .conftest import CONTAINERS, interpret_as
from .panels import catalogue, columns_of, normal_e3

CATALOGUE = catalogue()


def _cases():
    for name in CATALOGUE:
        for kind in CONTAINERS[1:]:
            yield pytest.param(name, kind, id=f"{name}-{kind}")


def same_number(x: float | None, y: float | None) -> bool:
    if x is None or y is None:
        return x is y
    return math.isclose(x, y, rel_tol=1e-12, abs_tol=1e-12)


def assert_same(a: acidbase.Interpretation, b: acidbase.Interpretation) -> None:
    assert a.status == b.status
    assert a.disorders == b.disorders
    assert a.codes() == b.codes()
    assert [f.text for f in a.findings] == [f.text for f in b.findings]
    assert a.consistency.status == b.consistency.status
    assert a.derived.keys() == b.derived.keys()
    differ = {k for k in a.derived if not same_number(a.derived[k], b.derived[k])}
    assert not differ, {k: (a.derived[k], b.derived[k]) for k in differ}


@pytest.mark.parametrize(("name", "kind"), list(_cases()))
def test_every_container_gives_the_single_panel_reading(name, kind):
    panel = CATALOGUE[name]
    assert_same(interpret_as(kind, panel), interpret_as("single", panel))


def test_one_batch_of_the_whole_catalogue_matches_each_panel_alone():
    panels = list(CATALOGUE.values())
    res = acidbase.interpret_many(columns_of(panels))
    for i, panel in enumerate(panels):
        assert_same(res.interpretation(i), acidbase.interpret(panel))


def test_a_row_does_not_borrow_a_neighbours_measured_osmolality():
    """A panel without measured osmolality reads the same alone and beside one that has it."""
    without = CATALOGUE["E23 without measured osmolality"]
    beside = acidbase.interpret_many(
        columns_of([without, CATALOGUE["E23 with measured osmolality"]])
    )
    assert_same(beside.interpretation(0), acidbase.interpret(without))


def test_a_row_does_not_borrow_a_neighbours_albumin():
    """The Story case's albumin must not correct the gap of a neighbour that has none."""
    alone = normal_e3()
    beside = acidbase.interpret_many(columns_of([CATALOGUE["E17 Story 2016 case"], alone]))
    assert_same(beside.interpretation(1), acidbase.interpret(alone))


def test_settings_apply_equally_in_every_container():
    # Figge 1998 with reference albumin 40 g/L (methods 14, common teaching) on the Story case.
    settings = acidbase.Settings(reference_albumin_g_l=40.0)
    panel = CATALOGUE["E17 Story 2016 case"]
    single = interpret_as("single", panel, settings)
    for kind in CONTAINERS[1:]:
        assert_same(interpret_as(kind, panel, settings), single)


def test_a_batch_spanning_several_kernel_slices_matches_each_panel_alone():
    """Rows on either side of every slice boundary read as they do alone."""
    slice_rows = getattr(api, "SLICE_ROWS", 32768)
    panels = list(CATALOGUE.values())
    reps = (2 * slice_rows) // len(panels) + 2
    cols = {k: np.tile(v, reps) for k, v in columns_of(panels).items()}
    res = acidbase.interpret_many(cols)
    n = res.n
    rows = {0, n - 1} | {b + d for b in range(slice_rows, n, slice_rows) for d in (-1, 0, 1)}
    for i in sorted(r for r in rows if 0 <= r < n):
        assert_same(res.interpretation(i), acidbase.interpret(panels[i % len(panels)]))
