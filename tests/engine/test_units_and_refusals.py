"""Unit confusion and out-of-range refusals, with their messages.

Our own messages (type ``outside_accepted_range``, ``unit_not_accepted``) are asserted in
full text: field, value, unit, allowed range and the hint.  For pydantic's own errors
only ``type`` and ``loc`` are asserted.  Unit factors: UCUM (Regenstrief Institute),
1 kPa = 7.50062 mm[Hg]; 1 g/dL = 10 g/L; glucose 180.16 g/mol (IUPAC atomic weights).
"""

from __future__ import annotations

import numpy as np
import pydantic
import pytest

import acidbase

from .panels import CLSI_ALPHA, CLSI_PK, MMHG_PER_KPA, normal_e3

E3 = {
    "ph": 7.40,
    "pco2": 40.0,
    "hco3": 24.22,
    "na": 140.0,
    "cl": 106.78,
}  # methods E3, normal-gap filler


def refusal(**changes) -> list[dict]:
    with pytest.raises(pydantic.ValidationError) as info:
        acidbase.Panel(**(E3 | changes))
    return info.value.errors(include_url=False)


def only(errors: list[dict]) -> dict:
    assert len(errors) == 1, errors
    return errors[0]


# ---------------------------------------------------------------- a value impossible in its unit


def test_pco2_5_3_in_mmhg_is_refused_with_a_hint_naming_kpa():
    # 5.3 is a normal pCO2 in kPa (5.3 x 7.50062 = 39.8 mm[Hg], UCUM) and impossible in mm[Hg].
    e = only(refusal(pco2=5.3))
    assert e["type"] == "outside_accepted_range" and e["loc"] == ("pco2",)
    assert e["msg"] == (
        "pCO2 (pco2) 5.3 mm[Hg] is outside the accepted range 8 to 250 mm[Hg] - pCO2 would be "
        "ordinary at this value in kPa: if that is the unit, state it (pco2 unit kPa), the value "
        "was not converted"
    )


def test_albumin_38_in_g_per_dl_is_refused_with_a_hint_naming_g_per_l():
    # 38 g/L is an ordinary albumin (textbook 35-50 g/L, methods 12.1, value from memory); 38 g/dL
    # is ten times any plasma protein.
    e = only(refusal(albumin=38.0, albumin_unit="g/dL"))
    assert e["type"] == "outside_accepted_range" and e["loc"] == ("albumin",)
    assert e["msg"] == (
        "Albumin (albumin) 38 g/dL is outside the accepted range 0.8 to 8 g/dL - Albumin would be "
        "ordinary at this value in g/L: if that is the unit, state it (albumin unit g/L), the value "
        "was not converted"
    )


def test_glucose_6_in_mg_per_dl_is_refused_with_a_hint_naming_mmol_per_l():
    # 6 mmol/L is an ordinary glucose; 6 mg/dL is 0.33 mmol/L (6 x 10 / 180.16), not survivable.
    e = only(refusal(glucose=6.0, glucose_unit="mg/dL"))
    assert e["type"] == "outside_accepted_range" and e["loc"] == ("glucose",)
    assert e["msg"].startswith("Glucose (glucose) 6 mg/dL is outside the accepted range ")
    assert e["msg"].endswith(
        " mg/dL - Glucose would be ordinary at this value in mmol/L: if that is the unit, state it "
        "(glucose unit mmol/L), the value was not converted"
    )


def test_pco2_40_in_kpa_is_refused_with_a_hint_naming_mmhg():
    """The hint works both ways: 40 kPa (300 mm[Hg]) is a normal pCO2 typed in the wrong unit."""
    e = only(refusal(pco2=40.0, pco2_unit="kPa"))
    assert "pCO2 (pco2) 40 kPa is outside the accepted range" in e["msg"]
    assert "ordinary at this value in mm[Hg]" in e["msg"]


def test_refusal_context_carries_field_value_unit_and_range():
    ctx = only(refusal(pco2=5.3))["ctx"]
    assert (ctx["field"], ctx["value"], ctx["unit"], ctx["low"], ctx["high"]) == (
        "pco2",
        5.3,
        "mm[Hg]",
        8.0,
        250.0,
    )


def test_a_value_is_never_converted_silently():
    """No unit is guessed: the refused panel does not exist, so nothing downstream can read it."""
    with pytest.raises(pydantic.ValidationError):
        acidbase.Panel(**(E3 | {"pco2": 5.3}))


# ---------------------------------------------------------------- kPa accepted and equivalent


def test_pco2_in_kpa_is_normalised_with_the_ucum_factor():
    # UCUM: 1 kPa = 7.50062 mm[Hg]; 5.3 kPa = 39.753 mm[Hg].
    p = acidbase.Panel(**(E3 | {"pco2": 5.3, "pco2_unit": "kPa"}))
    # Tolerance 1e-5 relative: UCUM's factor printed to 6 figures (7.50062) against the engine's
    # 1 / 0.133322; both round 760 / 101.325 = 7.500617.
    assert p.canonical()["pco2"] == pytest.approx(5.3 * 7.50062, rel=1e-5)


