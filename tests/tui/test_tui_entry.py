"""The entry screen, driven by the keyboard alone: fields, reading, refusals, units."""

from __future__ import annotations

import pytest
from pydantic import ValidationError
from textual.widgets import Input
from tui_helpers import PANELS, key_in, processes_line, replace_value, trust_line

import acidbase
from acidbase.fields import NUMERIC
from tui.app import make_app
from tui.screens.finding import FindingScreen
from tui.widgets.form import ValueField
from tui.widgets.reading import ReadingPane


async def test_focus_starts_on_ph():
    app = make_app()
    async with app.run_test(size=(80, 24)):
        assert app.focused.id == "ph"


#: The form's order: the gas as the analyser prints it, FiO2, the sample, the electrolytes.
PRINTOUT = ["ph", "pco2", "po2", "hco3", "fio2", "sample_type", "hco3_source",
            "na", "k", "cl", "ica", "lactate", "glucose", "hb"]


async def test_tab_follows_the_printout_order_with_no_extra_stops():
    """pH, pCO2, pO2, HCO3-, FiO2, sample, electrolytes, every other value, then time and ids."""
    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        seen = [app.focused.id]
        for _ in range(len(NUMERIC) + 3 + 3 - 1):
            await pilot.press("tab")
            seen.append(app.focused.id)
        rest = [s.name for s in NUMERIC if s.name not in PRINTOUT]
        assert seen == [*PRINTOUT, *rest, "pregnancy", "collected_at", "patient_id",
                        "sample_id"]
        await pilot.press("shift+tab")
        assert app.focused.id == "patient_id"


async def test_folding_takes_the_other_values_out_of_the_tab_order():
    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await pilot.press("f3")
        for _ in range(len(PRINTOUT)):
            await pilot.press("tab")
        assert app.focused.id == "collected_at"


# The expected processes follow the published rules the engine implements:
# - normal: pH 7.35-7.45, pCO2 35-45, HCO3 22-26 (Narins & Emmett, Medicine 1980).
# - metabolic acidosis: Winter's formula (Albert, Dell & Winters, Ann Intern Med 1967):
#   expected pCO2 = 1.5 x 14.0 + 8 +/- 2 = 27-31, measured 29; anion gap 140 - 104 - 14 = 22
#   above 12 (Kraut & Madias, Clin J Am Soc Nephrol 2007): high gap.
# - acute respiratory acidosis: HCO3 rises 1 mmol/L per 10 mm[Hg] (acute) and 3.5 (chronic)
#   (Narins & Emmett 1980): at pCO2 60, acute 26 +/- 2, chronic 31 +/- 2; 25.7 is acute.
# - chronic respiratory acidosis: same rule, 31.0 is in the chronic band.
# - mixed: Winter's formula at HCO3 15.2 expects pCO2 28.8-32.8; 40 is above, so a
#   respiratory acidosis is added to the high-gap metabolic acidosis (gap 20.8).
EXPECTED = {
    "normal": "Processes: none",
    "metabolic acidosis": "Processes: metabolic acidosis (high gap, primary)",
    "acute respiratory acidosis": "Processes: respiratory acidosis (acute, primary)",
    "chronic respiratory acidosis": "Processes: respiratory acidosis (chronic, primary)",
    "mixed": "Processes: metabolic acidosis (high gap, primary); "
             "respiratory acidosis (indeterminate, additional)",
}


@pytest.mark.parametrize("kind", list(EXPECTED))
async def test_a_keyed_panel_shows_its_processes(kind):
    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await key_in(pilot, PANELS[kind])
        assert processes_line(app) == EXPECTED[kind]
        # Henderson-Hasselbalch (CLSI C46-A2): the test panels were built consistent.
        assert trust_line(app) == "Trust: consistency consistent"
        pane = app.screen.query_one(ReadingPane)
        assert not pane.stale
        # every finding's line starts with its severity as a word, never by colour alone
        findings = [line for line in pane.lines()
                    if not line.startswith(("Trust", "Processes", "Derived"))]
        assert findings
        assert all(line.split()[0] in ("CRITICAL", "caution", "info") for line in findings)


async def test_the_reading_shows_trust_then_processes_then_derived_values():
    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await key_in(pilot, PANELS["metabolic acidosis"])
        lines = app.screen.query_one(ReadingPane).lines()
        heads = [i for i, line in enumerate(lines) if line.startswith(
            ("Trust", "Processes", "Derived values"))]
        assert [lines[i].split(":")[0] for i in heads] == ["Trust", "Processes",
                                                           "Derived values"]
        # compensation against its expected range, from the finding's own text:
        # Winter's formula (Albert, Dell & Winters 1967): 1.5 x 14.0 + 8 +/- 2 = 27.0-31.0
        # (on screen the unit is written as people write it: mmHg)
        assert any("pCO2 29 mmHg within 27.0-31.0" in line for line in lines)
        # the derived values come after the processes heading: anion gap 140 - (104 + 14) = 22
        # (common practice, no source: the plain gap without K+)
        derived = lines[heads[2]:]
        assert any("Anion gap 22.0 mmol/L" in line for line in derived)


