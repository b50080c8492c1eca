"""The ``acidbase`` command: check, demo, batch, tui.

Exit status: 0 when a panel was read (whatever it showed), 2 when input was
refused or the command could not run; the message goes to stderr, never a
traceback.  141 when the reader of standard output closed it early (``| head``),
quietly; 130 on Ctrl-C.  ``acidbase batch`` documents its own (docs/batch.md).
"""

from __future__ import annotations

import argparse
import json
import sys
from collections.abc import Sequence
from typing import Any

from . import audit
from .api import interpret_many
from .commands import command_word
from .config import ENV_VAR, OBSERVATION_STATUSES
from .config import resolve as resolve_site
from .errors import AcidBaseError
from .files.outputs import StdoutRefused, emit
from .fields import BY_NAME, NUMERIC, TEXT_FIELDS
from .inputs.panel import unit_refusal
from .inputs.vocab import CHOICES
from .reference import Settings
from .report import as_text, wrap_lines
from .results import CAUTION

EXIT_OK, EXIT_REFUSED = 0, 2
#: Standard output closed by its reader: 128 + SIGPIPE, as a shell reports it.
EXIT_CLOSED_PIPE = 141


class Parser(argparse.ArgumentParser):
    """argparse's parser, except that help and ``--version`` go to standard output through
    ``emit``: argparse drops a refused write (``--help > /dev/full`` ended with 0), and
    its last flush came at the interpreter's exit, where a failure is not reported."""

    def _print_message(self, message: str, file=None) -> None:
        if message and file is not None and file is sys.stdout:
            emit(message)
        else:
            super()._print_message(message, file)


def setting_number(text: str) -> float:
    """An option's number (argparse ``type``), read by the one cell reader as a panel
    value is: Python's ``float`` would take '４４', '4_4' and 'inf'."""
    from .inputs.cells import read_setting

    value = read_setting(text)
    if value is None:
        raise argparse.ArgumentTypeError(
            f"{text!r} is not a number (the digits 0-9, an optional sign, point and "
            "exponent; no digit grouping, NaN or infinity)")
    return value


def setting_count(text: str) -> int:
    """An option's whole number (argparse ``type``), read as ``setting_number`` reads."""
    value = setting_number(text)
    if not value.is_integer():
        raise argparse.ArgumentTypeError(f"{text!r} is not a whole number")
    return int(value)


def _help(text: str) -> str:
    return text.replace("%", "%%")  # argparse formats help strings with %


class Once(argparse.Action):
    """Store an option's value; the same option again with another value is refused
    (argparse would keep the last): which of two values was meant cannot be told, as
    with a JSON Lines key given twice (docs/input.md)."""

    def __call__(self, parser, namespace, values, option_string=None) -> None:
        before = getattr(namespace, self.dest, None)
        if before is not None and before != values:
            raise argparse.ArgumentError(
                self, f"given twice ({before!r}, then {values!r}); give it once")
        setattr(namespace, self.dest, values)


def add_panel_options(p: argparse.ArgumentParser) -> None:
    """One option per panel field and one per unit (shared by check and tui)."""
    g = p.add_argument_group("panel values", "required: --ph --pco2 --hco3; without --na "
                             "and --cl the gap-based readings are not assessable")
    for spec in NUMERIC:
        opt = spec.name.replace("_", "-")
        g.add_argument(f"--{opt}", dest=spec.name, metavar="X", action=Once,
                       help=_help(f"{spec.title} [{spec.unit}]. {spec.help}"))
    u = p.add_argument_group("units (UCUM spellings; default is the first listed)")
    for spec in NUMERIC:
        if len(spec.units) > 1:
            u.add_argument(f"--{spec.name}-unit", dest=f"{spec.name}_unit", metavar="UNIT",
                           action=Once,
                           help=_help(f"unit of {spec.title}: {', '.join(spec.units)}"))
    c = p.add_argument_group("sample")
    # No argparse choices=: the words are read by the library's one choice reader,
    # so "Arterial" reads here as it does in a file.
    for choice in CHOICES:
        c.add_argument(f"--{choice.name.replace('_', '-')}", dest=choice.name, metavar="WORD",
                       action=Once,
                       help=_help(f"{choice.help} ({', '.join(choice.words)}; default "
                                  f"{choice.default})"))
    c.add_argument("--decimal", choices=(".", ","), default=".",
                   help="decimal mark of the values given (default .)")
    for name in TEXT_FIELDS:
        c.add_argument(f"--{name.replace('_', '-')}", dest=name, metavar="TEXT", action=Once)
    add_settings_options(p)


