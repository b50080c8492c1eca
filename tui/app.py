"""The keyboard-only terminal app: key in a panel and see, as you type, what it shows.

A surface over the library: it builds a panel, calls ``acidbase.interpret`` and
shows the findings.  ``make_app`` is the one factory, used by ``acidbase tui``
and by the tests.  What the first screen does not need is imported when first
used, so the app opens quickly.
"""

from __future__ import annotations

import sys
from datetime import datetime
from pathlib import Path
from typing import TYPE_CHECKING, Any, ClassVar

from textual.app import App
from textual.binding import Binding, BindingType

import acidbase
from acidbase.files.outputs import OutputError, OutputSet

from . import prefs
from .screens.entry import EntryScreen
from .sitting import Sitting, SittingFileError, demo_entries, read_csv, write_csv

if TYPE_CHECKING:
    from .store import StoreLink


def now() -> datetime:
    """The time of a reading: local time with its offset (for the report and file names)."""
    return datetime.now().astimezone().replace(microsecond=0)


class NoTerminal(acidbase.AcidBaseError, RuntimeError):
    """The app was started without a terminal to draw on and read keys from."""


class AcidBaseApp(App[None]):
    """Holds the sitting, the units and the settings; the screens do the showing."""

    CSS_PATH = "app.tcss"
    TITLE = "acidbase"
    ENABLE_COMMAND_PALETTE = False
    BINDINGS: ClassVar[list[BindingType]] = [
        Binding("f1", "help", "help", tooltip="Show every key and the full caution.",
                id="help", priority=True),
        Binding("ctrl+q", "quit", "quit", tooltip="Quit (asks first while kept panels are "
                "not saved).", id="quit", priority=True),
    ]

    def run(self, *args: Any, **kwargs: Any) -> None:
        """Run in the terminal; without one (``acidbase tui > file``, ``< /dev/null``) say
        so, instead of drawing into a file and waiting for keys that cannot come.
        (Tests drive the app with ``run_test``, which this does not touch.)"""
        missing = [name for name, stream in (("input", sys.stdin), ("output", sys.stdout))
                   if stream is None or not stream.isatty()]
        if missing and not kwargs.get("headless"):  # headless (snapshots) draws nowhere
            raise NoTerminal(
                f"tui needs a terminal (standard {' and '.join(missing)} "
                f"{'is' if len(missing) == 1 else 'are'} not one); acidbase check reads one "
                "panel, acidbase batch a file")
        return super().run(*args, **kwargs)

    def __init__(self, panel: acidbase.Panel | None = None, demo: bool = False,
                 settings: acidbase.Settings | None = None,
                 store: StoreLink | None = None) -> None:
        super().__init__()
        self.store = store
        """The history store, when asked for (``--history``); None: no store is touched."""
        self.settings = settings or acidbase.Settings()
        """The laboratory's settings, passed to every interpretation."""
        self.initial_panel = panel
        """A panel given on the command line, shown first."""
        self.sitting = Sitting()
        """The panels kept while the app runs."""
        self.panel: acidbase.Panel | None = None
        """The panel the form holds now, when the engine accepts it."""
        self.units: dict[str, str] = prefs.load_units()
        """The unit chosen per field: kept for the sitting and in the settings file."""
        if demo:
            self.sitting.entries = demo_entries()
            self.sitting.current = 0

    def get_default_screen(self) -> EntryScreen:
        return EntryScreen()

    def action_help(self) -> None:
        from .screens.help import HelpScreen

        # F1 is the app's key (a priority binding, taken before the help screen's own):
        # on the help screen it closes it, as the key line there says.
        if isinstance(self.screen, HelpScreen):
            self.pop_screen()
        else:
            self.push_screen(HelpScreen())

    async def action_quit(self) -> None:
        s = self.sitting
        if not (s.unsaved and s.entries):
            self.exit()
            return
        from .screens.confirm import ConfirmScreen

        if isinstance(self.screen, ConfirmScreen):
            return
        self.push_screen(ConfirmScreen(
            (f"{panels(len(s.entries))} kept in this sitting "
             f"{'is' if len(s.entries) == 1 else 'are'} not saved (Ctrl+S, then CSV, saves "
             f"{'it' if len(s.entries) == 1 else 'them'})."),
            f"quit without saving {'it' if len(s.entries) == 1 else 'them'}", "stay"),
            lambda yes: self.exit() if yes else None)

    def remember_unit(self, name: str, unit: str) -> None:
        """The field's unit for the rest of the sitting and the next one."""
        self.units[name] = unit
        problem = prefs.save_units(self.units)
        if problem:
            self.notify(problem, severity="warning")

    # -- reports and files -------------------------------------------------------
    def report_text(self, reading: acidbase.Interpretation, data: dict[str, Any],
                    markdown: bool = False) -> str:
        from .chart import chart_report

        return chart_report(reading, data, self.settings, now(), markdown)

    def default_names(self, data: dict[str, Any]) -> dict[str, str]:
        """The file name offered for each kind: the sample id and the time."""
        from .chart import default_name

        when = now()
        return {"text": default_name(data, when, "txt"),
                "markdown": default_name(data, when, "md"),
                "csv": f"acidbase-series-{when:%Y%m%d-%H%M}.csv"}

    def save(self, kind: str, path: str, reading: acidbase.Interpretation | None,
             data: dict[str, Any] | None = None, replace: bool = False) -> str:
        """Write the report or the series; returns what to tell the user (``try_save``)."""
        return self.try_save(kind, path, reading, data, replace)[1]

    def try_save(self, kind: str, path: str, reading: acidbase.Interpretation | None,
                 data: dict[str, Any] | None = None, replace: bool = False
                 ) -> tuple[bool, str]:
        """Write the report or the series; returns (written, what to tell the user).

        An existing file is replaced only when ``replace`` (the user said so).  A
        failure names the path and the reason, and leaves the sitting unsaved.
        """
        target = Path(path).expanduser()
        if target.exists() and not replace:
            return False, f"Not saved: {target} exists (asked before replacing)."
        try:
            if kind == "csv":
                written, left_out = write_csv(target, self.sitting.entries)
                self.sitting.unsaved = False
                note = (f"; left out (refused, in a unit other than the file's): "
                        f"{', '.join(map(str, left_out))}" if left_out else "")
                return True, f"Saved {panels(written)} to {target}{note}."
            if reading is None:
                return False, "Nothing to save yet: no reading."
            text = self.report_text(reading, data or {}, markdown=kind == "markdown")
            write_text(target, text)
        except (OSError, OutputError) as e:
            reason = str(e)  # the path, where the error does not name it
            return False, (f"Not saved: {reason}" if str(target) in reason else
                           f"Not saved: {target}: {reason}")
        return True, f"Saved the report to {target}."

    def load(self, path: str) -> tuple[str, int | None]:
        """Add a series file's panels; returns (message, index of the first one added)."""
        target = Path(path).expanduser()
        try:
            entries, notes = read_csv(target)
        except SittingFileError as e:
            return f"Not loaded: {e}", None
        if not entries:
            return f"{target} holds no panels.", None
        first = len(self.sitting.entries)
        self.sitting.entries.extend(entries)
        refused = sum(1 for e in entries if e.panel() is None)
        extra = [f"{refused} refused by the engine"] if refused else []
        return (f"Loaded {panels(len(entries))} from {target}"
                + "".join(f"; {n}" for n in extra + notes) + "."), first


def panels(n: int) -> str:
    """"1 panel", "2 panels" (the app's messages count panels)."""
    return f"{n} panel" if n == 1 else f"{n} panels"


def write_text(target: Path, text: str) -> None:
    """A report file, staged and renamed into place whole (``acidbase.files.outputs``)."""
    with OutputSet() as out:
        out.add("report file", str(target)).file.write(text.encode("utf-8"))
        out.commit()


def make_app(panel: acidbase.Panel | None = None, demo: bool = False,
             settings: acidbase.Settings | None = None, history: str | None = None,
             site: Any = None) -> AcidBaseApp:
    """The app, opened on ``panel`` or on the demo panels; with ``history`` (a path), linked
    to that history store, with the serial limits of ``site`` (``acidbase.config.Site``)."""
    store = None
    if history:  # imported only then: the store's reader (pyarrow) is not needed otherwise
        from .store import StoreLink

        store = StoreLink(str(Path(history).expanduser()),
                          deltas=dict(getattr(site, "deltas", None) or {}),
                          window_hours=getattr(site, "window_hours", None),
                          settings={"settings_sha256": site.sha256()} if site else {})
    return AcidBaseApp(panel=panel, demo=demo, settings=settings, store=store)
