"""Trust findings at their published edges, in every container."""

from __future__ import annotations

import acidbase

from .panels import GAP_MIDPOINT, NA_E23, edge_panel, story_2016


def test_default_gap_intervals_are_klaestrups():
    # Methods E28, Klaestrup et al., Clin Chem Lab Med 2011: 6-12 without K+, 10-16 with K+.
    assert acidbase.Settings().gap_interval == (6.0, 12.0)
    assert acidbase.Settings(anion_gap_uses_k=True).gap_interval == (10.0, 16.0)


def test_ph_at_the_critical_limit_is_not_a_critical_call(interpret):
    # University of Iowa handbook: adult critical call pH < 7.20; the Story 2016 case (E17) sits at
    # 7.20 exactly, on the edge, and pCO2 40 is inside 20-70.
    assert "T-CRITICAL" not in interpret(story_2016()).codes()


def test_ph_just_below_the_critical_limit_is_a_critical_call(interpret):
    # Methods E6 (HCO3 10, pCO2 28): pH 7.171 by Henderson-Hasselbalch, below Iowa's 7.20.
    r = interpret(edge_panel(10.0, 28.0))
    finding = next(f for f in r.findings if f.code == "T-CRITICAL")
    assert finding.severity == "critical"
    assert "pH 7.17 (limits 7.20, 7.60)" in finding.text


def test_pco2_just_above_the_critical_limit_is_a_critical_call(interpret):
    # Iowa: pCO2 > 70 mm[Hg]; 70.5 just outside, with the chronic-respiratory HCO3
    # 24 + 0.35 x 30.5 = 34.7 (Narins & Emmett 1980) so the pH stays near normal.
    r = interpret(edge_panel(34.7, 70.5))
    assert "T-CRITICAL" in r.codes()


def test_gap_just_below_zero_is_flagged_as_an_error(interpret):
    # Kraut & Madias 2007: a negative gap is almost always an analytic or entry error; -0.5 on the
    # E3 acid-base values.
    r = interpret(edge_panel(24.22, 40.0, gap=-0.5))
    assert "T-AG-NEGATIVE" in r.codes()


def test_gap_just_below_the_klaestrup_lower_limit_is_low(interpret):
    # Klaestrup 2011 lower limit 6 without K+; 5.5 just outside, 6.5 just inside.
    assert "T-AG-LOW" in interpret(edge_panel(24.22, 40.0, gap=5.5)).codes()
    assert "T-AG-LOW" not in interpret(edge_panel(24.22, 40.0, gap=6.5)).codes()


def test_lactate_above_the_klaestrup_limit_is_raised(interpret):
    # Klaestrup 2011: arterial lactate upper limit 2.5 mmol/L; the Story case has 5.
    assert "D-LACTATE-HIGH" in interpret(story_2016()).codes()


def test_sample_type_not_stated_is_said(interpret):
    # AARC 2013: an unknown sample is not read for oxygenation; the tool says which intervals it used.
    p = acidbase.Panel(ph=7.40, pco2=40.0, hco3=24.22, na=NA_E23, cl=NA_E23 - 24.22 - GAP_MIDPOINT)
    assert "T-SAMPLE-UNKNOWN" in interpret(p).codes()