def add_settings_options(p: argparse.ArgumentParser) -> None:
    """The laboratory settings (shared by check, tui and batch)."""
    s = p.add_argument_group("laboratory settings")
    s.add_argument("--anion-gap-interval", nargs=2, type=setting_number, metavar=("LOW", "HIGH"),
                   help="local anion-gap reference interval, mmol/L (default 6 12 without K+)")
    s.add_argument("--anion-gap-with-k", action="store_true",
                   help="judge the anion gap with K+ included (interval default 10 16)")
    s.add_argument("--reference-albumin", type=setting_number, metavar="G_PER_L",
                   help="albumin to correct the gap to, g/L (default 44)")
    s.add_argument("--fhir-status", choices=OBSERVATION_STATUSES, metavar="STATUS",
                   help="FHIR Observation status of machine readings: "
                        f"{', '.join(OBSERVATION_STATUSES)} (default preliminary)")
    add_config_option(s)


def configure_batch_parser(p: argparse.ArgumentParser) -> None:
    """Options of ``acidbase batch``."""
    from . import serial as serial_defaults
    from .files.formats import FORMATS
    from .profile import FINDINGS, PROFILES

    p.description = (
        "Check every panel in a file (CSV, JSON Lines or Parquet) and write one output row "
        "per input row, in input order, with status, reason, findings and serial checks. "
        + CAUTION)
    p.add_argument("input", metavar="INPUT",
                   help="panel file (.csv, .jsonl, .parquet, or .hl7: HL7 v2 ORU^R01 messages), "
                        "or - for standard input")
    p.add_argument("-o", "--output", metavar="OUTPUT", action=Once,
                   help="output file (.csv, .jsonl, .parquet); default: CSV on stdout")
    g = p.add_argument_group("reading")
    g.add_argument("--format", choices=(*FORMATS, "hl7"),
                   help="input format (default: from the name and the first bytes)")
    g.add_argument("--delimiter", metavar="CHAR",
                   help="CSV delimiter: , ; | or tab (default: detected)")
    g.add_argument("--decimal", choices=(".", ","), help="decimal mark (default: detected)")
    g.add_argument("--encoding", default="utf-8", help="text encoding (default utf-8, BOM or not)")
    g.add_argument("--map", metavar="FILE", dest="mapping",
                   help="mapping file: CSV with columns header,field[,unit] for a laboratory's "
                        "own export headers")
    g.add_argument("--unit", action="append", default=[], metavar="FIELD=UNIT",
                   help="unit of a column, e.g. pco2=kPa (repeatable; default: the field's "
                        "canonical unit)")
    g.add_argument("--missing", action="append", default=[], metavar="TOKEN",
                   help="a cell text that means 'not measured', e.g. --missing NA (repeatable; "
                        "only empty cells by default)")
    g.add_argument("--strict-columns", action="store_true",
                   help="stop when a column is not recognised (default: pass it through)")
    g.add_argument("--chunk-rows", type=setting_count, default=1 << 14, metavar="N",
                   help="rows per chunk (memory vs speed; default 16384)")
    s = p.add_argument_group("serial checks (need patient_id and collected_at)")
    s.add_argument("--window-hours", type=setting_number, default=None,
                   metavar="H", help="compare panels of a patient at most H hours apart "
                                     "(default: the site file, else "
                                     f"{serial_defaults.DEFAULT_WINDOW_HOURS:g})")
    s.add_argument("--delta", action="append", default=[], metavar="FIELD=LIMIT",
                   help="the laboratory's delta limit for a field, canonical unit, or 'off' "
                        "(repeatable)")
    s.add_argument("--no-serial", action="store_true", help="skip the serial checks")
    s.add_argument("--history", metavar="PATH",
                   help="history store: compare with each patient's panels from earlier runs, "
                        "then add this run's (patient ids stored as keyed hashes; the site key "
                        "in ACIDBASE_HISTORY_KEY)")
    s.add_argument("--history-retention-days", type=setting_number, default=None, metavar="DAYS",
                   help="prune stored panels collected longer ago (default 30; needs a "
                        "history store)")
    o = p.add_argument_group("output")
    o.add_argument("--output-format", choices=(*FORMATS, "fhir"),
                   help="default: from the name; fhir: one FHIR R4 Bundle per panel, one per "
                        "line (needs acidbase[fhir])")
    o.add_argument("--output-delimiter", default=None, metavar="CHAR",
                   help="CSV output delimiter: , ; | or tab (default , or tab for a .tsv "
                        "output)")
    o.add_argument("--summary", metavar="FILE", action=Once,
                   help="write the summary here (.json for JSON) instead of stderr")
    o.add_argument("--report", metavar="FILE", action=Once,
                   help="summary report with flagged rows and the pCO2-HCO3 plane (.md or .html)")
    o.add_argument("--profile", default="lean", choices=PROFILES,
                   help="output columns: lean (default; see docs/batch.md) or full (every "
                        "finding, derived value, role and serial sentence)")
    o.add_argument("--derived", default=None, metavar="lab|all|none|NAME,...",
                   help="derived-value columns to write (default: the profile's; lab: the "
                        "calculated HCO3- and its difference, anion gap, corrected gap, SBE)")
    o.add_argument("--findings", default=None, choices=FINDINGS,
                   help="finding codes to write: caution (caution and critical; lean's "
                        "default) or all")
    o.add_argument("--quiet", action="store_true", help="no progress bar")
    add_settings_options(p)


