"""Command line: ``analyze DATA --spec SPEC.json`` (or ``--demo``), ``report``, ``profile DATA``
and ``suggest DATA`` (the advisor's starting model as a spec: ``suggest DATA > spec.json`` then
``analyze DATA --spec spec.json`` gives the app's first screen for that file).

Success exits 0. Bad input exits 2 with one ``error: ...`` line on stderr; never a traceback.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path
from typing import Any

from core.analysis import analyze
from core.errors import FormwiseError
from core.intake.advisor import suggest_with_notes
from core.intake.profile import profile_table
from core.intake.reader import read_table, read_table_with_notes
from core.model.specfile import read_spec_file
from core.output.formats import FORMATS, to_json
from core.output.report import build_report

DEMO_DIR = Path(__file__).resolve().parent.parent / "demo_data"
DEMO_DATA = DEMO_DIR / "kiosks.csv"
DEMO_SPEC = DEMO_DIR / "default_spec.json"


class _Parser(argparse.ArgumentParser):
    """argparse that reports usage problems as one clear line and exit code 2."""

    def error(self, message: str) -> None:  # type: ignore[override]
        raise FormwiseError(f"{message}. Run 'python -m core --help' for usage.")


def load_spec(path: str | Path) -> dict[str, Any]:
    """Read the current spec of a spec file as JSON data only (no code is ever evaluated)."""
    return read_spec_file(path)[0]


def _data_and_spec(args: argparse.Namespace) -> tuple[Any, dict[str, Any], dict[str, dict[str, Any]], str]:
    if args.demo:
        if args.data or args.spec:
            raise FormwiseError("--demo uses the built-in data and spec; leave out DATA and --spec.")
        spec, saved = read_spec_file(DEMO_SPEC)
        return read_table(DEMO_DATA), spec, saved, DEMO_DATA.name
    if not args.data or not args.spec:
        raise FormwiseError(f"{args.command} needs a data file and --spec SPEC.json (or --demo).")
    spec, saved = read_spec_file(args.spec)
    return read_table(args.data, sheet=args.sheet), spec, saved, Path(args.data).name


def _parser() -> argparse.ArgumentParser:
    parser = _Parser(prog="python -m core", description="Formwise: regressions with transformed variables.")
    commands = parser.add_subparsers(dest="command", required=True, parser_class=_Parser)
    run = commands.add_parser("analyze", help="fit a model and print its results")
    run.add_argument("data", nargs="?", help="data file: .csv, .tsv, .txt or .xlsx")
    run.add_argument("--spec", help="model spec file (JSON)")
    run.add_argument("--demo", action="store_true", help="use the built-in demo data and its default spec")
    run.add_argument("--sheet", help="sheet name, for .xlsx files")
    run.add_argument("--format", choices=sorted(FORMATS), default="json")
    run.add_argument("--out", help="write to this file instead of standard output")
    paper = commands.add_parser("report", help="write a self-contained HTML report")
    paper.add_argument("data", nargs="?", help="data file: .csv, .tsv, .txt or .xlsx")
    paper.add_argument("--spec", help="model spec file (JSON); saved models in it are compared")
    paper.add_argument("--demo", action="store_true", help="use the built-in demo data and its default spec")
    paper.add_argument("--sheet", help="sheet name, for .xlsx files")
    paper.add_argument("--out", required=True, help="the HTML file to write")
    look = commands.add_parser("profile", help="print each column's profile and suggested transform as JSON")
    look.add_argument("data", help="data file: .csv, .tsv, .txt or .xlsx")
    look.add_argument("--sheet", help="sheet name, for .xlsx files")
    start = commands.add_parser("suggest", help="print the advisor's starting model for a data file as a JSON spec")
    start.add_argument("data", help="data file: .csv, .tsv, .txt or .xlsx")
    start.add_argument("--sheet", help="sheet name, for .xlsx files")
    start.add_argument("--notes", action="store_true", help="also print why each column was used or left out (on stderr)")
    return parser


def main(argv: list[str] | None = None) -> int:
    import warnings  # imported here, as only main() needs them

    import numpy as np

    # A numpy or pandas warning would print before the one `error:` line; results carry their own
    # warnings, so the command's are captured (and dropped), and floating-point ones never raised.
    with warnings.catch_warnings(record=True), np.errstate(all="ignore"):
        warnings.simplefilter("default")  # recorded once per place, so the list stays short
        return _command(argv)


def _command(argv: list[str] | None) -> int:
    """Run one command; bad input is one ``error:`` line and exit 2 (see ``main``)."""
    try:
        args = _parser().parse_args(argv)
        if args.command == "analyze":
            data, spec, _, _ = _data_and_spec(args)
            _emit(FORMATS[args.format](analyze(data, spec)), args.out)
        elif args.command == "report":
            data, spec, saved, name = _data_and_spec(args)
            _emit(build_report(data, spec, name, saved or None), args.out)
        elif args.command == "profile":
            frame, notes = read_table_with_notes(args.data, sheet=args.sheet)
            _emit(to_json(profile_table(frame, notes)), None)
        elif args.command == "suggest":
            spec, why = suggest_with_notes(read_table(args.data, sheet=args.sheet))
            _emit(to_json(spec), None)
            for note in why if args.notes else []:
                print(f"note: {note['text']}", file=sys.stderr)
        return 0
    except FormwiseError as exc:
        print(f"error: {exc}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("error: interrupted.", file=sys.stderr)
        return 130
    except Exception as exc:  # a bug, not bad input: still one line, and a distinct exit code
        print(f"error: internal problem ({type(exc).__name__}: {exc}); please report it with the data and spec.", file=sys.stderr)
        return 1


def _emit(text: str, out: str | None) -> None:
    if out is None:
        sys.stdout.write(text if text.endswith("\n") else text + "\n")
        return
    target = Path(out)
    try:
        target.write_text(text, encoding="utf-8")
    except OSError as exc:
        raise FormwiseError(f"cannot write '{target}': {exc.strerror}. Pick a writable path.") from None
