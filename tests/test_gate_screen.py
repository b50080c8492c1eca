"""The gate's screening of a chunk: each row's refusals as that row alone gets them.

``screen`` builds the problems of a chunk's refused rows in one go per field (the
unit, range and hints worked out once; a refused text's hint once per distinct text,
acidbase/inputs/panel.py).  A single panel is a batch of one (docs/input.md), so the
oracle here is ``screen`` of each row alone: the same problems, in the same order,
with the same sentences.  The cells are invented (no source needed: the test checks
that a chunk and its rows agree, not a clinical value); the accepted ranges are
acidbase/fields.py's.
"""

from __future__ import annotations

import numpy as np
import pyarrow as pa
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from acidbase.inputs.panel import describe_value, describe_values, screen
from acidbase.fields import BY_NAME

_CELLS = {
    "ph": ["7.40", "9.40", "5.1", "7.21 L", "<7", "haem", "", None, "nan", "7,4", "-7.4"],
    "pco2": ["40", "5.3", "4.9", "400", "x", None, "1e400", " 35 ", ">=80"],
    "hco3": ["24", "0", "99", "24 H", "NA", None, "١٢"],
    "k": ["4.0", "haem", "haem", "0.1", "30", "<0.5", None, "1_400"],
    "lactate": ["1.2", "<0.3", "40", "  ", "haem", None],
    "sample_type": ["arterial", "Venous", "capillary?", "", None, "="],
}


@st.composite
def chunks(draw):
    n = draw(st.integers(1, 30))
    return {k: draw(st.lists(st.sampled_from(v), min_size=n, max_size=n))
            for k, v in _CELLS.items()}


def _rows_alone(cols: dict[str, list], units: dict[str, str]) -> list[list[str]]:
    n = len(cols["ph"])
    out = []
    for i in range(n):
        one = {k: pa.array([v[i]], pa.string()) for k, v in cols.items()}
        s = screen(one, units)
        out.append([str(p) for p in s.problems.get(0, [])])
    return out


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(chunks(), st.sampled_from([{}, {"pco2": "kPa"}, {"k": "mEq/L"}]))
def test_a_chunks_refusals_are_each_rows_alone(cols, units):
    """The same problems, order and sentences for each row of a chunk as for the row alone;
    the same refused rows."""
    units = {k: u for k, u in units.items()
             if u in BY_NAME[k].units}  # only units the field accepts
    chunk = screen({k: pa.array(v, pa.string()) for k, v in cols.items()}, units)
    alone = _rows_alone(cols, units)
    got = [[str(p) for p in chunk.problems.get(i, [])] for i in range(len(alone))]
    assert got == alone
    assert chunk.refused.tolist() == [bool(a) for a in alone]


@pytest.mark.parametrize("unit", ["mm[Hg]", "kPa"])
def test_describe_values_is_describe_value_for_each(unit):
    """The problems of several refused values are each value's own (value, range, hint)."""
    spec = BY_NAME["pco2"]
    values = np.array([5.3, 400.0, np.inf, 0.1, 45.0, -1.0, np.nan])
    many = describe_values(spec, values, unit)
    want = [describe_value(spec, float(v), unit) for v in values]
    assert [repr(vars(p)) for p in many] == [repr(vars(p)) for p in want]
    assert len({p.hint for p in many}) > 1  # the values' own hints, not one for all
