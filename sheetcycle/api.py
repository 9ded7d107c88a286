"""The Python API: the same jobs as the command line, for scripts and notebooks."""

from __future__ import annotations

import csv
import json
import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from sheetcycle.errors import ReadError, UnitError, UsageError
from sheetcycle.io.cells import WorkbookCells, read_cells
from sheetcycle.io.safety import Limits
from sheetcycle.io.tables import ColumnOverride, find_tables
from sheetcycle.model import Column, Flag, RefValue, RowResult, RunResult, Severity, Table
from sheetcycle.pipeline import Settings, TableContext, close_table, run_tables
from sheetcycle.units import conversion, to_internal

__all__ = [
    "Inspection",
    "annotate",
    "inspect",
    "load_column_mapping",
    "load_reference_file",
    "solve_cycles",
]


@dataclass
class Inspection:
    """What the reader recognised in a workbook, before any computation."""

    path: str
    tables: list[Table]
    flags: list[Flag]
    sheets_without_table: list[str] = field(default_factory=list)
    cache_note: str = ""
    book: WorkbookCells | None = field(default=None, repr=False)

    def as_text(self) -> str:
        """A plain report: table by table, column → quantity, unit, convention."""
        lines = [f"{self.path}"]
        if self.cache_note:
            lines.append(f"  formula values: {self.cache_note}")
        for t in self.tables:
            kind = (
                "compounds" if t.column("formula")
                else "reactions" if t.column("reaction_equation")
                else "cycle steps" if t.column("process")
                else "element values"
            )
            units = f", units in row {t.units_row}" if t.units_row else ""
            lines.append(
                f"  sheet '{t.sheet}': header row {t.header_row}{units}, data rows "
                f"{t.first_row}-{t.last_row} ({t.n_rows} rows of {kind})"
            )
            for c in t.columns:
                letter = _letter(c.col)
                if c.quantity is None:
                    lines.append(
                        f"    {letter} '{c.header}': not used ({c.note or 'not recognised'})"
                    )
                    continue
                what = c.quantity + (f" {c.index}" if c.index else "")
                bits = [what]
                if c.unit:
                    bits.append(f"unit {c.unit}")
                if c.convention:
                    bits.append(f"convention {c.convention}")
                if c.uncertainty_col is not None:
                    bits.append(f"uncertainty in column {_letter(c.uncertainty_col)}")
                if c.note:
                    bits.append(c.note)
                lines.append(f"    {letter} '{c.header}': " + ", ".join(bits))
        for s in self.sheets_without_table:
            lines.append(
                f"  sheet '{s}': no table found (a header row needs a formula or "
                "element column and one more recognised column, in the first 30 rows)"
            )
        for f in self.flags:
            lines.append(f"  [{f.severity.value}] {f.sheet}!{f.cell} {f.code}: {f.message}")
        return "\n".join(lines)


def _letter(col: int) -> str:
    from sheetcycle.io.tables import a1

    return a1(0, col)[:-1]


def _read_tables(path: str | Path, overrides: Sequence[ColumnOverride],
                 limits: Limits | None = None) -> Inspection:
    # verify=True: every formula is recomputed, so a stale cache is caught and not used
    book = read_cells(path, verify=True, limits=limits)
    tables: list[Table] = []
    flags: list[Flag] = []
    empty: list[str] = []
    for sheet in book.sheets:
        found, fl = find_tables(sheet, overrides=overrides)
        tables.extend(found)
        flags.extend(fl)
        if not found:
            empty.append(sheet.name)
            # A sheet of data without a recognisable table is worth a warning; a sheet of
            # text (an about or notes sheet) only a note.
            numbers = any(type(v) is float for row in sheet.rows[:200] for v in row)
            flags.append(Flag(
                "no-table", Severity.WARNING if numbers else Severity.NOTE,
                "no table found on this sheet: a header row needs a formula (or element, "
                "reaction, step) column and one more recognised column, in the first 30 rows; "
                "see docs/headers.md, or say what a column holds with --column",
                sheet.name, "A1"))
    from sheetcycle.io.stale import formula_error_flags, stale_flags

    # A table cell holding a formula error is flagged once, with the formula and its reason.
    errors = formula_error_flags(book)
    errored = {(f.sheet, f.cell) for f in errors}
    flags = [f for f in flags if not (f.code == "cell-not-number" and (f.sheet, f.cell) in errored)]
    flags.extend(stale_flags(book) + errors)
    return Inspection(str(path), tables, flags, empty, book.cache_reason, book)


