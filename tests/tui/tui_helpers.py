"""Keying helpers shared by the terminal-app tests (keyboard only, never the mouse)."""

from __future__ import annotations

from textual.pilot import Pilot

#: The fields of the form's first group, in the order a report prints them: the required
#: pH, pCO2 and HCO3-, then Na+ and Cl- (optional since a bare gas is read).
FIRST = ("ph", "pco2", "hco3", "na", "cl")

#: Panels keyed in by the tests, in the order of the first group
#: (pH, pCO2 mm[Hg], HCO3- mmol/L, Na+ mmol/L, Cl- mmol/L).  Each is consistent by
#: Henderson-Hasselbalch: HCO3 = 0.0307 x pCO2 x 10^(pH - 6.105) within 0.5 mmol/L
#: (CLSI C46-A2 constants).
PANELS: dict[str, tuple[str, ...]] = {
    "normal": ("7.40", "40", "24.2", "140", "105"),
    "metabolic acidosis": ("7.30", "29", "14.0", "140", "104"),
    "acute respiratory acidosis": ("7.25", "60", "25.7", "140", "104"),
    "chronic respiratory acidosis": ("7.33", "60", "31.0", "140", "98"),
    "mixed": ("7.20", "40", "15.2", "140", "104"),
}


async def key_in(pilot: Pilot, values: tuple[str, ...]) -> None:
    """Type the first group's values from pH onwards, Tab past the fields between (pO2,
    FiO2, the sample, K+), as a user would."""
    assert len(values) == len(FIRST)
    app = pilot.app
    for name, value in zip(FIRST, values):
        for _ in range(40):
            if app.focused is not None and app.focused.id == name:
                break
            await pilot.press("tab")
        else:  # pragma: no cover - the form lost a field
            raise AssertionError(f"Tab never reached {name}")
        await pilot.press(*value)
    await pilot.pause()


async def keep_two(pilot: Pilot) -> None:
    """Key in and keep an acute, then a chronic respiratory acidosis (serial gases)."""
    await key_in(pilot, PANELS["acute respiratory acidosis"])
    await pilot.press("f5", "ctrl+n")
    await key_in(pilot, PANELS["chronic respiratory acidosis"])
    await pilot.press("f5")
    await pilot.pause()


async def replace_value(pilot: Pilot, name: str, text: str) -> None:
    """Focus field ``name`` with Tab from pH, clear it and type ``text``."""
    app = pilot.app
    app.screen.query_one("#ph").focus()
    await pilot.pause()
    while app.focused is not None and app.focused.id != name:
        await pilot.press("tab")
    await pilot.press("end", "ctrl+u", *text)
    await pilot.pause()


def processes_line(app) -> str:
    """The heading of the processes section, as shown."""
    options = app.screen.query_one("#findings")
    return str(options.get_option("process").prompt)


def trust_line(app) -> str:
    options = app.screen.query_one("#findings")
    return str(options.get_option("trust").prompt)


#: Key names for the characters a panel is typed with.
_CHAR_KEYS = {".": "full_stop", "-": "minus", "\t": "tab", "\r": "enter"}


async def burst(pilot: Pilot, keys: list[str]) -> None:
    """Queue every key at once, with no pause between them (as one SSH packet delivers
    them), then wait for the app to handle them all.

    ``keys`` are single characters or key names ("tab", "enter", "shift+tab").
    """
    from textual import events

    driver = pilot.app._driver
    for key in keys:
        if len(key) == 1:
            event = events.Key(_CHAR_KEYS.get(key, key), key)
        else:
            event = events.Key(key, {"tab": "\t", "enter": "\r"}.get(key))
        event.set_sender(pilot.app)
        driver.send_message(event)
    await pilot.pause()
    await pilot.pause()


def typed(*parts: str) -> list[str]:
    """``typed("7.21", "tab", "40")`` -> the keys: characters of values, names of keys."""
    out: list[str] = []
    for part in parts:
        out += [part] if part in ("tab", "enter", "shift+tab") else list(part)
    return out