def add_config_option(p: argparse.ArgumentParser) -> None:
    """``--config FILE`` (check, batch, tui and config show)."""
    p.add_argument("--config", metavar="FILE",
                   help=f"site configuration (TOML); default: ${ENV_VAR}, else "
                        "$XDG_CONFIG_HOME/acidbase/config.toml if it exists. Options "
                        "override the file")


def cmd_config(args: argparse.Namespace) -> int:
    """``acidbase config show``: every setting in force and where it came from."""
    emit(resolve_site(args).show() + "\n")
    return EXIT_OK


def panel_from_args(args: argparse.Namespace) -> dict[str, Any]:
    data: dict[str, Any] = {}
    for spec in NUMERIC:
        value = getattr(args, spec.name, None)
        if value is not None:
            data[spec.name] = value
        unit = getattr(args, f"{spec.name}_unit", None)
        if unit is not None:
            data[f"{spec.name}_unit"] = unit
    for name in (*(c.name for c in CHOICES), *TEXT_FIELDS):
        value = getattr(args, name, None)
        if value is not None:
            data[name] = value
    return data


def settings_from_args(args: argparse.Namespace) -> Settings:
    """The laboratory settings: built-in defaults, the site file, then the options."""
    return resolve_site(args).settings


def _refuse(lines: Sequence[str]) -> int:
    print("acidbase: panel refused:", file=sys.stderr)
    for line in lines:
        print(f"  - {line}", file=sys.stderr)
    return EXIT_REFUSED


def panel_columns(args: argparse.Namespace, site_units: dict[str, str]
                  ) -> tuple[dict[str, list[Any]], dict[str, str]]:
    """The panel given as options, as one-row columns of the cells as typed, and the
    units: each unit option given (checked even without its value, as a form would),
    else the site's default unit for a value given."""
    columns: dict[str, list[Any]] = {}
    units: dict[str, str] = {}
    for spec in NUMERIC:
        value = getattr(args, spec.name, None)
        unit = getattr(args, f"{spec.name}_unit", None)
        if value is not None:
            columns[spec.name] = [value]
            if unit is None:
                unit = site_units.get(spec.name)
        if unit is not None:
            units[spec.name] = unit
    for choice in CHOICES:
        value = getattr(args, choice.name, None)
        if value is not None:
            columns[choice.name] = [value]
    return columns, units


def unit_refusals(units: dict[str, str]) -> list[str]:
    """A line for each unit its field does not accept, as ``Panel`` words it."""
    return [line for name, unit in units.items()
            if (line := unit_refusal(BY_NAME[name], unit)) is not None]