def test_kpa_pco2_gives_the_same_reading_as_the_mmhg_value(interpret):
    kpa = interpret(acidbase.Panel(**(E3 | {"pco2": 5.3, "pco2_unit": "kPa"})))
    mmhg = interpret(acidbase.Panel(**(E3 | {"pco2": 5.3 * MMHG_PER_KPA})))
    assert kpa.disorders == mmhg.disorders
    assert kpa.codes() == mmhg.codes()
    assert kpa.consistency.status == mmhg.consistency.status
    for key, value in mmhg.derived.items():
        if value is None:
            assert kpa.derived[key] is None, key
        else:
            assert kpa.derived[key] == pytest.approx(value, rel=1e-5, abs=1e-4), key


def test_albumin_in_g_per_dl_is_corrected_as_the_same_value_in_g_per_l(interpret):
    # Methods E18: albumin 2.0 g/dL = 20 g/L; gap 9 corrects to 9 + 0.25 x (44 - 20) = 15 (Figge 1998).
    r = interpret(normal_e3(albumin=2.0, albumin_unit="g/dL"))
    assert r.derived["anion_gap_corrected"] == pytest.approx(15.0)


def test_e23_osmolality_from_conventional_units(interpret):
    # Methods E23: Na 140, glucose 90 mg/dL, BUN 14 mg/dL -> 290 with the rounded divisors 18 and
    # 2.8 (Lynd et al. 2008 conversions); molar masses (IUPAC) give 289.99.  Measured 299.5 is
    # just inside the > 10 mosm/kg threshold (methods 7.1 [S]).
    r = interpret(normal_e3(glucose=90.0, glucose_unit="mg/dL", bun=14.0, osmolality=299.5))
    assert r.derived["osmolality_calculated"] == pytest.approx(290.0, abs=0.1)
    assert r.derived["osmolal_gap"] == pytest.approx(9.5, abs=0.1)


@pytest.mark.parametrize(
    ("measured", "code"), [(299.5, "D-OSMOLAL-GAP"), (300.5, "D-OSMOLAL-GAP-HIGH")]
)
def test_osmolal_gap_is_raised_just_above_10(interpret, measured, code):
    # Raised above 10 mosm/kg (common threshold, methods 7.1 [S]; Lynd 2008): against E23's 290,
    # measured 299.5 is just inside (gap 9.5), 300.5 just outside (gap 10.5).
    r = interpret(normal_e3(glucose=90.0, glucose_unit="mg/dL", bun=14.0, osmolality=measured))
    assert code in r.codes()


# ---------------------------------------------------------------- out of the accepted range


@pytest.mark.parametrize(
    ("field", "value", "message"),
    [
        # Analysers' measuring ranges, pH 6.0-8.0 at the widest (methods 11.2, value from
        # memory); HCO3- 1-80 (design, docs/methods.md "Accepted ranges").
        ("ph", 8.1, "pH (ph) 8.1 is outside the accepted range 6 to 8"),
        ("ph", 5.9, "pH (ph) 5.9 is outside the accepted range 6 to 8"),
        ("hco3", 81.0, "HCO3- (hco3) 81 mmol/L is outside the accepted range 1 to 80 mmol/L"),
        ("hco3", 0.5, "HCO3- (hco3) 0.5 mmol/L is outside the accepted range 1 to 80 mmol/L"),
    ],
)
def test_value_just_outside_the_measuring_range_is_refused_with_its_range(field, value, message):
    e = only(refusal(**{field: value}))
    assert e["type"] == "outside_accepted_range" and e["loc"] == (field,)
    assert e["msg"] == message


@pytest.mark.parametrize(
    ("field", "value"), [("ph", 8.0), ("ph", 6.0), ("hco3", 80.0), ("hco3", 1.0)]
)
def test_value_at_the_measuring_range_edge_is_accepted(field, value):
    # The edges of the accepted ranges are themselves measurable.
    acidbase.Panel(**(E3 | {field: value}))


def test_an_hco3_above_60_and_a_ph_below_6_5_are_read_and_flagged_not_refused(interpret):
    # Issue example (HCO3- 62, Cl 70) and a pH 6.45 (survivals below 6.5 are published; methods
    # 11.2 cites pH 6.38 with lactate 24): implausible but possible, so read with a caution.
    r = interpret(acidbase.Panel(ph=7.65, pco2=58, hco3=62, na=136, cl=70))
    assert r.status == "interpreted" and "T-EXTREME-VALUE" in r.codes()
    r = interpret(acidbase.Panel(ph=6.45, pco2=40, hco3=3.5, na=140, cl=100))
    assert r.status == "interpreted" and {"T-EXTREME-VALUE", "T-PH-LIFE"} <= set(r.codes())


