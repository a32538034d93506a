"""The ``tenure`` command line (docs/method.md §6).

Exit codes: 0 ok; 1 a check failed; 2 bad input or usage, with one line
``error: <where>: <what is wrong>`` on stderr and never a traceback.
"""

from __future__ import annotations

import argparse
import importlib
import json
import sys
from collections.abc import Sequence
from pathlib import Path

from core.errors import StudyError, error_line, escape_text
from core.estimates import Study
from core.loading import load_studies

#: The commands this module defines; every other command is registered by its own module,
#: imported only when the command line names none of these (a one-study run starts faster).
OWN_COMMANDS = ("study", "export")


class _Parser(argparse.ArgumentParser):
    """argparse that reports usage errors as one ``error:`` line with exit 2."""

    def error(self, message: str) -> None:  # type: ignore[override]
        raise StudyError(self.prog, message)


def _select(studies: list[Study], title: str | None, file: str | None = None,
            year: int | None = None) -> list[Study]:
    if title is None:
        return studies
    chosen = [s for s in studies if s.title == title]
    if not chosen and file is not None:  # a workbook's asset tag
        from core import fleet_cli

        chosen = fleet_cli.tagged_studies(file, title, year)
    if not chosen:
        titles = "; ".join(s.title for s in studies)
        raise StudyError("--study", f"no study titled '{title}' (titles: {titles})")
    return chosen


def cmd_study(args: argparse.Namespace) -> int:
    text = None
    if args.json and args.study is None and args.year is None:
        # a large fleet file: parsed and run in two processes
        from core.fleet import study_file_json_text

        text = study_file_json_text(args.file)
    studies = (_select(load_studies(args.file, args.year), args.study, args.file, args.year)
               if text is None else [])
    if text is not None or (args.json and len(studies) > 1):
        # A fleet: one vectorised pass (core.fleet, same results as run_study), written
        # compact, one study per line (the indenting encoder is pure Python, ~5x slower).
        from core.fleet import fleet_json_text

        text = fleet_json_text(studies) if text is None else text
        sys.stdout.write('{"studies": [\n')
        sys.stdout.write(text)
        sys.stdout.write("\n]}\n")
        return 0
    from core.study import run_studies

    results = run_studies(studies)
    if args.json:
        from core.jsonout import study_json

        json.dump({"studies": [study_json(r) for r in results]}, sys.stdout, indent=2,
                  ensure_ascii=False, allow_nan=False)
        sys.stdout.write("\n")
    else:
        from core.currency import workbook_currency
        from core.report import format_study

        currency = workbook_currency(args.file)
        text = "\n\n".join(format_study(r, currency) for r in results)
        sys.stdout.write("\n".join(escape_text(line) for line in text.split("\n")))
        sys.stdout.write("\n")
    return 0


def cmd_export(args: argparse.Namespace) -> int:
    from core.export import TABLES, export_csv, export_xlsx

    out = Path(args.output)
    suffix = out.suffix.lower()
    if suffix not in (".csv", ".xlsx"):
        raise StudyError("-o", "the output must end in .csv or .xlsx")
    if args.table not in TABLES:
        raise StudyError("--table", f"must be one of {', '.join(TABLES)}")
    from core.study import run_studies

    results = run_studies(_select(load_studies(args.file, args.year), args.study, args.file,
                                  args.year))
    from core.currency import workbook_currency

    currency = workbook_currency(args.file)
    if suffix == ".xlsx":
        export_xlsx(results, out, currency=currency)
    else:
        export_csv(results, out, table=args.table, currency=currency)
    print(f"exported {len(results)} stud{'y' if len(results) == 1 else 'ies'} to "
          f"{escape_text(str(out))}")
    return 0


def _no_screen() -> bool:
    """True on Linux/BSD when Qt has nowhere to draw (it would abort the process)."""
    import os

    if sys.platform.startswith(("win", "darwin")) or os.environ.get("QT_QPA_PLATFORM"):
        return False
    return not (os.environ.get("DISPLAY") or os.environ.get("WAYLAND_DISPLAY"))


def cmd_window(args: argparse.Namespace) -> int:
    if _no_screen():
        raise StudyError("tenure", "no screen to open the window on (neither DISPLAY nor "
                         "WAYLAND_DISPLAY is set); use 'tenure study FILE' here, or set "
                         "QT_QPA_PLATFORM=offscreen")
    try:
        app = importlib.import_module("desktop_app.app")
    except ImportError as exc:
        raise StudyError("tenure", f"the desktop window is not available ({exc})") from None
    return int(app.main(args.file) or 0)


