"""Command-line pieces for diagrams, reconciliation and the progress bar.

``sheetcycle.cli`` calls :func:`add_commands` (the ``diagram`` subcommand),
:func:`add_annotate_options` and :func:`settings_kwargs` (options of ``annotate``), and
:func:`progress_for` (a bar on stderr over the files of a batch).
"""

from __future__ import annotations

import argparse
import dataclasses
import sys
from pathlib import Path
from typing import Any

from sheetcycle.errors import UsageError
from sheetcycle.progress import Progress

__all__ = ["add_annotate_options", "add_commands", "progress_for", "run_diagram",
           "settings_kwargs"]


def _row_spec(text: str) -> tuple[str, int]:
    from sheetcycle.diagrams import parse_row_spec

    try:
        return parse_row_spec(text)
    except UsageError as exc:
        raise argparse.ArgumentTypeError(str(exc)) from exc


def add_commands(sub: Any) -> None:
    """Add ``sheetcycle diagram FILE --row SHEET!ROW … -o OUT.png|.svg [--parity OUT]``."""
    d = sub.add_parser("diagram", help="draw the Born-Haber cycle of rows as PNG or SVG")
    d.add_argument("input", metavar="FILE", help="a workbook (.xlsx .xlsm .xls .ods .csv)")
    d.add_argument("--row", action="append", type=_row_spec, default=[], metavar="SHEET!ROW",
                   help="a compound row to draw, e.g. 'Salts!12' (repeatable)")
    d.add_argument("-o", "--output", metavar="OUT.png|OUT.svg",
                   help="the picture; with several --row, each row's picture is named "
                        "OUT-SHEET-ROW.png (or .svg)")
    d.add_argument("--parity", metavar="OUT.png|OUT.svg",
                   help="also draw the parity plot of cycle against ionic-model lattice "
                        "energies for every row")
    d.add_argument("--force", action="store_true", help="overwrite existing pictures")
    d.set_defaults(handler=run_diagram)


def add_annotate_options(parser: argparse.ArgumentParser) -> None:
    """Options of ``annotate``: --diagrams, --reconcile, --reconcile-threshold,
    --functions-as-values."""
    parser.add_argument(
        "--diagrams", nargs="*", type=_row_spec, default=None, metavar="SHEET!ROW",
        help="add a sheet of cycle diagrams to the annotated copy: one per flagged row and "
             "per row named here (at most 50 pictures per workbook), and the parity plot")
    parser.add_argument(
        "--reconcile", action="store_true",
        help="reconcile every cycle of the workbook at once by least squares over the "
             "shared terms, and flag the input most likely wrong (docs/reconciliation.md)")
    parser.add_argument(
        "--reconcile-threshold", type=float, default=3.0, metavar="Z",
        help="normalised residual above which an input is named (default 3; raised for "
             "many inputs so that a consistent workbook is left alone 95 %% of the time)")
    parser.add_argument(
        "--functions-as-values", action="store_true",
        help="in the annotated copy, replace every cell that uses a sheetcycle worksheet "
             "function (LATTICEH, LATTICEU, UNITCONV, RXNH) by its value, with a note on the "
             "cell that keeps the formula: for colleagues whose spreadsheet application does "
             "not know these functions (by default the formulas stay, their values cached)")


def settings_kwargs(args: argparse.Namespace) -> dict[str, Any]:
    """The Settings fields these options set (only fields Settings has)."""
    from sheetcycle.pipeline import Settings

    if not args.reconcile_threshold > 0:
        raise UsageError("--reconcile-threshold must be a positive number",
                         found=args.reconcile_threshold)
    names = {f.name for f in dataclasses.fields(Settings)}
    out: dict[str, Any] = {"reconcile": bool(args.reconcile),
                           "reconcile_threshold": float(args.reconcile_threshold)}
    if "diagrams" in names:
        out["diagrams"] = args.diagrams is not None
    if "diagram_rows" in names:
        out["diagram_rows"] = tuple(args.diagrams or ())
    out["functions_as_values"] = bool(getattr(args, "functions_as_values", False))
    return {k: v for k, v in out.items() if k in names}


def progress_for(args: argparse.Namespace, total: int, label: str = "files") -> Progress:
    """A progress bar on stderr: shown after 2 s on a terminal, never with --quiet."""
    quiet = bool(getattr(args, "quiet", False))
    return Progress(total, label=label, stream=sys.stderr, enabled=False if quiet else None)


def _outputs(base: str, rows: list[tuple[str, int]]) -> list[Path]:
    path = Path(base)
    if len(rows) == 1:
        return [path]
    safe = [("".join(ch if ch.isalnum() or ch in "-_" else "_" for ch in s), r) for s, r in rows]
    return [path.with_name(f"{path.stem}-{s}-{r}{path.suffix}") for s, r in safe]


def run_diagram(args: argparse.Namespace) -> int:
    """The ``diagram`` subcommand: read, run, draw; 0 when every picture was written."""
    from sheetcycle.api import inspect
    from sheetcycle.diagrams import _format, draw_row, parity_for_run
    from sheetcycle.io.atomic import atomic_output
    from sheetcycle.pipeline import Settings, run_tables

    if not args.row and not args.parity:
        raise UsageError("nothing to draw", expected="--row SHEET!ROW and/or --parity OUT")
    if args.row and not args.output:
        raise UsageError("--row needs -o OUT.png or OUT.svg", found=None)
    targets = _outputs(args.output, args.row) if args.row else []
    for t in [*targets, *([Path(args.parity)] if args.parity else [])]:
        _format(t, None)
    found = inspect(args.input)
    run = run_tables(args.input, found.tables, Settings(), list(found.flags))
    for (sheet, row), target in zip(args.row, targets, strict=True):
        with atomic_output(target, force=args.force, inputs=[Path(args.input)]) as tmp:
            draw_row(run, sheet, row, tmp, _format(target, None))
        print(f"{target}: cycle of {sheet}!{row}")
    if args.parity:
        target = Path(args.parity)
        fmt = _format(target, None)
        fig = parity_for_run(run, None, fmt)
        if fig is None:
            print(f"sheetcycle: no row has both a cycle and a model lattice energy; "
                  f"{target} not written", file=sys.stderr)
            return 1
        with atomic_output(target, force=args.force, inputs=[Path(args.input)]) as tmp:
            fig.savefig(tmp, format=fmt, dpi=150)
        print(f"{target}: parity plot")
    return 0