@pytest.mark.parametrize(("ph", "pco2"), [(6.79, 40.0), (7.81, 20.0)])
def test_ph_beyond_the_traditional_limits_of_life_is_accepted_and_flagged(interpret, ph, pco2):
    # pH just outside the traditional 6.8-7.8 "compatible with life" (common practice, no source),
    # inside the measuring range 6.5-8.0: accepted, flagged critical, never refused.  HCO3 is put
    # where Henderson-Hasselbalch (CLSI C46) places it, so the panel is consistent.
    hco3 = round(CLSI_ALPHA * pco2 * 10 ** (ph - CLSI_PK), 2)
    panel = acidbase.Panel(
        **(E3 | {"ph": ph, "pco2": pco2, "hco3": hco3, "cl": 140.0 - hco3 - 9.0})
    )
    r = interpret(panel)
    assert r.consistency.status == "consistent"
    finding = next(f for f in r.findings if f.code == "T-PH-LIFE")
    assert finding.severity == "critical"


def test_unknown_unit_is_refused_naming_the_accepted_units():
    e = only(refusal(pco2_unit="psi"))
    assert e["type"] == "unit_not_accepted" and e["loc"] == ("pco2_unit",)
    assert e["msg"] == "unit 'psi' is not accepted for pCO2; use one of mm[Hg], kPa"


def test_every_problem_is_collected_in_one_error():
    errors = refusal(pco2=5.3, albumin=38.0, albumin_unit="g/dL")
    assert {e["loc"] for e in errors} == {("pco2",), ("albumin",)}


# ---------------------------------------------------------------- pydantic's own errors


@pytest.mark.parametrize(
    ("changes", "type_", "loc"),
    [
        # the one cell reader's kinds (acidbase.inputs.cells; NaN is "not measured")
        ({"ph": "seven"}, "not_a_number", ("ph",)),
        ({"ph": float("nan")}, "missing", ("ph",)),
        ({"pco2": float("inf")}, "not_a_number", ("pco2",)),
        ({"colour": "red"}, "unknown_field", ("colour",)),
        ({"sample_type": "arterialised"}, "not_a_choice", ("sample_type",)),
    ],
)
def test_malformed_input_is_refused_by_pydantic(changes, type_, loc):
    e = only(refusal(**changes))
    assert (e["type"], e["loc"]) == (type_, loc)


@pytest.mark.parametrize(("key", "use"), [
    ("sodium", "na (Na+)"), ("chloride", "cl (Cl-)"), ("potassium", "k (K+)"),
    ("bicarbonate", "hco3 (HCO3-)"), ("Na", "na (Na+)"), ("hemoglobin", "hb (Haemoglobin)"),
    ("sodium_unit", "na_unit (the unit of Na+)"), ("Sample Type", "sample_type"),
])
def test_an_unknown_key_that_names_a_field_in_other_words_is_refused_with_that_field(key, use):
    """``Panel(sodium=140)`` gave pydantic's "Extra inputs are not permitted". The key is
    refused, never read as Na+ (so E3 without its na stays without one), and the
    message names the key and the field to use; the other problems are kept."""
    panel = {k: v for k, v in E3.items() if k not in ("na", "cl")}
    with pytest.raises(pydantic.ValidationError) as info:
        acidbase.Panel(**panel, **{key: 140}, pco2_unit="bar")
    errors = info.value.errors(include_url=False)
    assert [(e["type"], e["loc"]) for e in errors] == [
        ("unit_not_accepted", ("pco2_unit",)), ("unknown_field", (key,))]
    assert acidbase.describe(info.value)[1] == f"{key}: not a field of the panel - use {use}"
    assert f"{key}: not a field of the panel - use {use}" in str(info.value)


def test_an_unknown_key_in_no_words_of_a_field_is_refused_with_the_fields():
    """No guess: "calcium" is not ionised calcium, "colour" is nothing; the message lists
    the fields there are."""
    for key in ("calcium", "colour"):
        e = only(refusal(**{key: 1.2}))
        assert e["type"] == "unknown_field"
        assert e["msg"].startswith(f"{key}: not a field of the panel - the fields are ph, "
                                   "pco2, hco3, na, cl, k,")
        assert e["msg"].endswith("and <field>_unit for a unit")


