"""Each simple disorder through ``interpret``, in every container.

Expected disorders come from the bicarbonate rules (Narins & Emmett, Medicine 1980;
Berend, de Vries & Gans, N Engl J Med 2014) applied to the methods sheet's worked values,
against the textbook arterial intervals pH 7.35-7.45, pCO2 35-45 mm[Hg], HCO3 22-26 mmol/L
(methods 12.1: textbook appendix [S]; pH also in the University of Iowa handbook [C]).
"""

from __future__ import annotations

import pytest

import acidbase

from .panels import GAP_MIDPOINT, NA_E23, edge_panel, normal_e3


def disorders(r) -> set[tuple]:
    return {(d.process, d.role, d.timing, d.anion_gap) for d in r.disorders}


def test_normal_panel_has_no_disorder(interpret):
    # Methods E3: pH 7.40, pCO2 40, HCO3 24.22 sit inside every interval; gap 9 inside 6-12
    # (Klaestrup 2011).
    r = interpret(normal_e3())
    assert r.disorders == ()
    assert "P-NONE" in r.codes()


def test_high_gap_metabolic_acidosis_with_winters_compensation(interpret):
    # Methods E6: HCO3 10, Winter's centre pCO2 23 (Albert, Dell & Winters 1967: 1.5 x 10 + 8);
    # Cl- chosen for a gap of 25, above Klaestrup's upper limit 12 and the Gabow 1980 level 20.
    r = interpret(edge_panel(10.0, 23.0, gap=25.0))
    assert disorders(r) == {("metabolic acidosis", "primary", None, "high")}
    assert {"P-PRIMARY-METABOLIC-ACIDOSIS", "P-WINTERS-MET", "P-HIGH-GAP-ACIDOSIS"} <= set(
        r.codes()
    )


def test_normal_gap_metabolic_acidosis_with_winters_compensation(interpret):
    # Methods E6 at Winter's centre 23 mm[Hg], gap at the Klaestrup 2011 midpoint 9.
    r = interpret(edge_panel(10.0, 23.0))
    assert disorders(r) == {("metabolic acidosis", "primary", None, "normal")}
    assert {"P-PRIMARY-METABOLIC-ACIDOSIS", "P-WINTERS-MET", "P-NORMAL-GAP-ACIDOSIS"} <= set(
        r.codes()
    )


def test_metabolic_alkalosis_with_expected_compensation(interpret):
    # Methods E11: HCO3 34, expected pCO2 40 + 0.7 x (34 - 24) = 47 (Berend 2014).
    r = interpret(edge_panel(34.0, 47.0))
    assert disorders(r) == {("metabolic alkalosis", "primary", None, None)}
    assert {"P-PRIMARY-METABOLIC-ALKALOSIS", "P-MALK-EXPECTED"} <= set(r.codes())


def test_acute_respiratory_acidosis(interpret):
    # Methods E9 (summary of Berend 2014): pCO2 60, acute HCO3 24 + 0.1 x 20 = 26.
    r = interpret(edge_panel(26.0, 60.0))
    assert disorders(r) == {("respiratory acidosis", "primary", "acute", None)}
    assert {"P-PRIMARY-RESPIRATORY-ACIDOSIS", "P-RESP-TIMING"} <= set(r.codes())


def test_chronic_respiratory_acidosis(interpret):
    # Methods E9: pCO2 60, chronic HCO3 24 + 0.35 x 20 = 31.
    r = interpret(edge_panel(31.0, 60.0))
    assert disorders(r) == {("respiratory acidosis", "primary", "chronic", None)}
    assert {"P-PRIMARY-RESPIRATORY-ACIDOSIS", "P-RESP-TIMING"} <= set(r.codes())


def test_acute_respiratory_alkalosis(interpret):
    # Methods E10: pCO2 20, acute HCO3 24 - 0.2 x 20 = 20.
    r = interpret(edge_panel(20.0, 20.0))
    assert disorders(r) == {("respiratory alkalosis", "primary", "acute", None)}
    assert {"P-PRIMARY-RESPIRATORY-ALKALOSIS", "P-RESP-TIMING"} <= set(r.codes())