async def test_a_refused_value_shows_the_engines_message_and_keeps_the_reading_stale():
    """...until the value is corrected: then the reading is fresh and follows it."""
    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await key_in(pilot, PANELS["acute respiratory acidosis"])
        before = processes_line(app)
        await replace_value(pilot, "pco2", "5.3")
        field = app.screen.query_one("#field-pco2", ValueField)
        assert field.has_class("-refused")
        shown = str(field.query_one(".field-message").render())
        assert shown == field.message
        # the app's own words, from the engine's range (8-200 mm[Hg], acidbase.fields):
        # the value would be ordinary in kPa, so the key that switches is named
        with pytest.raises(ValidationError) as refused:
            acidbase.Panel(ph=7.25, pco2="5.3", hco3=25.7, na=140, cl=104)
        low, high = (refused.value.errors()[0]["ctx"][k] for k in ("low", "high"))
        assert shown == f"refused: not in {low:g}-{high:g} mmHg; press F2 for kPa"
        pane = app.screen.query_one(ReadingPane)
        assert pane.stale
        assert str(pane.query_one("#reading-state").render()).startswith("STALE")
        assert processes_line(app) == before
        # corrected, the reading is fresh again and follows the new value: pH 7.25 with
        # pCO2 40 and HCO3 25.7 is inconsistent by Henderson-Hasselbalch (CLSI C46-A2:
        # 0.0307 x 40 x 10^(7.25 - 6.105) = 17.1, not 25.7)
        await replace_value(pilot, "pco2", "40")
        assert not pane.stale and not field.has_class("-refused")
        assert trust_line(app) == "Trust: consistency inconsistent"


async def test_switching_the_unit_reads_the_typed_number_in_the_new_unit():
    """5.33 refused as mm[Hg]; F2 makes it kPa, and the reading equals that of 40 mm[Hg]."""
    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await key_in(pilot, PANELS["normal"])
        reference = app.screen.query_one(ReadingPane).reading
        await replace_value(pilot, "pco2", "5.33")
        assert app.screen.query_one("#field-pco2").has_class("-refused")
        await pilot.press("f2")  # a refused number: nothing to convert, no question
        await pilot.pause()
        field = app.screen.query_one("#field-pco2", ValueField)
        assert field.unit == "kPa"
        pane = app.screen.query_one(ReadingPane)
        assert not pane.stale
        reading = pane.reading
        assert reading.disorders == reference.disorders
        assert [f.code for f in reading.findings] == [f.code for f in reference.findings]
        # 5.33 kPa = 39.98 mm[Hg] (UCUM: 1 mm[Hg] = 0.133322 kPa)
        assert reading.inputs["pco2"]["value"] == pytest.approx(40.0, abs=0.05)


async def test_a_field_with_one_unit_says_so_instead_of_switching():
    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await pilot.press("f2")
        await pilot.pause()
        assert app.screen.query_one("#field-ph", ValueField).unit == "[pH]"
        assert "[pH]" not in str(app.screen.query_one("#status").render())
        assert "one unit" in str(app.screen.query_one("#status").render())


async def test_sample_type_is_chosen_with_the_arrow_keys():
    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await key_in(pilot, PANELS["normal"])
        codes = [f.code for f in app.screen.query_one(ReadingPane).reading.findings]
        assert "T-SAMPLE-UNKNOWN" in codes
        await pilot.press(*["shift+tab"] * 4, "right")  # Cl-, K+, Na+, HCO3- source: sample
        await pilot.pause()
        assert app.focused.id == "sample_type" and app.focused.value == "arterial"
        reading = app.screen.query_one(ReadingPane).reading
        assert reading.sample_type == "arterial"
        assert "T-SAMPLE-UNKNOWN" not in [f.code for f in reading.findings]


async def test_pregnancy_is_chosen_like_the_other_answers_and_read_by_the_engine():
    """The vocabulary's words (acidbase.inputs.vocab), stepped with Right; third trimester
    selects the engine's third-trimester intervals (finding T-PREGNANCY-INTERVALS)."""
    from acidbase.inputs.vocab import CHOICE_BY_NAME

    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await key_in(pilot, PANELS["normal"])
        field = app.screen.query_one("#pregnancy")
        assert field.choices == CHOICE_BY_NAME["pregnancy"].words
        field.focus()
        await pilot.pause()
        seen = []
        for _ in field.choices:
            await pilot.press("right")
            await pilot.pause()
            seen.append(field.value)
            if field.value == "third_trimester":
                break
        assert seen[-1] == "third_trimester"
        assert app.screen.form.data()["pregnancy"] == "third_trimester"
        codes = [f.code for f in app.screen.query_one(ReadingPane).reading.findings]
        assert "T-PREGNANCY-INTERVALS" in codes
        # the answer is drawn whole in the form's width, in words
        drawn = field.render_lines(field.region.reset_offset)[0].text
        assert drawn.rstrip().endswith("< 3rd trimester >")
        await pilot.press("right")
        await pilot.pause()
        codes = [f.code for f in app.screen.query_one(ReadingPane).reading.findings]
        assert "T-PREGNANCY-INTERVALS" not in codes


async def test_a_finding_opens_with_its_working_and_full_citations():
    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await key_in(pilot, PANELS["metabolic acidosis"])
        first = app.screen.query_one(ReadingPane).reading.findings[0]
        await pilot.press("ctrl+r")  # to the reading; the first finding is highlighted
        await pilot.press("enter")
        await pilot.pause()
        assert isinstance(app.screen, FindingScreen)
        assert app.screen.finding == first
        assert str(app.screen.query_one("#finding-text").render()) == first.text
        assert str(app.screen.query_one("#finding-working").render()) == first.working
        sources = str(app.screen.query_one("#finding-sources").render()).split("\n")
        assert sources == [f"- {c.full()}" for c in first.citations]
        await pilot.press("escape")
        assert app.focused.id == "findings"


async def test_a_panel_given_on_the_command_line_opens_read():
    panel = acidbase.Panel(ph=7.30, pco2=29, hco3=14.0, na=140, cl=104)
    app = make_app(panel=panel)
    async with app.run_test(size=(80, 24)) as pilot:
        await pilot.pause()
        assert app.screen.query_one("#ph", Input).value == "7.3"
        assert processes_line(app) == EXPECTED["metabolic acidosis"]


