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

from pydantic import ValidationError

from .api import interpret, interpret_many
from .errors import AcidBaseError
from .fields import HCO3_SOURCES, NUMERIC, SAMPLE_TYPES, TEXT_FIELDS
from .model import Panel, describe
from .reference import Settings
from .report import as_text
from .results import CAUTION

EXIT_OK, EXIT_REFUSED = 0, 2
#: Standard output closed by its reader: 128 + SIGPIPE, as a shell reports it.
EXIT_CLOSED_PIPE = 141


def _help(text: str) -> str:
    return text.replace("%", "%%")  # argparse formats help strings with %


def add_panel_options(p: argparse.ArgumentParser) -> None:
    """One option per panel field and one per unit (shared by check and tui)."""
    g = p.add_argument_group("panel values (required: --ph --pco2 --hco3 --na --cl)")
    for spec in NUMERIC:
        opt = spec.name.replace("_", "-")
        g.add_argument(f"--{opt}", dest=spec.name, metavar="X",
                       help=_help(f"{spec.title} [{spec.unit}]. {spec.help}"))
    u = p.add_argument_group("units (UCUM spellings; default is the first listed)")
    for spec in NUMERIC:
        if len(spec.units) > 1:
            u.add_argument(f"--{spec.name}-unit", dest=f"{spec.name}_unit", metavar="UNIT",
                           help=_help(f"unit of {spec.title}: {', '.join(spec.units)}"))
    c = p.add_argument_group("sample")
    c.add_argument("--sample-type", choices=SAMPLE_TYPES, help="default: unknown")
    c.add_argument("--hco3-source", choices=HCO3_SOURCES,
                   help="analyser: HCO3- calculated by the blood-gas analyser; chemistry: "
                        "measured total CO2 (default: unknown)")
    for name in TEXT_FIELDS:
        c.add_argument(f"--{name.replace('_', '-')}", dest=name, metavar="TEXT")
    add_settings_options(p)


def add_settings_options(p: argparse.ArgumentParser) -> None:
    """The laboratory settings (shared by check, tui and batch)."""
    s = p.add_argument_group("laboratory settings")
    s.add_argument("--anion-gap-interval", nargs=2, type=float, metavar=("LOW", "HIGH"),
                   help="local anion-gap reference interval, mmol/L (default 6 12 without K+)")
    s.add_argument("--anion-gap-with-k", action="store_true",
                   help="judge the anion gap with K+ included (interval default 10 16)")
    s.add_argument("--reference-albumin", type=float, metavar="G_PER_L",
                   help="albumin to correct the gap to, g/L (default 44)")


def panel_from_args(args: argparse.Namespace) -> dict[str, Any]:
    data: dict[str, Any] = {}
    for spec in NUMERIC:
        value = getattr(args, spec.name, None)
        if value is not None:
            data[spec.name] = value
        unit = getattr(args, f"{spec.name}_unit", None)
        if unit is not None:
            data[f"{spec.name}_unit"] = unit
    for name in ("sample_type", "hco3_source", *TEXT_FIELDS):
        value = getattr(args, name, None)
        if value is not None:
            data[name] = value
    return data


def settings_from_args(args: argparse.Namespace) -> Settings:
    kw: dict[str, Any] = {}
    if getattr(args, "anion_gap_interval", None):
        lo, hi = args.anion_gap_interval
        if args.anion_gap_with_k:
            kw["anion_gap_k_low"], kw["anion_gap_k_high"] = lo, hi
        else:
            kw["anion_gap_low"], kw["anion_gap_high"] = lo, hi
    if getattr(args, "anion_gap_with_k", False):
        kw["anion_gap_uses_k"] = True
    if getattr(args, "reference_albumin", None) is not None:
        kw["reference_albumin_g_l"] = args.reference_albumin
    return Settings.checked(**kw)


def _refuse(lines: Sequence[str]) -> int:
    print("acidbase: panel refused:", file=sys.stderr)
    for line in lines:
        print(f"  - {line}", file=sys.stderr)
    return EXIT_REFUSED