def build_parser(command: str | None = None) -> argparse.ArgumentParser:
    """The ``tenure`` parser; with ``command`` one of ``OWN_COMMANDS`` only this module's
    commands are registered (the other modules' are not imported)."""
    parser = _Parser(
        prog="tenure",
        description="Tenure: keep-or-replace decisions for production equipment. Without a "
                    "command, opens the window on the last workbook, else on the bundled demo.",
        epilog="Exit codes: 0 ok; 1 a check failed (verify); 2 bad input or usage.")
    parser.add_argument("--open", dest="file", metavar="FILE", default=None,
                        help="open this workbook or study file in the window")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    study = sub.add_parser(
        "study", help="run the replacement study of a study file or workbook",
        description="Compute every alternative's annual worth (AW) for each retention year, its "
                    "economic service life (ESL), the recommendation with its reason, the "
                    "replacement value and any study-period options. FILE is a study JSON "
                    "(format tenure-study, version 1) or a .tenure workbook (one study per "
                    "asset, its current year). AW is signed: costs are negative; EAC = -AW.")
    study.add_argument("file", metavar="FILE", help="study JSON or .tenure workbook")
    study.add_argument("--json", action="store_true",
                       help="print one JSON object {\"studies\": [...]} instead of tables")
    study.add_argument("--study", metavar="TITLE", default=None,
                       help="only the study with this title (or, in a workbook, this asset tag)")
    study.add_argument("--year", type=int, default=None, metavar="YEAR",
                       help="for a workbook: the studies of this year (e.g. last year's), "
                            "recomputed, instead of each asset's current one")
    study.set_defaults(func=cmd_study)
    export = sub.add_parser(
        "export", help="write a study's results and tables to CSV or XLSX",
        description="Run the study (or every study of a workbook) and write its tables: an XLSX "
                    "workbook holds one sheet per table; a CSV holds the one --table. Text "
                    "cells that a spreadsheet could run as a formula are escaped.")
    export.add_argument("file", metavar="FILE", help="study JSON or .tenure workbook")
    export.add_argument("-o", "--output", required=True, metavar="OUT",
                        help="OUT.xlsx or OUT.csv")
    export.add_argument("--table", default="alternatives",
                        help="for CSV: summary, annual_worth, alternatives (default), "
                             "study_period_options or warnings")
    export.add_argument("--study", metavar="TITLE", default=None,
                        help="only the study with this title (or, in a workbook, this asset tag)")
    export.add_argument("--year", type=int, default=None, metavar="YEAR",
                        help="for a workbook: the studies of this year")
    export.set_defaults(func=cmd_export)
    if command in OWN_COMMANDS:
        return parser
    from core import demo, fleet_cli
    from core.memo import cli as memo_cli
    from core.memo import trust
    from core.plan import cli as plan_cli

    for module in (memo_cli, trust, demo, plan_cli, fleet_cli):
        module.register(sub)
    return parser


def _command(argv: Sequence[str]) -> str | None:
    """The command word of ``argv`` (its first argument that is not an option)."""
    for arg in argv:
        if arg == "--open":
            return None
        if not arg.startswith("-"):
            return arg
    return None


def main(argv: Sequence[str] | None = None) -> int:
    try:
        words = list(sys.argv[1:] if argv is None else argv)
        parser = build_parser(_command(words))
        args = parser.parse_args(words)
        if getattr(args, "func", None) is None:
            return cmd_window(args)
        return int(args.func(args) or 0)
    except StudyError as exc:
        print(error_line(exc), file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("error: tenure: interrupted", file=sys.stderr)
        return 2
    except BrokenPipeError:
        return 0
    except Exception as exc:  # last line of defence: never a traceback to the user
        log = _log_unexpected(exc)
        print(escape_text(f"error: tenure: unexpected internal error ({type(exc).__name__}: "
                          f"{exc}); details in {log}"), file=sys.stderr)
        return 2


def _log_unexpected(exc: BaseException) -> str:
    import traceback

    try:
        from platformdirs import user_log_dir

        folder = Path(user_log_dir("tenure", appauthor=False))
        folder.mkdir(parents=True, exist_ok=True)
        log = folder / "tenure-errors.log"
        with log.open("a", encoding="utf-8") as fh:
            fh.write("".join(traceback.format_exception(exc)))
        return str(log)
    except Exception:
        return "(no log could be written)"


if __name__ == "__main__":
    sys.exit(main())