def inspect(path: str | Path, *, column_overrides: Sequence[ColumnOverride] = (),
            limits: Limits | None = None) -> Inspection:
    """Recognise the tables and columns of a workbook without computing anything.

    >>> report = inspect("workbooks/demo_salts.xlsx")  # doctest: +SKIP
    >>> print(report.as_text())  # doctest: +SKIP
    """
    return _read_tables(path, column_overrides, limits)


def annotate(
    path: str | Path,
    output: str | Path | None = None,
    *,
    json_path: str | Path | None = None,
    settings: Settings | None = None,
    force: bool = False,
    results_book: bool = False,
) -> RunResult:
    """Read a workbook, close every compound's Born-Haber cycle, and write the outputs.

    ``output`` is the user's own workbook handed back with additions (computed columns as
    formulas with cached values, notes on flagged cells, a flags sheet and a method sheet;
    .xlsx and .xlsm inputs), or, with ``results_book=True`` or for other input formats, a
    fresh results workbook. ``json_path`` is the machine-readable report. Every output is
    written completely or not at all; an existing file is kept unless ``force``; the input
    is never modified. Returns the :class:`~sheetcycle.model.RunResult`.
    """
    from sheetcycle.io.atomic import _check_target as check_output_target
    from sheetcycle.io.report_json import write_json
    from sheetcycle.io.results_book import write_results_workbook

    settings = settings or Settings()
    for target in (output, json_path):
        if target is not None:
            check_output_target(Path(target), force=force, inputs=[Path(path)])
    found = _read_tables(path, settings.column_overrides, settings.limits)
    run = run_tables(path, found.tables, settings, list(found.flags))
    if output is not None:
        own = Path(path).suffix.lower() in (".xlsx", ".xlsm") and not results_book
        if own:
            from sheetcycle.io.annotated import prepare_annotated_copy, write_planned_copy

            assert found.book is not None
            plan = prepare_annotated_copy(run, found.book)
            found.book = None  # the read cells are not needed to write: let them go first
            write_planned_copy(plan, Path(path), Path(output), force=force)
        else:
            write_results_workbook(run, Path(output), force=force)
    if json_path is not None:
        write_json(run, Path(json_path), force=force)
    return run


def solve_cycles(
    formulas: Sequence[str],
    *,
    unit: str = "kJ/mol",
    tolerance: float = 10.0,
    **columns: Sequence[float | None] | np.ndarray,
) -> list[RowResult]:
    """Close Born-Haber cycles for lists of formulas and values, without a workbook.

    Keyword arguments name quantities as the reader knows them (``formation_enthalpy``,
    ``lattice_enthalpy``, ``ionization_energy_1``, ``electron_affinity_1``,
    ``atomization_metal`` …); values are in ``unit`` (None or NaN = missing). Missing terms
    come from the built-in reference data. The per-table passes run as in a workbook run, so
    the rows also carry the theoretical lattice energies and the solution enthalpies.

    >>> rows = solve_cycles(["NaCl", "MgO"], formation_enthalpy=[-411.2, -601.6])
    >>> round(rows[0].values["lattice_enthalpy"].value)  # doctest: +SKIP
    787
    """
    n = len(formulas)
    conv = conversion(unit, "energy")
    cols: list[Column] = [
        Column(
            header="formula",
            col=0,
            quantity="formula",
            texts=tuple(str(f) if f else None for f in formulas),
        )
    ]
    for j, (name, vals) in enumerate(columns.items(), start=1):
        quantity, index = _split_index(name)
        arr = np.array([np.nan if v is None else float(v) for v in vals], dtype=float)
        if arr.shape != (n,):
            raise UsageError(
                f"'{name}' has {arr.shape[0]} values", expected=f"{n} (one per formula)"
            )
        cols.append(
            Column(
                header=name,
                col=j,
                quantity=quantity,
                index=index,
                unit=unit,
                factor=conv.factor,
                values=to_internal(arr, conv),
            )
        )
    table = Table(sheet="(python)", header_row=1, first_row=2, last_row=n + 1, columns=tuple(cols))
    from sheetcycle.data import ReferenceData

    settings = Settings(tolerance=tolerance)
    contexts: list[TableContext] = []
    rows = close_table(table, ReferenceData.builtin(), settings, {}, [], contexts)
    from sheetcycle.passes import TABLE_PASSES

    for ctx in contexts:
        for table_pass in TABLE_PASSES:
            table_pass(ctx)
    return rows