def cmd_check(args: argparse.Namespace) -> int:
    try:
        panel = Panel.model_validate(panel_from_args(args))
    except ValidationError as e:
        return _refuse(describe(e))
    settings = settings_from_args(args)
    it = interpret(panel, settings)
    if args.json:
        print(json.dumps(it.to_dict(), indent=2, ensure_ascii=False, allow_nan=False))
    else:
        print(as_text(it, working=not args.brief), end="")
    return EXIT_OK


def cmd_demo(args: argparse.Namespace) -> int:
    from .demo import DEMO_PANELS

    columns: dict[str, list[Any]] = {}
    names = [s.name for s in NUMERIC] + ["sample_type", "hco3_source"]
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
        print(json.dumps({"caution": CAUTION, "panels": docs}, indent=2, allow_nan=False))
        return EXIT_OK
    print(CAUTION)
    print()
    print("Demo: one night's blood gases on an invented respiratory high-dependency unit.")
    print("Each panel is read in full by `acidbase check`; here, the statements only.")
    for i, p in enumerate(DEMO_PANELS):
        it = results.interpretation(i)
        print()
        print(f"=== {p['sample_id']} {p['collected_at']} {p['patient_id']}: {p['note']}")
        if it.status == "refused":
            print("  refused:")
            for line in it.problems:
                print(f"    - {line}")
            continue
        labels = "; ".join(d.label() for d in it.disorders) or "none"
        print(f"  consistency: {it.consistency.status if it.consistency else 'not assessable'}")
        print(f"  disorders:   {labels}")
        for f in it.findings:
            if f.severity != "info" or f.section == "process":
                print(f"  [{f.severity}] {f.code}: {f.text}")
    print()
    print(CAUTION)
    return EXIT_OK


def cmd_batch(args: argparse.Namespace) -> int:
    from . import batch

    return batch.run(args)


def cmd_tui(args: argparse.Namespace) -> int:
    data = panel_from_args(args)
    panel = None
    if data:
        try:
            panel = Panel.model_validate(data)
        except ValidationError as e:
            return _refuse(describe(e))
    from tui.app import make_app

    make_app(panel=panel, demo=args.demo, settings=settings_from_args(args)).run()
    return EXIT_OK


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="acidbase",
        description=_help("Check and interpret blood-gas and electrolyte panels. " + CAUTION))
    sub = parser.add_subparsers(dest="command", required=True, metavar="COMMAND")
    check = sub.add_parser("check", help="read one panel given as options",
                           description="Read one panel: trust, processes, derived values.")
    add_panel_options(check)
    check.add_argument("--json", action="store_true", help="print the JSON document")
    check.add_argument("--brief", action="store_true", help="leave out the working")
    check.set_defaults(func=cmd_check)
    demo = sub.add_parser("demo", help="read the built-in demo panels")
    demo.add_argument("--json", action="store_true")
    demo.set_defaults(func=cmd_demo)
    batch = sub.add_parser("batch", help="check a file of panels")
    try:
        from . import batch as batch_module

        batch_module.configure_parser(batch)
    except ImportError:  # pragma: no cover - the batch module ships with the package
        pass
    batch.set_defaults(func=cmd_batch)
    tui = sub.add_parser("tui", help="the keyboard-only terminal app")
    add_panel_options(tui)
    tui.add_argument("--demo", action="store_true", help="open with the demo panels loaded")
    tui.set_defaults(func=cmd_tui)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Run one command; its exit status (module docstring).  A reader that closes
    standard output early (``acidbase demo | head``) ends the command quietly with 141."""
    parser = build_parser()
    try:
        args = parser.parse_args(argv)
    except BrokenPipeError:  # --help into a closed pipe
        from .files.outputs import silence_stdout

        silence_stdout()
        return EXIT_CLOSED_PIPE
    if sys.stdout is None and args.command in ("check", "demo", "tui"):
        print(f"acidbase {args.command}: standard output is closed; nothing to write to",
              file=sys.stderr)
        return EXIT_REFUSED
    try:
        status = int(args.func(args))
        if sys.stdout is not None:
            sys.stdout.flush()  # a closed pipe shows here, not at the interpreter's exit
        return status
    except BrokenPipeError:
        from .files.outputs import silence_stdout

        silence_stdout()
        return EXIT_CLOSED_PIPE
    except AcidBaseError as e:
        print(f"acidbase: {e}", file=sys.stderr)
        return EXIT_REFUSED
    except KeyboardInterrupt:
        return 130


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
