"""Command line: parsing arguments and printing only; the work is in sheetcycle.api.

Exit codes: 0 when every file was processed (flags or not), 1 when a file could not be read
or written (one plain line each, no traceback, nothing partial left), 2 on a usage error.
"""

from __future__ import annotations

import argparse
import glob
import os
import sys
from collections.abc import Sequence
from concurrent.futures import ProcessPoolExecutor
from pathlib import Path

from sheetcycle import __version__
from sheetcycle.errors import SheetcycleError, UsageError

__all__ = ["main"]

WORKBOOK_SUFFIXES = (".xlsx", ".xlsm", ".xls", ".ods", ".csv")


def _column_spec(text: str):  # type: ignore[no-untyped-def]
    """'[SHEET:]COL=QUANTITY[:UNIT]' → ColumnOverride (COL a letter or header text)."""
    from sheetcycle.io.tables import ColumnOverride

    if "=" not in text:
        raise argparse.ArgumentTypeError(
            f"expected [SHEET:]COLUMN=QUANTITY[:UNIT], e.g. 'D=formation_enthalpy:kcal/mol', "
            f"found {text!r}"
        )
    left, right = text.split("=", 1)
    sheet = None
    if ":" in left:
        sheet, left = left.split(":", 1)
    quantity, _, unit = right.partition(":")
    return ColumnOverride(
        column=left.strip(),
        quantity=quantity.strip() or None,
        unit=unit.strip() or None,
        sheet=sheet,
    )


_UNITS = {"": 1, "b": 1, "kb": 1000, "mb": 1000**2, "gb": 1000**3,
          "kib": 1024, "mib": 1024**2, "gib": 1024**3}


def _size(text: str) -> int:
    """'1073741824', '500MB' or '4GiB' → bytes."""
    t = text.strip().lower().replace(" ", "")
    digits = t.rstrip("abcdefghijklmnopqrstuvwxyz")
    unit = t[len(digits):]
    try:
        return int(float(digits) * _UNITS[unit])
    except (KeyError, ValueError):
        raise argparse.ArgumentTypeError(
            f"expected a size such as 1073741824, 500MB or 4GiB, found {text!r}") from None


def _limits(args: argparse.Namespace):  # type: ignore[no-untyped-def]
    from sheetcycle.io.safety import Limits

    given = {"max_total_uncompressed": args.max_unzipped_size, "max_ratio": args.max_zip_ratio,
             "max_entries": args.max_zip_entries, "max_cells": args.max_cells}
    return Limits(**{k: v for k, v in given.items() if v is not None})