def cmd_check(args: argparse.Namespace) -> int:
    """One panel, read as a batch of one: the options go through the cell reader and the
    column screen that files go through (no pydantic model), so a cell given here is
    refused, or read, with the same words as in a file."""
    started = audit.now()
    site = resolve_site(args)
    columns, units = panel_columns(args, site.units)
    bad_units = unit_refusals(units)
    if bad_units:
        return _refuse(bad_units)
    it = interpret_many(columns, units, site.settings, decimal=args.decimal).interpretation(0)
    if it.status == "refused":
        return _refuse([str(p) for p in it.problems])
    if args.fhir:
        from .fhir import check_bundle_json

        panel = _validated_panel(args, site.units)
        if isinstance(panel, int):
            return panel
        emit(check_bundle_json(panel, it, site, started) + "\n")
        return EXIT_OK
    # The ids given (they were read only into the FHIR Bundle: the text and JSON readings
    # carried no sign of the panel they were of).
    identity = {name: getattr(args, name) for name in TEXT_FIELDS
                if getattr(args, name, None) is not None}
    if args.json:
        doc = {**it.to_dict(), **identity}  # the ids given, as demo --json names them
        doc["audit"] = audit.record(site, started)
        emit(json.dumps(doc, indent=2, ensure_ascii=False, allow_nan=False) + "\n")
    else:
        emit(as_text(it, working=not args.brief, identity=identity))
    return EXIT_OK


def _validated_panel(args: argparse.Namespace, site_units: dict[str, str] | None = None):
    """The options as the library's validated ``Panel`` (pydantic; for the surfaces that
    need the model: the FHIR bundle and the app), or the refusal's exit status."""
    from pydantic import ValidationError

    from .inputs.panel import Panel, describe

    data = panel_from_args(args)
    for name, unit in (site_units or {}).items():  # the site's default units, where none
        if name in data:
            data.setdefault(f"{name}_unit", unit)
    try:
        return Panel.model_validate(data, context={"decimal": args.decimal})
    except ValidationError as e:
        return _refuse(describe(e))


def cmd_demo(args: argparse.Namespace) -> int:
    from .demo import DEMO_PANELS

    columns: dict[str, list[Any]] = {}
    names = [s.name for s in NUMERIC] + [c.name for c in CHOICES]
    for name in names:
        columns[name] = [p.get(name) for p in DEMO_PANELS]
    numeric = {s.name for s in NUMERIC}
    cols = {k: ([float("nan") if v is None else v for v in vals] if k in numeric else vals)
            for k, vals in columns.items()}
    results = interpret_many(cols)
    if args.json:
        docs = []
        for i, p in enumerate(DEMO_PANELS):
            d = results.interpretation(i).to_dict()
            d["sample_id"], d["note"] = p["sample_id"], p["note"]
            docs.append(d)
        emit(json.dumps({"caution": CAUTION, "panels": docs}, indent=2, allow_nan=False) + "\n")
        return EXIT_OK
    lines = [*wrap_lines(CAUTION), "",
             "Demo: one night's blood gases on an invented respiratory high-dependency unit.",
             "Each panel is read in full by `acidbase check`; here, the statements only."]
    for i, p in enumerate(DEMO_PANELS):
        it = results.interpretation(i)
        lines.append("")
        lines += wrap_lines(f"=== {p['sample_id']} {p['collected_at']} {p['patient_id']}: "
                            f"{p['note']}", hang="    ")
        if it.status == "refused":
            lines.append("  refused:")
            for problem in it.problems:
                lines += wrap_lines(str(problem), "    - ", hang="      ")
            continue
        labels = "; ".join(d.label() for d in it.disorders) or "none"
        status = it.consistency.status if it.consistency else "not assessable"
        lines.append(f"  consistency: {status}")
        lines += wrap_lines(f"disorders:   {labels}", "  ", hang="               ")
        for f in it.findings:
            if f.severity != "info" or f.section == "process":
                lines += wrap_lines(f"[{f.severity}] {f.code}: {f.text}", "  ", hang="      ")
    lines += ["", *wrap_lines(CAUTION)]
    emit("\n".join(lines) + "\n")
    return EXIT_OK


def cmd_batch(args: argparse.Namespace) -> int:
    from . import batch

    # Built inside the run, so a bad setting is reported as the run's own failure.
    args.make_settings = lambda: settings_from_args(args)
    return batch.run(args)