def test_chronic_respiratory_alkalosis(interpret):
    # Methods E10: pCO2 20, chronic HCO3 24 - 0.4 x 20 = 16.
    r = interpret(edge_panel(16.0, 20.0))
    assert disorders(r) == {("respiratory alkalosis", "primary", "chronic", None)}
    assert {"P-PRIMARY-RESPIRATORY-ALKALOSIS", "P-RESP-TIMING"} <= set(r.codes())


@pytest.mark.parametrize(
    ("hco3", "pco2", "low", "high"),
    [
        (10.0, 23.0, 21.0, 25.0),  # methods E6: 23 +/- 2 (21-25)
        (8.0, 20.0, 18.0, 22.0),  # methods E7: 20 +/- 2 (18-22)
        (12.0, 26.0, 24.0, 28.0),  # methods E8: 26 +/- 2 (24-28)
    ],
)
def test_winters_band_is_reported_as_the_expected_pco2(interpret, hco3, pco2, low, high):
    # Albert, Dell & Winters, Ann Intern Med 1967: expected pCO2 = 1.5 x HCO3 + 8 +/- 2.
    r = interpret(edge_panel(hco3, pco2))
    assert r.derived["expected_pco2_low"] == pytest.approx(low)
    assert r.derived["expected_pco2_high"] == pytest.approx(high)


def test_metabolic_alkalosis_band_is_reported_as_the_expected_pco2(interpret):
    # Methods E11: 40 + 0.7 x 10 = 47 (Berend 2014) with the +/- 5 band of Kidney360 2022
    # Table 3: 42-52 mm[Hg].
    r = interpret(edge_panel(34.0, 47.0))
    assert (r.derived["expected_pco2_low"], r.derived["expected_pco2_high"]) == pytest.approx(
        (42.0, 52.0)
    )


def test_respiratory_bands_are_reported_as_expected_hco3(interpret):
    # Methods E9: pCO2 60 gives acute 26 and chronic 31 (Narins & Emmett 1980; Berend 2014),
    # each +/- 2 mmol/L (the band is a design choice, acidbase docs/methods.md).
    d = interpret(edge_panel(26.0, 60.0)).derived
    assert (d["expected_hco3_acute_low"], d["expected_hco3_acute_high"]) == pytest.approx(
        (24.0, 28.0)
    )
    assert (d["expected_hco3_chronic_low"], d["expected_hco3_chronic_high"]) == pytest.approx(
        (29.0, 33.0)
    )


@pytest.mark.parametrize("ph", [7.34, 7.46], ids=["just below 7.35", "just above 7.45"])
def test_ph_outside_its_interval_is_never_read_as_no_disorder(interpret, ph):
    # Methods E4 components (pCO2 40, HCO3 24) with a pH just outside the arterial interval
    # 7.35-7.45 (Narins & Emmett 1980; Berend 2014): an acidaemia or alkalaemia is not "no
    # disorder".  The panel is internally inconsistent, and is flagged so; the reading must still
    # not state that pH is within its interval.
    r = interpret(
        acidbase.Panel(
            ph=ph,
            pco2=40.0,
            hco3=24.0,
            na=NA_E23,
            cl=NA_E23 - 24.0 - GAP_MIDPOINT,
            sample_type="arterial",
            hco3_source="analyser",
        )
    )
    assert "T-HH-INCONSISTENT" in r.codes()
    assert "P-NONE" not in r.codes()


def test_derived_values_that_cannot_be_computed_are_null(interpret):
    """Issue 2, section 5: null where not computable; a missing input is never guessed."""
    # Methods E3 with no albumin, K+, lactate, phosphate, glucose, urea, pO2 or FiO2; HCO3 24.22 is
    # not below 24, so the delta ratio has no fall to divide by (Rastegar 2007).
    d = interpret(normal_e3()).derived
    for key in (
        "anion_gap_k",
        "anion_gap_corrected",
        "delta_ratio",
        "sid_apparent",
        "sid_effective",
        "strong_ion_gap",
        "story_albumin",
        "osmolality_calculated",
        "alveolar_po2",
        "aa_gradient",
        "pf_ratio",
        "ph_at_temperature",
    ):
        assert d[key] is None, key
    assert d["anion_gap"] == pytest.approx(9.0)
