"""Wording that matches its numbers: a finding prints what the rule compared at a precision
that shows the comparison, and a timing is worded as one reading among others."""

from __future__ import annotations

import pytest

import acidbase
from acidbase.rules import shown

from .panels import edge_panel, normal_e3


def text_of(r: acidbase.Interpretation, code: str) -> str:
    return next(f.text for f in r.findings if f.code == code)


@pytest.mark.parametrize(("x", "limit", "spec", "expected"), [
    (45.4, 45.0, ".0f", "45.4"),    # would print "45", on the limit it exceeds
    (44.6, 45.0, ".0f", "44.6"),    # would print "45", on the limit it stays under
    (10.3, 10.0, ".0f", "10.3"),
    (52.0, 45.0, ".0f", "52"),      # clear of the limit: the usual precision
    (21.96, 22.0, ".1f", "21.96"),
])
def test_a_number_prints_on_the_side_of_the_limit_it_was_compared_with(x, limit, spec, expected):
    assert shown(x, limit, spec) == expected


def test_a_pco2_just_above_its_limit_does_not_read_as_equal_to_it(interpret):
    # pCO2 45.4 against the upper arterial limit 45 (Narins & Emmett 1980; Berend et al. 2014);
    # HCO3 24.5 keeps pH (CLSI, 7.35) at its lower edge side.
    r = interpret(edge_panel(24.5, 45.4))
    assert "pCO2 45.4 mm[Hg] above 45" in text_of(r, "P-PRIMARY-RESPIRATORY-ACIDOSIS")


def test_an_osmolal_gap_just_above_10_prints_its_decimal(interpret):
    # 2 x 140 + 5 + 5 = 290 (Lynd et al. 2008, SI form); measured 300.3: gap 10.3 > 10.
    r = interpret(normal_e3(glucose=5.0, urea=5.0, osmolality=300.3))
    assert text_of(r, "D-OSMOLAL-GAP-HIGH").startswith("Osmolal gap 10.3 mosm/kg above 10")


def test_a_chronic_timing_is_worded_as_consistent_with_and_names_the_alternative(interpret):
    # pCO2 60: chronic band 24 + 0.35 x 20 = 31 +/- 2 (Narins & Emmett 1980); HCO3 31 in it.
    text = text_of(interpret(edge_panel(31.0, 60.0)), "P-RESP-TIMING")
    assert "consistent with a chronic process" in text
    assert "acute one plus a metabolic alkalosis" in text
    assert "reads as chronic" not in text


def test_a_value_keeps_every_digit_it_was_given_in_the_report_and_in_a_refusal():
    """The inputs echoed by the text and Markdown reports, the extreme-value caution and
    a refusal's value print the number given: four significant digits had turned
    pCO2 40.125 into 40.13 and a refused 650.25 into 650.2 (a value not in the file).
    pCO2 40.125 with HCO3- 24 and pH 7.40 is an ordinary panel (Henderson-Hasselbalch,
    value from memory); 8-250 mm[Hg] is acidbase/fields.py's accepted range."""
    from acidbase import report

    panel = acidbase.Panel(ph=7.40, pco2=40.125, hco3=24, k=8.125)
    r = acidbase.interpret(panel)
    assert "pCO2 40.125 mm[Hg]" in report.as_text(r)
    assert "| pCO2 | 40.125 | mm[Hg] |" in report.as_markdown(r)
    assert "K+ 8.125 mmol/L (usual extremes" in report.as_text(r)
    with pytest.raises(ValueError) as refused:  # pydantic's ValidationError
        acidbase.Panel(ph=7.40, pco2=650.25, hco3=24)
    assert "650.25 mm[Hg] is outside the accepted range 8 to 250 mm[Hg]" in str(refused.value)