def cmd_shard(args: argparse.Namespace) -> int:
    from .scale import shard

    try:
        files = shard(args.input, args.folder, args.shards, patient_column=args.patient_column)
    except OSError as e:
        where = f"{e.filename}: " if e.filename is not None else ""
        print(f"acidbase shard: could not run: {where}{e.strerror or e}; no shard file "
              "written", file=sys.stderr)
        return EXIT_REFUSED
    print(f"{len(files)} shard files in {args.folder}", file=sys.stderr)
    return EXIT_OK


def cmd_history(args: argparse.Namespace) -> int:
    from . import history_command

    return history_command.run(args)


def cmd_tui(args: argparse.Namespace) -> int:
    panel = None
    if panel_from_args(args):
        panel = _validated_panel(args)
        if isinstance(panel, int):
            return panel
    from tui.app import make_app

    site = resolve_site(args)
    make_app(panel=panel, demo=args.demo, settings=site.settings, history=site.history_path,
             site=site).run()
    return EXIT_OK


def configure_history_parser(p: argparse.ArgumentParser) -> None:
    """Options of ``acidbase history`` (acidbase.history_command runs it)."""
    p.description = _help(
        "Show what a history store holds (panels, patients, collection dates, runs recorded), "
        "export one patient's stored panels, or purge them. " + CAUTION)
    p.add_argument("store", metavar="STORE", help="the history store (acidbase batch --history)")
    p.add_argument("--patient", metavar="ID",
                   help="a patient id (hashed with the site key in ACIDBASE_HISTORY_KEY; "
                        "never stored)")
    what = p.add_mutually_exclusive_group()
    what.add_argument("--export", action="store_true",
                      help="write the patient's stored panels as CSV (-o FILE or standard output)")
    what.add_argument("--purge", action="store_true", help="remove the patient's stored panels")
    what.add_argument("--prune", action="store_true",
                      help="remove panels collected before the retention period now")
    p.add_argument("--retention-days", type=setting_number, default=30.0, metavar="DAYS",
                   help="retention period for --prune (default 30)")
    p.add_argument("-o", "--output", metavar="FILE", help="file for --export")
    p.add_argument("--json", action="store_true", help="the summary as JSON")


def build_parser(command: str | None = None) -> argparse.ArgumentParser:
    """The whole command line; with ``command``, only that command's options are added
    (the others are listed with their one-line help, as ``--help`` shows them), so a
    run builds, and imports for, the options it can use and no other."""
    parser = Parser(
        prog="acidbase",
        description=_help("Check and interpret blood-gas and electrolyte panels. " + CAUTION))
    sub = parser.add_subparsers(dest="command", required=True, metavar="COMMAND")
    versioned: list[argparse.ArgumentParser] = []  # the commands that take --version

    def add(name: str, configure, version: bool = True, **kw: Any) -> None:
        p = sub.add_parser(name, **kw)
        if command is None or command == name:
            configure(p)
            if version:
                versioned.append(p)

    add("check", _configure_check, help="read one panel given as options",
        description=_help("Read one panel: trust, processes, derived values. " + CAUTION))
    add("demo", _configure_demo, help="read the built-in demo panels",
        description=_help("Read the built-in demo panels (invented). " + CAUTION))
    add("batch", _configure_batch, help="check a file of panels")
    add("shard", _configure_shard, version=False,
        help="split a file into Parquet shards by patient",
        description=_help("Split INPUT into Parquet files, a patient's rows always in the same "
                          "one, for checking shard by shard (docs/scale.md). " + CAUTION))
    add("history", _configure_history, version=False,
        help="what a history store holds; export or purge a patient")
    add("tui", _configure_tui, help="the keyboard-only terminal app",
        description=_help("The keyboard-only terminal app: key in a panel and read it as "
                          "you type. " + CAUTION))
    add("config", _configure_config, help="the site configuration in force",
        description=_help("Show the settings in force and where each came from (built-in "
                          "default, configuration file, option). " + CAUTION))
    for p in (parser, *versioned):
        p.add_argument("--version", action="version", version=f"acidbase {audit.version()}")
    return parser


