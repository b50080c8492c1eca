"""Mixed double and triple disorders, and a large gap with a normal pH.

Gap rules: Klaestrup et al., Clin Chem Lab Med 2011 interval 6-12 mmol/L without K+
(midpoint 9 is the engine's "normal" gap); Figge et al., Crit Care Med 1998 albumin
correction; delta ratio (Rastegar, J Am Soc Nephrol 2007) with the widely copied bands
< 0.4 / 0.4-0.8 / 0.8-2 / > 2 (common practice, no source); delta gap beyond +/-6
(Wrenn, Ann Emerg Med 1990, citation from memory).
"""

from __future__ import annotations

import pytest

import acidbase

from .panels import GAP_MIDPOINT, edge_panel, story_2016


def disorders(r) -> set[tuple]:
    return {(d.process, d.role, d.timing, d.anion_gap) for d in r.disorders}


# ---------------------------------------------------------------- the Story 2016 case (E17)


def test_story_case_is_a_triple_disorder(interpret):
    # Story, Anesth Analg 2016 case inputs (E17).  Gap 133 - 125 = 8, Figge-corrected
    # 8 + 0.25 x (44 - 22) = 13.5 > 12: high gap.  Delta ratio (13.5 - 9) / (24 - 15) = 0.5, in
    # the 0.4-0.8 band: a normal-gap acidosis too.  Winter's: 1.5 x 15 + 8 = 30.5 +/- 2; pCO2 40 is
    # above 32.5: a respiratory acidosis as well.  (The article's own printed answer was not seen.)
    r = interpret(story_2016())
    assert disorders(r) == {
        ("metabolic acidosis", "primary", None, "high"),
        ("metabolic acidosis", "additional", None, "normal"),
        ("respiratory acidosis", "additional", "indeterminate", None),
    }
    assert {"P-WINTERS-ABOVE", "P-HIGH-GAP-ACIDOSIS", "P-DELTA-NORMAL-GAP"} <= set(r.codes())


def test_story_case_derived_gap_values(interpret):
    # Figge 1998 with our reference albumin 44 g/L, derived as above: AG 8, AGc 13.5, ratio 0.5,
    # delta gap (13.5 - 9) - (24 - 15) = -4.5.
    d = interpret(story_2016()).derived
    assert d["anion_gap"] == pytest.approx(8.0)
    assert d["anion_gap_corrected"] == pytest.approx(13.5)
    assert d["delta_ratio"] == pytest.approx(0.5)
    assert d["delta_gap"] == pytest.approx(-4.5)


def test_story_case_partition_uses_the_bedside_constants(interpret):
    # Story 2016 bedside constants (methods 6.2 [S]), E17 derived: Na-Cl -12, albumin +5,
    # lactate -4; "other ions" is by definition SBE minus the three.
    d = interpret(story_2016()).derived
    assert (d["story_na_cl"], d["story_albumin"], d["story_lactate"]) == pytest.approx(
        (-12.0, 5.0, -4.0)
    )
    assert d["story_other"] == pytest.approx(d["standard_base_excess"] + 11.0)


def test_story_case_with_reference_albumin_40_still_reads_a_high_gap(interpret):
    # Figge 1998 with the common teaching reference 40 g/L (methods 14): 8 + 0.25 x 18 = 12.5 > 12.
    r = interpret(story_2016(), acidbase.Settings(reference_albumin_g_l=40.0))
    assert r.derived["anion_gap_corrected"] == pytest.approx(12.5)
    # Delta ratio (12.5 - 9) / (24 - 15) = 0.39, below 0.4: mostly a normal-gap acidosis
    # (delta bands, common practice, no source; Rastegar 2007), so that part leads and the
    # high-gap part is additional.
    assert ("metabolic acidosis", "additional", None, "high") in disorders(r)
    assert ("metabolic acidosis", "primary", None, "normal") in disorders(r)


# ---------------------------------------------------------------- delta ratio band edges
# HCO3 14 (a fall of 10) at Winter's centre pCO2 1.5 x 14 + 8 = 29 (Albert, Dell & Winters 1967).