def _parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(
        prog="sheetcycle",
        description="Close Born-Haber cycles in thermochemistry workbooks and report the results.",
    )
    p.add_argument("--version", action="version", version=f"sheetcycle {__version__}")
    sub = p.add_subparsers(dest="command", required=True, metavar="COMMAND")
    from sheetcycle.cli_extra import add_annotate_options, add_commands


    def common(sp: argparse.ArgumentParser) -> None:
        sp.add_argument(
            "--column",
            action="append",
            type=_column_spec,
            default=[],
            metavar="[SHEET:]COL=QUANTITY[:UNIT]",
            help="say what a column holds, overriding its header "
            "(COL is a letter or the header text; QUANTITY 'ignore' drops it)",
        )
        sp.add_argument(
            "--columns", metavar="FILE", help="a JSON file of column overrides (see docs/usage.md)"
        )
        lim = sp.add_argument_group("limits for untrusted files (docs/limits.md)")
        lim.add_argument("--max-unzipped-size", type=_size, default=None, metavar="SIZE",
                         help="total unzipped size a workbook may have (e.g. 4GiB; default 2GiB)")
        lim.add_argument("--max-zip-ratio", type=float, default=None, metavar="R",
                         help="largest expansion ratio of a zip part (default 100)")
        lim.add_argument("--max-zip-entries", type=int, default=None, metavar="N",
                         help="most zip parts a workbook may have (default 10000)")
        lim.add_argument("--max-cells", type=int, default=None, metavar="N",
                         help="most grid cells of all sheets together (default 50000000)")

    a = sub.add_parser("annotate", help="compute every cycle and write the results")
    a.add_argument(
        "inputs", nargs="+", metavar="FILE", help="workbooks (.xlsx .xlsm .xls .ods .csv)"
    )
    a.add_argument(
        "-o",
        "--output",
        metavar="PATH",
        help="the input workbook handed back annotated (.xlsx/.xlsm; other formats "
        "get a results workbook); with several inputs, a folder",
    )
    a.add_argument(
        "--json",
        metavar="PATH",
        dest="json_path",
        help="machine-readable report; with several inputs, a folder",
    )
    a.add_argument(
        "--tolerance",
        type=float,
        default=10.0,
        metavar="KJ",
        help="closure residuals below max(2σ, KJ) pass (default 10 kJ/mol)",
    )
    a.add_argument(
        "--covalent-threshold",
        type=float,
        default=5.0,
        metavar="PERCENT",
        help="flag covalent character when the cycle value exceeds the ionic models "
        "by more than this (default 5 %%)",
    )
    a.add_argument(
        "--model-spread",
        type=float,
        default=10.0,
        metavar="PERCENT",
        help="note when the ionic models disagree by more than this (default 10 %%)",
    )
    a.add_argument(
        "--hydration-scale",
        type=float,
        default=None,
        metavar="KJ",
        help="ΔhydH(H+) of the absolute single-ion scale your hydration columns use "
        "(e.g. -1103); without it, 'absolute' columns are assumed on -1103",
    )
    a.add_argument(
        "--temperature",
        type=float,
        default=None,
        metavar="K",
        help="also give reaction enthalpies at this temperature (Kirchhoff's law)",
    )
    a.add_argument(
        "--reference",
        action="append",
        default=[],
        metavar="CSV",
        help="reference values overriding the built-in ones "
        "(element,quantity,index,value,unit,uncertainty,source)",
    )
    a.add_argument(
        "--results-book",
        action="store_true",
        help="with -o, write a fresh results workbook instead of the annotated copy of the input",
    )
    a.add_argument("--force", action="store_true", help="overwrite existing outputs")
    a.add_argument("-q", "--quiet", action="store_true", help="print only errors")
    a.add_argument(
        "-j",
        "--jobs",
        type=int,
        default=0,
        metavar="N",
        help="files processed in parallel (default: one process per core)",
    )
    common(a)
    add_annotate_options(a)

    i = sub.add_parser("inspect", help="show which tables, columns and units are recognised")
    i.add_argument("input", metavar="FILE")
    common(i)
    add_commands(sub)
    return p


def _expand(inputs: Sequence[str]) -> list[Path]:
    out: list[Path] = []
    for item in inputs:
        path = Path(item)
        if path.is_dir():
            out.extend(
                sorted(
                    q
                    for q in path.iterdir()
                    if q.suffix.lower() in WORKBOOK_SUFFIXES and not q.name.startswith(".")
                )
            )
        elif any(ch in item for ch in "*?["):
            out.extend(sorted(Path(g) for g in glob.glob(item)))
        else:
            out.append(path)
    return out


def _overrides(args: argparse.Namespace):  # type: ignore[no-untyped-def]
    from sheetcycle.api import load_column_mapping

    found = list(args.column)
    if args.columns:
        found.extend(load_column_mapping(args.columns))
    return tuple(found)


def _summary(run) -> str:  # type: ignore[no-untyped-def]
    compound = {(t.sheet, t.first_row + i) for t in run.tables if t.column("formula")
                for i in range(t.n_rows)}
    rows = [r for r in run.rows if r.formula and (r.sheet, r.row) in compound]
    lattice = sum(1 for r in rows if "lattice_enthalpy" in r.values)
    others = sum(1 for r in run.rows if r.formula and (r.sheet, r.row) not in compound)
    counts = {"error": 0, "warning": 0, "note": 0}
    for f in [f for r in run.rows for f in r.flags] + list(run.file_flags):
        counts[f.severity.value] += 1
    return (
        f"{run.input}: {len(rows)} compounds, {lattice} lattice enthalpies"
        + (f", {others} reaction or cycle rows" if others else "")
        + "; "
        f"{counts['error']} errors, {counts['warning']} warnings, {counts['note']} notes"
    )


def _target(base: str | None, src: Path, many: bool, suffix: str) -> Path | None:
    if base is None:
        return None
    if many:
        folder = Path(base)
        folder.mkdir(parents=True, exist_ok=True)
        return folder / f"{src.stem}{suffix}"
    return Path(base)


