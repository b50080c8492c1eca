"""Readings where a rule's premise does not hold: venous pCO2 against arterial bands, and a
delta ratio whose HCO3- baseline is moved by respiratory compensation."""

from __future__ import annotations

import math

import acidbase


def hh_ph(hco3: float, pco2: float) -> float:
    # Henderson-Hasselbalch with the CLSI C46 constants (0.0307, 6.105), so the panels are
    # internally consistent.
    return 6.105 + math.log10(hco3 / (0.0307 * pco2))


def read(**kw):
    return acidbase.interpret(acidbase.Panel(hco3_source="analyser", **kw))


def processes(r):
    return {(d.process, d.role, d.anion_gap) for d in r.disorders}


def test_venous_pco2_above_winters_band_is_not_called_a_respiratory_acidosis():
    # Winter's formula (Albert, Dell & Winters 1967): HCO3 12 -> pCO2 26 +/- 2 (methods E8).
    # Venous pCO2 runs about 5.7 mm[Hg] above arterial with limits of agreement near
    # +/- 20 (Kelly 2010), so a venous 31 does not show inadequate ventilation.
    r = read(ph=round(hh_ph(12.0, 31.0), 3), pco2=31, hco3=12, na=140, cl=104,
             sample_type="venous")
    assert "P-VENOUS-COMPENSATION" in r.codes()
    assert not any(d.process == "respiratory acidosis" for d in r.disorders)


def test_the_same_panel_arterial_shows_the_additional_respiratory_acidosis():
    # Arterial pCO2 31 > 28, the top of Winter's band for HCO3 12 (Albert, Dell & Winters 1967).
    r = read(ph=round(hh_ph(12.0, 31.0), 3), pco2=31, hco3=12, na=140, cl=104,
             sample_type="arterial")
    assert ("respiratory acidosis", "additional", None) in processes(r)
    assert "P-VENOUS-COMPENSATION" not in r.codes()


def test_venous_pco2_below_winters_band_still_shows_a_respiratory_alkalosis():
    # Venous 20 < 24 (Winter's lower edge for HCO3 12); arterial pCO2 would be lower still
    # (venous runs higher, Kelly 2010).
    # pH 7.396 sits on the alkaline side of the venous interval's midpoint, so the
    # respiratory alkalosis is read as primary and the acidosis beside it; both are present.
    r = read(ph=round(hh_ph(12.0, 20.0), 3), pco2=20, hco3=12, na=140, cl=104,
             sample_type="venous")
    names = {d.process for d in r.disorders}
    assert {"respiratory alkalosis", "metabolic acidosis"} <= names
    assert "P-VENOUS-COMPENSATION" not in r.codes()


def test_low_delta_ratio_beside_a_respiratory_alkalosis_is_not_a_hidden_acidosis():
    # Winter's: HCO3 13 -> pCO2 27.5 +/- 2, so pCO2 25 adds a respiratory alkalosis.
    # Gap 140 - 111 - 13 = 16 (> 12, Klaestrup 2011); ratio (16 - 9) / (24 - 13) = 0.64 < 0.8,
    # but hypocapnia lowers HCO3- by itself, so the 24 baseline of the ratio does not hold
    # (Rastegar 2007): no normal-gap entry, a not-assessable note instead.
    r = read(ph=round(hh_ph(13.0, 25.0), 3), pco2=25, hco3=13, na=140, cl=111,
             sample_type="arterial")
    assert ("metabolic acidosis", "primary", "high") in processes(r)
    assert not any(d.anion_gap == "normal" for d in r.disorders)
    assert "P-DELTA-LOW-RESPIRATORY" in r.codes()
    assert "P-DELTA-NORMAL-GAP" not in r.codes()


def test_delta_ratio_below_0_4_puts_the_normal_gap_acidosis_first():
    # Winter's centre for HCO3 14: 29 mm[Hg]. Gap 140 - 113 - 14 = 13 (> 12); ratio
    # (13 - 9) / 10 = 0.4 - just below with Cl 113.1 -> gap 12.9, ratio 0.39: mostly a
    # normal-gap acidosis (delta bands, common practice, no source).
    r = read(ph=round(hh_ph(14.0, 29.0), 3), pco2=29, hco3=14, na=140, cl=113.1,
             sample_type="arterial")
    assert ("metabolic acidosis", "primary", "normal") in processes(r)
    assert ("metabolic acidosis", "additional", "high") in processes(r)


def test_readings_that_part_on_compensation_say_which_bands_differ():
    # HCO3 11: Winter's 1.5 x 11 + 8 = 24.5 +/- 2 -> 22.5-26.5 (Albert, Dell & Winters 1967);
    # SBE (CLSI C46) about -16.4 -> Schlichtig 1998 expected pCO2 40 + SBE = 23.6, band +/- 2
    # (a design choice) -> 21.6-25.6. pCO2 26.3 sits in the first band only.
    r = read(ph=round(hh_ph(11.0, 26.3), 3), pco2=26.3, hco3=11, na=140, cl=104,
             sample_type="arterial")
    text = next(f.text for f in r.findings if f.code == "P-BE-DISAGREES")
    assert "expected pCO2 differs between the families" in text
    assert "22.50-26.50" in text


def test_an_inconsistent_panel_names_the_inconsistency_when_the_readings_part():
    # pH 7.40 / pCO2 41 give HCO3 24.8 (CLSI C46); an entered 42.0 is a transcription slip.
    r = read(ph=7.40, pco2=41, hco3=42.0, na=139, cl=102, sample_type="arterial")
    text = next(f.text for f in r.findings if f.code == "P-BE-DISAGREES")
    assert "see the consistency verdict" in text


def test_delta_ratio_and_gap_are_null_without_a_high_gap_acidosis():
    # Chronic respiratory acidosis (Narins & Emmett 1980: HCO3 24 + 0.35 x 20 = 31 +/- 2 at
    # pCO2 60) with a normal gap: the delta ratio compares a gap rise with an HCO3 fall in a
    # high-gap acidosis (Rastegar 2007) and has no meaning here.
    r = read(ph=round(hh_ph(30.0, 60.0), 3), pco2=60, hco3=30, na=140, cl=100,
             sample_type="arterial")
    assert r.derived["delta_ratio"] is None
    assert r.derived["delta_gap"] is None


def test_timing_text_names_the_concurrent_metabolic_process():
    # pH 7.45, pCO2 20, HCO3 14 (a salicylate-like pattern): respiratory alkalosis primary;
    # the gap 140 - 104 - 14 = 22 is at least 20, a metabolic acidosis (Gabow 1980, value from
    # memory), which moves HCO3- too, so the acute/chronic bands (Narins & Emmett 1980)
    # cannot time the respiratory process.
    r = read(ph=7.45, pco2=20, hco3=14, na=140, cl=104, sample_type="arterial")
    text = next(f.text for f in r.findings if f.code == "P-RESP-TIMING")
    assert "concurrent metabolic process" in text
    assert ("respiratory alkalosis", "primary", None) in processes(r)
    assert ("metabolic acidosis", "additional", "high") in processes(r)