# Degrees Fahrenheit: t/Cel = (t/[degF] - 32) / 1.8 (UCUM, [degF]; value from memory):
# 98.6 [degF] is 37 Cel, an ordinary temperature, and 98.6 Cel is none.
@pytest.mark.parametrize("unit", ["[degF]", "degF", "°F"])
def test_a_temperature_in_fahrenheit_is_refused_with_the_unit_to_give(unit):
    """A unit of the field's quantity that acidbase does not take: refused, never
    converted, and the hint names it and the unit accepted (it said only "use one of
    Cel"). The same words from ``Panel`` and from ``acidbase batch --unit``."""
    e = only(refusal(temperature=98.6, temperature_unit=unit))
    assert e["type"] == "unit_not_accepted"
    hint = ("[degF] is degrees Fahrenheit, which acidbase does not take or convert: give the "
            "value in Cel")
    assert e["msg"] == (f"unit {unit!r} is not accepted for Patient temperature; use one of "
                        f"Cel - {hint}")
    with pytest.raises(acidbase.UnitError) as info:
        acidbase.interpret_many({"ph": [7.4], "pco2": [40], "hco3": [24],
                                 "temperature": [98.6]}, {"temperature": unit})
    assert info.value.hint == hint and str(info.value).endswith(hint)


def test_a_fahrenheit_number_given_as_celsius_is_refused_with_a_hint(tmp_path, capsys):
    """``--temperature 98.6`` (in Cel, the only unit): refused as outside 25-45 Cel, and the
    hint says it would be ordinary in [degF], which is not taken; 200 would be ordinary
    in neither, so no hint. The same sentence from the check command, ``Panel`` and a
    file."""
    import csv

    from acidbase.cli import main

    said = ("Patient temperature (temperature) 98.6 Cel is outside the accepted range 25 to "
            "45 Cel - Patient temperature would be ordinary at this value in [degF] (degrees "
            "Fahrenheit), which acidbase does not take: give it in Cel; the value was not "
            "converted")
    assert only(refusal(temperature=98.6))["msg"] == said
    assert only(refusal(temperature=200.0))["msg"] == (
        "Patient temperature (temperature) 200 Cel is outside the accepted range 25 to 45 Cel")
    assert main(["check", "--ph", "7.4", "--pco2", "40", "--hco3", "24",
                 "--temperature", "98.6"]) == 2
    assert f"  - {said}\n" in capsys.readouterr().err
    src = tmp_path / "t.csv"
    src.write_text("ph,pco2,hco3,temperature\n7.40,40,24,98.6\n")
    assert main(["batch", str(src), "-o", str(tmp_path / "o.csv"), "--quiet"]) == 0
    assert main(["batch", str(src), "-o", str(tmp_path / "u.csv"), "--quiet",
                 "--unit", "temperature=[degF]"]) == 2
    assert "give the value in Cel" in capsys.readouterr().err
    assert not (tmp_path / "u.csv").exists()
    assert next(csv.DictReader((tmp_path / "o.csv").open()))["reason"] == said


def test_missing_required_field_is_refused():
    fields = {k: v for k, v in E3.items() if k != "hco3"}
    with pytest.raises(pydantic.ValidationError) as info:
        acidbase.Panel(**fields)
    e = only(info.value.errors(include_url=False))
    assert (e["type"], e["loc"]) == ("missing", ("hco3",))


def test_a_bare_blood_gas_without_sodium_and_chloride_is_read(interpret):
    # Issue example: pH 7.28, pCO2 26, HCO3 12: Winter's 1.5 x 12 + 8 +/- 2 = 24-28 (Albert,
    # Dell & Winters 1967) holds; the gap type is unknown and the gap readings not assessable.
    r = interpret(acidbase.Panel(ph=7.28, pco2=26, hco3=12))
    assert r.status == "interpreted"
    assert {(d.process, d.role, d.anion_gap) for d in r.disorders} == {
        ("metabolic acidosis", "primary", "unknown")}
    assert {"P-WINTERS-MET", "P-GAP-NOT-ASSESSABLE", "D-SBE"} <= set(r.codes())
    assert not {"P-NORMAL-GAP-ACIDOSIS", "P-HIGH-GAP-ACIDOSIS", "D-GAP-UNCORRECTED"} & set(r.codes())


def test_urea_and_bun_together_are_refused_for_the_panel_as_a_whole():
    e = only(refusal(urea=5.0, bun=14.0))
    assert e["type"] == "urea_and_bun" and e["loc"] == ()
    assert e["msg"] == "give urea or urea nitrogen (bun), not both"


# ---------------------------------------------------------------- the batch path keeps the row


def test_batch_keeps_a_refused_row_with_the_same_message():
    cols = {k: np.array([v, v]) for k, v in E3.items()}
    cols["pco2"] = np.array([40.0, 5.3])
    res = acidbase.interpret_many(cols)
    assert res.refused.tolist() == [False, True]
    assert res.interpretation(0).status == "interpreted"
    assert res.interpretation(1).status == "refused"
    assert tuple(map(str, res.interpretation(1).problems)) == (only(refusal(pco2=5.3))["msg"],)
