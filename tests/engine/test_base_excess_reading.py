"""The base-excess reading (Schlichtig, Grogono & Severinghaus, Crit Care Med 1998) beside
the bicarbonate rules, agreeing and disagreeing, in every container.

SBE: CLSI C46 Van Slyke form HCO3 - 24.8 + 16.2 (pH - 7.40), computed from the
calculated HCO3-.  Schlichtig: metabolic acidosis pCO2 = 40 + SBE; the +/- 2 band is the
project's design choice by analogy with Winter's (methods 4.2).
"""

from __future__ import annotations

import pytest

from .panels import edge_panel, story_2016


def test_base_excess_reading_agrees_at_winters_centre(interpret):
    # Methods E6: HCO3 10 at Winter's centre 23; SBE about -17.1 (CLSI, derived), 40 + SBE = 22.9,
    # so both families read a compensated metabolic acidosis.
    r = interpret(edge_panel(10.0, 23.0))
    assert "P-BE-AGREES" in r.codes() and "P-BE-DISAGREES" not in r.codes()


def test_base_excess_reading_disagrees_just_inside_winters_upper_edge(interpret):
    # pCO2 24.9: just inside Winter's upper edge 25 (Albert, Dell & Winters 1967), but pH 7.222
    # gives SBE 10.0 - 24.8 + 16.2 x (-0.178) = -17.7 (CLSI, derived) and Schlichtig's
    # 40 + SBE +/- 2 tops out at 24.3: the base-excess family reads a respiratory acidosis too.
    r = interpret(edge_panel(10.0, 24.9))
    assert r.derived["standard_base_excess"] == pytest.approx(-17.7, abs=0.05)
    assert r.derived["be_expected_pco2_high"] == pytest.approx(24.3, abs=0.05)
    assert "P-BE-DISAGREES" in r.codes() and "P-BE-AGREES" not in r.codes()
    text = next(f for f in r.findings if f.code == "P-BE-DISAGREES").text
    assert "bicarbonate rules give metabolic acidosis;" in text
    assert "respiratory acidosis" in text


def test_disagreement_leaves_the_bicarbonate_disorders_unchanged(interpret):
    """The base-excess reading is a second view; it does not rewrite ``disorders``."""
    r = interpret(edge_panel(10.0, 24.9))
    assert [(d.process, d.role) for d in r.disorders] == [("metabolic acidosis", "primary")]


def test_standard_base_excess_of_the_story_case(interpret):
    # CLSI SBE from the calculated HCO3 15.28 (E17, derived): 15.28 - 24.8 + 16.2 x (-0.20) = -12.76;
    # with the entered 15 it would be -13.04 (E13); the engine uses the calculated value.
    d = interpret(story_2016()).derived
    assert d["standard_base_excess"] == pytest.approx(-12.76, abs=0.01)
    assert d["be_expected_pco2_low"] == pytest.approx(40.0 - 12.76 - 2.0, abs=0.01)


def test_metabolic_alkalosis_base_excess_rule_agrees_at_e11(interpret):
    # Methods E11: HCO3 34, pCO2 47; SBE 34 - 24.8 + 16.2 x 0.077 = +10.45 (CLSI, derived);
    # Schlichtig 40 + 0.6 x 10.45 = 46.3 +/- 5 holds 47.
    r = interpret(edge_panel(34.0, 47.0))
    assert r.derived["be_expected_pco2_low"] == pytest.approx(46.3 - 5.0, abs=0.05)
    assert "P-BE-AGREES" in r.codes()