def test_delta_ratio_just_below_0_8_reveals_a_hidden_normal_gap_acidosis(interpret):
    # Gap 9 + 7.9 = 16.9: ratio 0.79, just outside the 0.8 edge of the uncomplicated band.
    r = interpret(edge_panel(14.0, 29.0, gap=GAP_MIDPOINT + 7.9))
    assert disorders(r) == {
        ("metabolic acidosis", "primary", None, "high"),
        ("metabolic acidosis", "additional", None, "normal"),
    }
    assert "P-DELTA-NORMAL-GAP" in r.codes()


def test_delta_ratio_just_above_0_8_is_an_uncomplicated_high_gap_acidosis(interpret):
    # Gap 9 + 8.1 = 17.1: ratio 0.81, just inside the 0.8-2 band.
    r = interpret(edge_panel(14.0, 29.0, gap=GAP_MIDPOINT + 8.1))
    assert disorders(r) == {("metabolic acidosis", "primary", None, "high")}
    assert "P-DELTA-NORMAL-GAP" not in r.codes()


# HCO3 20 (a fall of 4) at Winter's centre pCO2 1.5 x 20 + 8 = 38.


def test_delta_ratio_just_above_2_reveals_a_metabolic_alkalosis(interpret):
    # HCO3 18 (a fall of 6, above the 5 the ratio needs; Winter's centre 35, Albert 1967).
    # Gap 9 + 12.2 = 21.2: ratio 2.03, just outside the 2.0 edge (delta bands, common practice,
    # no source) -> concurrent metabolic alkalosis.
    r = interpret(edge_panel(18.0, 35.0, gap=GAP_MIDPOINT + 12.2))
    assert disorders(r) == {
        ("metabolic acidosis", "primary", None, "high"),
        ("metabolic alkalosis", "additional", None, None),
    }
    assert "P-DELTA-ALKALOSIS" in r.codes()


def test_delta_ratio_just_below_2_adds_no_metabolic_alkalosis(interpret):
    # Gap 9 + 11.9 = 20.9 over a fall of 6: ratio 1.98, just inside the 0.8-2 band.
    r = interpret(edge_panel(18.0, 35.0, gap=GAP_MIDPOINT + 11.9))
    assert disorders(r) == {("metabolic acidosis", "primary", None, "high")}
    assert "P-DELTA-ALKALOSIS" not in r.codes()


def test_high_gap_acidosis_metabolic_alkalosis_and_respiratory_alkalosis_together(interpret):
    # Triple: HCO3 18 with gap 21.2 (ratio 2.03, as above) and pCO2 32.5, just outside Winter's
    # lower edge 33 (1.5 x 18 + 8 - 2) -> additional respiratory alkalosis.
    r = interpret(edge_panel(18.0, 32.5, gap=GAP_MIDPOINT + 12.2))
    assert disorders(r) == {
        ("metabolic acidosis", "primary", None, "high"),
        ("metabolic alkalosis", "additional", None, None),
        ("respiratory alkalosis", "additional", "indeterminate", None),
    }


# ---------------------------------------------------------------- metabolic + respiratory acidosis


def test_metabolic_acidosis_with_respiratory_acidosis_from_the_published_example(interpret):
    # Methods E6: HCO3 10, pCO2 28 above Winter's 21-25 -> concurrent respiratory acidosis.
    r = interpret(edge_panel(10.0, 28.0))
    assert disorders(r) == {
        ("metabolic acidosis", "primary", None, "normal"),
        ("respiratory acidosis", "additional", "indeterminate", None),
    }


def test_combined_acidosis_with_both_components_abnormal_is_flagged_combined(interpret):
    # Methods E6 HCO3 10 with the E9 pCO2 60: both beyond their intervals (22-26, 35-45) and
    # both lowering pH; compensation never moves the other component the same way
    # (Narins & Emmett 1980), so both are primary.
    r = interpret(edge_panel(10.0, 60.0))
    assert {(d.process, d.role) for d in r.disorders} == {
        ("metabolic acidosis", "primary"),
        ("respiratory acidosis", "primary"),
    }
    assert "P-COMBINED" in r.codes()