def _out_suffix(src: Path, args: argparse.Namespace) -> str:
    own = src.suffix.lower() in (".xlsx", ".xlsm") and not args.results_book
    return f".annotated{src.suffix.lower()}" if own else ".results.xlsx"


def _annotate(args: argparse.Namespace) -> int:
    from sheetcycle.api import load_reference_file
    from sheetcycle.cli_extra import progress_for, settings_kwargs
    from sheetcycle.pipeline import Settings

    if args.tolerance < 0:
        raise UsageError("--tolerance must not be negative", found=args.tolerance)
    if args.jobs < 0:
        raise UsageError("--jobs must not be negative", found=args.jobs)
    paths = _expand(args.inputs)
    if not paths:
        raise UsageError("no input files found", found=" ".join(args.inputs))
    extra = []
    for ref in args.reference:
        extra.extend(load_reference_file(ref))
    if args.temperature is not None and args.temperature <= 0:
        raise UsageError(
            "--temperature must be a positive number of kelvin", found=args.temperature
        )
    settings = Settings(
        tolerance=args.tolerance,
        column_overrides=_overrides(args),
        reference_files=tuple(args.reference),
        extra_references=tuple(extra),
        covalent_threshold=args.covalent_threshold,
        model_spread=args.model_spread,
        hydration_scale=args.hydration_scale,
        temperature=args.temperature,
        limits=_limits(args),
        **settings_kwargs(args),
    )
    many = len(paths) > 1
    jobs = [
        (
            src,
            _target(args.output, src, many, _out_suffix(src, args)),
            _target(args.json_path, src, many, ".report.json"),
        )
        for src in paths
    ]
    workers = min(len(jobs), args.jobs or os.cpu_count() or 1)
    outcomes: list[tuple[bool, str]] = []
    with progress_for(args, len(jobs)) as bar:
        if workers > 1:
            # Files are independent: one process each, results reported in input order.
            with ProcessPoolExecutor(max_workers=workers) as pool:
                n = len(jobs)
                for outcome in pool.map(_one_file, jobs, [settings] * n, [args.force] * n,
                                        [args.results_book] * n):
                    outcomes.append(outcome)
                    bar.update()
        else:
            for job in jobs:
                outcomes.append(_one_file(job, settings, args.force, args.results_book))
                bar.update()
    failed = 0
    for ok, text in outcomes:
        if not ok:
            failed += 1
            print(f"sheetcycle: {text}", file=sys.stderr)
        elif not args.quiet:
            print(text)
    if many and not args.quiet:
        print(f"{len(paths) - failed} of {len(paths)} files done, {failed} failed")
    return 1 if failed else 0


def _one_file(
    job: tuple[Path, Path | None, Path | None],
    settings,
    force: bool,  # type: ignore[no-untyped-def]
    results_book: bool,
) -> tuple[bool, str]:
    """Annotate one file; (True, summary) or (False, the one-line error). Never raises."""
    from sheetcycle.api import annotate

    src, out, json_path = job
    try:
        run = annotate(
            src, out, json_path=json_path, settings=settings, force=force, results_book=results_book
        )
    except SheetcycleError as exc:
        return False, str(exc)
    except Exception as exc:  # a bug must not stop the other files or print a traceback
        return False, (
            f"{src}: internal error ({type(exc).__name__}: {exc}); nothing was "
            "written for this file; please report it"
        )
    return True, _summary(run)


def _inspect(args: argparse.Namespace) -> int:
    from sheetcycle.api import inspect

    print(inspect(args.input, column_overrides=_overrides(args), limits=_limits(args)).as_text())
    return 0


def main(argv: Sequence[str] | None = None) -> int:
    parser = _parser()
    try:
        args = parser.parse_args(argv)
    except SystemExit as exc:  # argparse prints its own message; keep its exit code (2)
        return int(exc.code or 0)
    try:
        if args.command == "annotate":
            return _annotate(args)
        if args.command == "diagram":
            return int(args.handler(args))
        return _inspect(args)
    except UsageError as exc:
        print(f"sheetcycle: {exc}", file=sys.stderr)
        return 2
    except SheetcycleError as exc:
        print(f"sheetcycle: {exc}", file=sys.stderr)
        return 1
    except KeyboardInterrupt:
        return 130
    except BrokenPipeError:
        os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
        return 0


if __name__ == "__main__":  # pragma: no cover
    raise SystemExit(main())