_INDEXED = ("ionization_energy", "electron_affinity")


def _split_index(name: str) -> tuple[str, int]:
    for base in _INDEXED:
        if name.startswith(base + "_") and name[len(base) + 1 :].isdigit():
            return base, int(name[len(base) + 1 :])
    return name, 0


_REF_QUANTITIES = {
    "atomization_enthalpy",
    "ionization_energy",
    "electron_affinity",
    "electron_gain_enthalpy",
}


def load_reference_file(path: str | Path) -> list[tuple[str, str, int, RefValue]]:
    """Reference values from a CSV: element,quantity,index,value,unit,uncertainty,source.

    ``electron_affinity`` is read in the energy-released convention and stored as an
    electron-gain enthalpy (sign flipped); every other quantity is stored as given.
    """
    p = Path(path)
    try:
        text = p.read_text(encoding="utf-8-sig")
    except OSError as exc:
        raise ReadError("cannot read the reference file", file=str(p)) from exc
    out: list[tuple[str, str, int, RefValue]] = []
    reader = csv.DictReader(text.splitlines())
    need = {"element", "quantity", "value", "unit"}
    if not reader.fieldnames or not need <= set(reader.fieldnames):
        raise ReadError(
            "reference file has the wrong columns",
            file=str(p),
            expected="element,quantity,index,value,unit,uncertainty,source",
            found=",".join(reader.fieldnames or []),
        )
    for line, rec in enumerate(reader, start=2):
        q = (rec.get("quantity") or "").strip()
        where = f"line {line}"
        if q not in _REF_QUANTITIES:
            raise ReadError(
                f"{where}: unknown quantity",
                file=str(p),
                expected=" or ".join(sorted(_REF_QUANTITIES)),
                found=q,
            )
        try:
            conv = conversion((rec.get("unit") or "").strip(), "energy")
            value = float(rec["value"]) * conv.factor
            unc_text = (rec.get("uncertainty") or "").strip()
            unc = float(unc_text) * conv.factor if unc_text else math.nan
            index = int((rec.get("index") or "0").strip() or 0)
        except (UnitError, ValueError) as exc:
            raise ReadError(f"{where}: {exc}", file=str(p)) from exc
        source = (rec.get("source") or "").strip() or f"{p.name} {where}"
        if q == "electron_affinity":
            q, value = "electron_gain_enthalpy", -value if index == 1 else abs(value)
        out.append((rec["element"].strip(), q, index, RefValue(value, unc, f"{source} ({p.name})")))
    return out


def load_column_mapping(path: str | Path) -> list[ColumnOverride]:
    """Column overrides from a small JSON file.

    ``{"columns": [{"sheet": "Salts", "column": "D", "quantity": "formation_enthalpy",
    "unit": "kcal/mol"}, …]}``; "column" is a letter or the header text.
    """
    p = Path(path)
    try:
        data: Any = json.loads(p.read_text(encoding="utf-8-sig"))
    except (OSError, ValueError) as exc:
        raise ReadError(f"cannot read the column mapping: {exc}", file=str(p)) from exc
    items = data.get("columns") if isinstance(data, Mapping) else None
    if not isinstance(items, list):
        raise ReadError("column mapping must be an object with a list 'columns'", file=str(p))
    out = []
    allowed = {"sheet", "column", "quantity", "unit", "convention", "index"}
    for k, item in enumerate(items):
        if not isinstance(item, Mapping) or "column" not in item or set(item) - allowed:
            raise ReadError(
                f"entry {k + 1} of 'columns' is not understood",
                file=str(p),
                expected="keys among " + ", ".join(sorted(allowed)),
                found=dict(item) if isinstance(item, Mapping) else item,
            )
        out.append(ColumnOverride(**{key: item[key] for key in item}))
    return out
