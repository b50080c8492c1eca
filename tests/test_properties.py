"""Property tests (hypothesis): odd input never escapes the model's validation error, and
the single-panel and batch paths agree on every panel.
"""

from __future__ import annotations

import math

import numpy as np
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from pydantic import ValidationError

import acidbase as ab
from acidbase.fields import BY_NAME, NUMERIC
from acidbase.model import describe_fields

anything = st.one_of(
    st.none(), st.floats(allow_nan=True, allow_infinity=True), st.integers(-10**30, 10**30),
    st.text(max_size=8), st.booleans(), st.lists(st.integers(), max_size=2),
)


@settings(max_examples=300, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.dictionaries(st.sampled_from([s.name for s in NUMERIC] + [
    "sample_type", "hco3_source", "pco2_unit", "albumin_unit", "not_a_field"]), anything,
    max_size=8))
def test_no_input_raises_anything_but_the_validation_error(data):
    try:
        panel = ab.Panel.model_validate(data)
    except ValidationError as e:
        pairs = describe_fields(e)
        assert len(pairs) == e.error_count() == len(ab.describe(e))  # a line per problem
        for loc, line in pairs:
            spec = BY_NAME.get(loc)
            # each line names what it is about: a numeric field by title and name first,
            # another field by its name, the panel as a whole as "panel"; none is
            # pydantic's own dump
            if spec is not None:
                assert line.startswith(f"{spec.title} ({loc})"), line
            elif loc:
                assert f"({loc})" in line or line.startswith(f"{loc}:"), line
            else:
                assert line.startswith("panel"), line
            assert "errors.pydantic.dev" not in line and "type=" not in line
        missing = {s.name for s in NUMERIC if s.required and s.name not in data}
        named = {loc for loc, line in pairs if line.endswith("is required and was not given")}
        assert missing <= named
        return
    ab.interpret(panel)


def _panel_strategy():
    def value(spec):
        lo, hi = spec.accepted
        return st.floats(lo, hi, allow_nan=False)
    required = {s.name: value(s) for s in NUMERIC if s.required}
    optional = {s.name: value(s) for s in NUMERIC if not s.required and s.name != "bun"}
    return st.fixed_dictionaries(required, optional=optional | {
        "sample_type": st.sampled_from(["arterial", "venous", "capillary", "unknown"]),
        "hco3_source": st.sampled_from(["analyser", "chemistry", "unknown"]),
    })


def _columns(panels):
    """Panels (dicts) as the columns interpret_many takes."""
    columns = {}
    for spec in NUMERIC:
        columns[spec.name] = np.array([p.get(spec.name, np.nan) for p in panels], dtype=float)
    for name in ("sample_type", "hco3_source"):
        columns[name] = np.array([p.get(name, "unknown") for p in panels], dtype=object)
    return columns


def _same(a, b):
    if a is None or b is None:
        return a is None and b is None
    return math.isclose(a, b, rel_tol=1e-12, abs_tol=1e-12)


@settings(max_examples=40, deadline=None)
@given(st.lists(_panel_strategy(), min_size=1, max_size=12))
def test_interpret_and_interpret_many_agree_on_every_panel(panels):
    """Row i of a batch equals interpret(panel_i): one code path for both."""
    many = ab.interpret_many(_columns(panels))
    for i, p in enumerate(panels):
        one = ab.interpret(ab.Panel(**p))
        row = many.interpretation(i)
        assert one.status == row.status
        assert one.codes() == row.codes()
        assert one.disorders == row.disorders
        assert all(_same(one.derived[k], row.derived[k]) for k in one.derived)


@settings(max_examples=15, deadline=None)
@given(st.lists(_panel_strategy(), min_size=5, max_size=30))
def test_slicing_a_batch_changes_no_row(panels):
    """interpret_many computes long batches in slices on threads; rows must not move."""
    import acidbase.api as api

    columns = _columns(panels)
    whole = ab.interpret_many(columns)
    saved = api.SLICE_ROWS
    api.SLICE_ROWS = 4
    try:
        sliced = ab.interpret_many(columns)
    finally:
        api.SLICE_ROWS = saved
    assert len(sliced.parts) > 1
    a, b = whole.table(), sliced.table()
    assert list(a) == list(b)
    for key in a:
        if a[key].dtype == object:
            assert a[key].tolist() == b[key].tolist(), key
        else:
            np.testing.assert_array_equal(a[key], b[key], err_msg=key)