def _configure_check(check: argparse.ArgumentParser) -> None:
    add_panel_options(check)
    check.add_argument("--json", action="store_true", help="print the JSON document")
    check.add_argument("--brief", action="store_true", help="leave out the working")
    check.add_argument("--fhir", action="store_true",
                       help="print the reading as a FHIR R4 Bundle (JSON; needs acidbase[fhir])")
    check.set_defaults(func=cmd_check)


def _configure_demo(demo: argparse.ArgumentParser) -> None:
    demo.add_argument("--json", action="store_true")
    demo.set_defaults(func=cmd_demo)


def _configure_batch(batch: argparse.ArgumentParser) -> None:
    configure_batch_parser(batch)
    batch.set_defaults(func=cmd_batch)


def _configure_shard(shard: argparse.ArgumentParser) -> None:
    shard.add_argument("input", metavar="INPUT")
    shard.add_argument("folder", metavar="FOLDER", help="where the shard files go (created)")
    shard.add_argument("--shards", type=setting_count, default=16, metavar="N",
                       help="number of shards (default 16)")
    shard.add_argument("--patient-column", metavar="HEADER",
                       help="the patient id column (default: the one read as patient_id)")
    shard.set_defaults(func=cmd_shard)


def _configure_history(hist: argparse.ArgumentParser) -> None:
    configure_history_parser(hist)
    hist.set_defaults(func=cmd_history)


def _configure_tui(tui: argparse.ArgumentParser) -> None:
    add_panel_options(tui)
    tui.add_argument("--demo", action="store_true", help="open with the demo panels loaded")
    tui.add_argument("--history", metavar="PATH",
                     help="use this history store: show a patient's stored panels and check "
                          "the panel against them; Ctrl+T, then K, keeps a panel in it (the "
                          "site key in ACIDBASE_HISTORY_KEY; without this option no store is "
                          "read or written)")
    tui.set_defaults(func=cmd_tui)


def _configure_config(config: argparse.ArgumentParser) -> None:
    config_sub = config.add_subparsers(dest="action", required=True, metavar="ACTION")
    show = config_sub.add_parser("show", help="print every setting and its origin",
                                 description=_help("Print every setting in force and its "
                                                   "origin. " + CAUTION))
    add_settings_options(show)
    show.set_defaults(func=cmd_config)
    show.add_argument("--version", action="version", version=f"acidbase {audit.version()}")


def main(argv: Sequence[str] | None = None) -> int:
    """Run one command; its exit status (module docstring).  A reader that closes
    standard output early (``acidbase demo | head``) ends the command quietly with 141."""
    if argv is None:
        argv = sys.argv[1:]
    parser = build_parser(command_word(argv))
    try:
        args = parser.parse_args(argv)
    except BrokenPipeError:  # --help into a closed pipe
        from .files.outputs import silence_stdout

        silence_stdout()
        return EXIT_CLOSED_PIPE
    except StdoutRefused as refused:  # --help or --version into a full disk
        return _stdout_refused(refused, command_word(argv))
    if sys.stdout is None and args.command in ("check", "demo", "tui"):
        print(f"acidbase {args.command}: standard output is closed; nothing to write to",
              file=sys.stderr)
        return EXIT_REFUSED
    try:
        status = int(args.func(args))
        if sys.stdout is not None:
            emit("")  # a closed pipe or a full disk shows here, not at the interpreter's exit
        return status
    except BrokenPipeError:
        from .files.outputs import silence_stdout

        silence_stdout()
        return EXIT_CLOSED_PIPE
    except AcidBaseError as e:
        print(f"acidbase: {e}", file=sys.stderr)
        return EXIT_REFUSED
    except StdoutRefused as refused:
        return _stdout_refused(refused, args.command)
    except OSError as e:  # a file the command read or wrote
        where = f"{e.filename}: " if e.filename is not None else ""
        print(f"acidbase {args.command}: could not run: {where}{e.strerror or e}",
              file=sys.stderr)
        return EXIT_REFUSED
    except KeyboardInterrupt:
        return 130


def _stdout_refused(refused: StdoutRefused, command: str) -> int:
    """Say that standard output refused a write, on one line, and let the interpreter's
    last flush raise nothing more."""
    from .files.outputs import silence_stdout

    silence_stdout()
    e = refused.error
    print(f"acidbase{' ' + command if command else ''}: standard output: {e.strerror or e}; "
          "what was written is incomplete", file=sys.stderr)
    return EXIT_REFUSED


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