# ---------------------------------------------------------------- a large gap with a normal pH


def test_large_gap_signals_metabolic_acidosis_with_normal_ph(interpret):
    # Methods E3 acid-base values (pH 7.40, pCO2 40, HCO3 24.22); Cl- chosen for a gap of 25, above
    # Gabow et al., N Engl J Med 1980 (value from memory): a gap of 20 or more almost always means
    # an organic acidosis, whatever the pH.
    r = interpret(edge_panel(24.22, 40.0, gap=25.0))
    assert ("metabolic acidosis", "high") in {(d.process, d.anion_gap) for d in r.disorders}
    assert "P-GAP-REVEALS-ACIDOSIS" in r.codes()


def test_large_gap_with_normal_hco3_also_reads_a_metabolic_alkalosis(interpret):
    # Same panel: delta gap (25 - 9) - (24 - 24.22) = 16.2 > +6 (Wrenn 1990): the HCO3 was held up
    # by a concurrent metabolic alkalosis.
    r = interpret(edge_panel(24.22, 40.0, gap=25.0))
    assert r.derived["delta_gap"] == pytest.approx(16.22)
    assert "metabolic alkalosis" in {d.process for d in r.disorders}
    assert "P-DELTA-ALKALOSIS" in r.codes()


def test_gap_at_the_gabow_threshold_reveals_acidosis(interpret):
    # Gabow 1980 (value from memory): "20 or more"; gap exactly 20 on the E3 values.
    r = interpret(edge_panel(24.22, 40.0, gap=20.0))
    assert "P-GAP-REVEALS-ACIDOSIS" in r.codes()


def test_a_raised_gap_below_the_gabow_threshold_reads_a_high_gap_acidosis_to_confirm(interpret):
    # 19.5: below Gabow's 20, above Klaestrup's 12, with normal HCO3: a raised gap signals a
    # high-gap acidosis whatever the HCO3- (Berend et al. 2014; Kraut & Madias 2007); below 20 a
    # third had no organic acid identified (Gabow 1980), so the finding asks to confirm.
    r = interpret(edge_panel(24.22, 40.0, gap=19.5))
    assert ("metabolic acidosis", "primary", None, "high") in disorders(r)
    assert "P-GAP-RAISED-ONLY" in r.codes()
    assert "P-GAP-REVEALS-ACIDOSIS" not in r.codes()


def test_a_gap_at_the_upper_limit_reads_no_acidosis(interpret):
    # Gap 12.0: on Klaestrup's upper edge (6-12), not above it.
    r = interpret(edge_panel(24.22, 40.0, gap=12.0))
    assert "metabolic acidosis" not in {d.process for d in r.disorders}


def test_a_raised_gap_beside_a_chronic_respiratory_alkalosis_is_read_as_an_acidosis(interpret):
    # Issue example: pH 7.55, pCO2 20, HCO3 17, Na 140, Cl 106, lactate 4.0: gap 17 > 12
    # (Klaestrup 2011) signals a high-gap acidosis whatever the HCO3- (Berend et al. 2014).
    r = interpret(acidbase.Panel(ph=7.55, pco2=20, hco3=17, na=140, cl=106, lactate=4.0))
    assert ("metabolic acidosis", "additional", None, "high") in disorders(r)
    text = next(f.text for f in r.findings if f.code == "P-GAP-RAISED-ONLY")
    assert "no low HCO3-" not in text and "lactate 4.0" in text


def test_a_small_hco3_fall_gives_no_delta_ratio_and_the_delta_gap_decides(interpret):
    # Issue example: pH 7.36, pCO2 37, HCO3 20.5 (a fall of 3.5, below the 5 a ratio needs),
    # gap 141 - 104 - 20.5 = 16.5: delta gap (16.5 - 9) - 3.5 = +4, inside Wrenn's +/-6.
    r = interpret(acidbase.Panel(ph=7.36, pco2=37, hco3=20.5, na=141, cl=104))
    assert r.derived["delta_ratio"] is None
    assert r.derived["delta_gap"] == pytest.approx(4.0)
    assert "metabolic alkalosis" not in {d.process for d in r.disorders}
    delta = next(f.text for f in r.findings if f.code == "D-DELTA")
    assert "not assessable" in delta


def test_no_disorder_statement_does_not_deny_a_raised_gap(interpret):
    # Gap 13: just outside Klaestrup's upper edge 12, on the E3 acid-base values.
    r = interpret(edge_panel(24.22, 40.0, gap=13.0))
    none = [f for f in r.findings if f.code == "P-NONE"]
    assert not any("anion gap not raised" in f.text for f in none)


def test_hypoalbuminaemia_unmasks_a_high_gap(interpret):
    # Figge 1998: gap 9 at albumin 20 g/L corrects to 9 + 0.25 x 24 = 15 > 12 (E18-style, derived).
    # HCO3 14 at Winter's centre 29: the acidosis reads high-gap only once corrected.
    r = interpret(edge_panel(14.0, 29.0, albumin=20.0))
    assert r.derived["anion_gap_corrected"] == pytest.approx(15.0)
    assert ("metabolic acidosis", "primary", None, "high") in disorders(r)


def test_combined_alkalosis_with_both_components_abnormal_is_flagged_combined(interpret):
    # Methods E11 HCO3 34 with the E10 pCO2 20: both beyond their intervals and both raising pH
    # (Narins & Emmett 1980): two primary processes, nothing to compensate.
    r = interpret(edge_panel(34.0, 20.0))
    assert {(d.process, d.role) for d in r.disorders} == {
        ("metabolic alkalosis", "primary"),
        ("respiratory alkalosis", "primary"),
    }
    assert "P-COMBINED" in r.codes()


def test_normal_ph_hides_a_respiratory_acidosis_with_a_metabolic_alkalosis(interpret):
    # Methods E9 pCO2 60 with the E11 HCO3 34: pH 7.371 by Henderson-Hasselbalch (CLSI), inside
    # 7.35-7.45.  pCO2 above 45 on the acid side of 7.40 is the primary process; HCO3 34 is above the
    # chronic band's upper edge 24 + 0.35 x 20 + 2 = 33 (Narins & Emmett 1980; Berend 2014).
    r = interpret(edge_panel(34.0, 60.0))
    assert {(d.process, d.role) for d in r.disorders} == {
        ("respiratory acidosis", "primary"),
        ("metabolic alkalosis", "additional"),
    }


def test_effective_sid_at_the_e27_values_uses_the_clsi_bicarbonate(interpret):
    # Methods E27 inputs (pH 7.40, pCO2 40, albumin 42 g/L, phosphate 1.1 mmol/L): Figge-Fencl
    # albumin 11.73 + phosphate 2.00 (Figge, Mydosh & Fencl 1992).  E27 prints 38.44 with the
    # Stewart bicarbonate term 24.72; the engine's bicarbonate is CLSI's 24.22 (E3), so derived:
    # 24.22 + 11.73 + 2.00 = 37.95.
    r = interpret(edge_panel(24.22, 40.0, albumin=42.0, phosphate=1.1))
    assert r.derived["sid_effective"] == pytest.approx(37.95, abs=0.01)


def test_below_the_minimum_fall_a_delta_gap_beyond_plus_6_still_reads_an_alkalosis(interpret):
    # HCO3 21 (a fall of 3, too small for a ratio), gap 19.5: delta gap (19.5 - 9) - 3 = +7.5,
    # beyond Wrenn's +6 (Ann Emerg Med 1990) -> concurrent metabolic alkalosis; no ratio printed.
    r = interpret(edge_panel(21.0, 39.5, gap=19.5))
    assert ("metabolic alkalosis", "additional", None, None) in disorders(r)
    assert r.derived["delta_ratio"] is None
    text = next(f.text for f in r.findings if f.code == "P-DELTA-ALKALOSIS")
    assert "delta gap +7.5" in text and "not assessable" in text
