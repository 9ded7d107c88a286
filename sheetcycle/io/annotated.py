"""Plan the additions to the user's own workbook: computed columns, notes, and our sheets.

The people who receive the annotated workbook never run Python, so it must show, explain
and let them check every derived number:

* computed columns to the right of each compound table (after one blank column), headed in
  the table's header row and styled like it, each value written as a formula over the row's
  own cells and the reference-value cells, with its value cached;
* a note and a fill on every flagged cell, one fill per severity;
* a flags sheet listing every flag with a link to its cell;
* a method sheet with the version, settings, conventions, the legend, and every reference
  value used with its source (the cells the formulas point at).

Every formula is evaluated with the ``formulas`` package (the same evaluation that reads
users' formulas) against the engine's value before anything is written.
"""

from __future__ import annotations

import re
from collections.abc import Callable, Iterator, Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from sheetcycle.engine.born_haber import TERMS
from sheetcycle.errors import WriteError
from sheetcycle.io.cells import SheetCells, WorkbookCells
from sheetcycle.io.package import (
    AddedCell,
    AddedColumn,
    ColumnCells,
    CellNote,
    CellValue,  # issue 5: cells that use sheetcycle's worksheet functions
    NewSheet,
    SheetAddition,
    write_annotated,
)
from sheetcycle.io.formula_check import FormulaColumn
from sheetcycle.io.package_cells import RowFormulas
from sheetcycle.io.tables import a1
from sheetcycle.model import (
    ROW_MARK,
    Flag,
    RowResult,
    RowValues,
    RunResult,
    Severity,
    Table,
    share,
)

__all__ = [
    "FLAGS_SHEET",
    "METHOD_SHEET",
    "AnnotationPlan",
    "plan_annotations",
    "prepare_annotated_copy",
    "write_annotated_copy",
    "write_planned_copy",
]

METHOD_SHEET = "sheetcycle method"
FLAGS_SHEET = "sheetcycle flags"

#: Column headings of the computed values (quantity and unit), in the order they appear.
VALUE_HEADINGS: dict[str, str] = {
    "lattice_enthalpy": "ΔH_L cycle / kJ mol⁻¹",
    "closure_residual": "closure residual / kJ mol⁻¹",
    "formation_enthalpy": "ΔfH derived / kJ mol⁻¹",
    "electron_gain_enthalpy": "ΔegH derived / kJ mol⁻¹",
    "atomization_enthalpy": "ΔatH derived / kJ mol⁻¹",
    "ionization_energy": "ΣIE derived / kJ mol⁻¹",
}
#: Values that get an uncertainty column beside them.
WITH_UNCERTAINTY = ("lattice_enthalpy", "closure_residual")

#: Terms in the order a reader follows the cycle: the metal, the non-metal, then the solid.
_FORMULA_ORDER = (
    "atomization_metal",
    "ionization",
    "atomization_nonmetal",
    "electron_gain_1",
    "electron_gain_higher",
    "formation_enthalpy",
    "lattice_enthalpy",
)
assert set(_FORMULA_ORDER) == set(TERMS)
_TOKEN = re.compile(r"\{R\|([^{}|]+)\|([a-z_]+)\|(\d+)\}")
_ROW = r"(?:\d+|\{#\})"  # a row number, or ROW_MARK in a template
_SIMPLE = re.compile(rf"^(?:\$?[A-Z]{{1,3}}\$?{_ROW}|'[^']+'!\$?[A-Z]{{1,3}}\$?{_ROW})$")
_RANK = {Severity.NOTE: 0, Severity.WARNING: 1, Severity.ERROR: 2}


@dataclass
class AnnotationPlan:
    """Everything the package writer is asked to add."""

    additions: list[SheetAddition] = field(default_factory=list)
    notes: list[CellNote] = field(default_factory=list)
    new_sheets: list[NewSheet] = field(default_factory=list)
    # formulas made from a row template, a group of cells per template and column
    formula_columns: list[FormulaColumn] = field(default_factory=list)
    # formulas of their own: (sheet, cell, formula, value)
    formulas: list[tuple[str, str, str, float]] = field(default_factory=list)
    # --- issue 5: existing cells that use sheetcycle's worksheet functions: their values,
    # cached under the formula, or (functions_as_values) written in place of it ---
    cell_values: list[CellValue] = field(default_factory=list)

    def all_formulas(self) -> Iterator[tuple[str, str, str, float]]:
        """Every emitted formula as (sheet, cell, formula, the engine's value)."""
        for column in self.formula_columns:
            yield from column.cells()
        yield from self.formulas


def _q(sheet: str) -> str:
    return "'" + sheet.replace("'", "''") + "'"


def _paren(expr: str) -> str:
    return expr if _SIMPLE.match(expr) else f"({expr})"


def _linear(pieces: Sequence[tuple[float, str]]) -> str:
    """c1·e1 + c2·e2 … written plainly (1 and −1 without a factor)."""
    out = ""
    for c, e in pieces:
        if c == 0:
            continue
        mag = abs(c)
        body = _paren(e) if mag == 1 else f"{mag:.15g}*{_paren(e)}"
        sign = "-" if c < 0 else "+"
        out += (("-" if sign == "-" else "") + body) if not out else f"{sign}{body}"
    return out or "0"


def cycle_formula(
    trace: Mapping[str, Any],
    solve_for: str,
    refs: Callable[[str, str, int], str],
) -> str | None:
    """The spreadsheet formula that solves a row's cycle for one term, or None.

    ``refs`` maps a reference placeholder (element, quantity, index) to a cell address.
    """
    coeffs: Mapping[str, float] = trace["coefficients"]
    exprs: Mapping[str, str | None] = trace["exprs"]
    ck = coeffs[solve_for]
    if ck == 0:
        return None
    pieces: list[tuple[float, str]] = []
    for name in _FORMULA_ORDER:
        if name == solve_for or coeffs[name] == 0:
            continue
        e = exprs.get(name)
        if e is None:
            return None
        e = _TOKEN.sub(lambda m: refs(m.group(1), m.group(2), int(m.group(3))), e)
        pieces.append((-coeffs[name] / ck, e))
    return _linear(pieces)


def _last_used_col(sheet: SheetCells, first: int, last: int) -> int:
    end = -1
    for r in range(max(first, 0), min(last + 1, len(sheet.rows))):
        row = sheet.rows[r]
        for c in range(len(row) - 1, end, -1):
            if row[c] is not None:
                end = c
                break
    return end


def _flag_text(flags: Sequence[Flag]) -> str:
    # rows of one salt often carry the same words: one copy (model.share)
    return share("\n".join(f"{f.severity.value}: {f.message}" for f in flags))


def _worst(flags: Sequence[Flag]) -> Severity | None:
    return max((f.severity for f in flags), key=_RANK.__getitem__, default=None)


def plan_annotations(run: RunResult, book: WorkbookCells) -> AnnotationPlan:
    """Decide every addition for a run over an .xlsx/.xlsm workbook."""
    plan = AnnotationPlan()
    ref_rows: dict[tuple[str, str, int], int] = {}
    method_rows, ref_start = _method_rows(run)
    for k, use in enumerate(run.references):
        ref_rows[(use.element, use.quantity, use.index)] = ref_start + k  # 1-based sheet row

    def refs(element: str, quantity: str, index: int) -> str:
        row = ref_rows.get((element, quantity, index))
        if row is None:
            raise WriteError(f"internal: reference value {element} {quantity} {index} has no cell")
        return f"{_q(METHOD_SHEET)}!$D${row}"

    by_sheet_row = {(r.sheet, r.row): r for r in run.rows}
    sheets = {s.name: s for s in book.sheets}
    for table in run.tables:
        anchored = any(table.column(q) is not None
                       for q in ("formula", "reaction_equation", "process"))
        if not anchored or table.sheet not in sheets:
            continue
        rows = [by_sheet_row.get((table.sheet, table.first_row + i)) for i in range(table.n_rows)]
        addition = _table_columns(table, rows, sheets[table.sheet], refs, plan)
        if addition is not None:
            plan.additions.append(addition)

    _plan_notes(run, plan)
    plan.new_sheets.append(NewSheet(METHOD_SHEET, method_rows, col_widths=(22, 26, 8, 16, 14, 90)))
    plan.new_sheets.append(_flags_sheet(run))
    # --- issue 7: cycle diagrams (only when the run's settings ask for them) ---
    from sheetcycle.diagrams import diagram_sheet_for_run

    if (diagrams := diagram_sheet_for_run(run)) is not None:
        plan.new_sheets.append(diagrams)
    # --- issue 5: values of the cells that use sheetcycle's worksheet functions ---
    _plan_function_cells(run, book, plan)
    return plan


# --- issue 5: cells that use sheetcycle's worksheet functions --------------------------


def _plan_function_cells(run: RunResult, book: WorkbookCells, plan: AnnotationPlan) -> None:
    """Other applications cannot compute these cells: cache the values sheetcycle computed,
    or, with the ``functions_as_values`` setting, write the values in place of the formulas
    with a note on each cell that keeps its formula."""
    from sheetcycle.io.functions import CacheEntry, ValueEntry, cells_to_cache

    if run.settings.get("functions_as_values"):
        for e in cells_to_cache(book, replace_by_values=True):
            assert isinstance(e, ValueEntry)
            plan.cell_values.append(CellValue(e.sheet, e.cell, e.value, replace_formula=True))
            plan.notes.append(CellNote(e.sheet, e.cell, e.note, "note"))
        return
    for c in cells_to_cache(book):
        assert isinstance(c, CacheEntry)
        plan.cell_values.append(CellValue(c.sheet, c.cell, c.value))


# --- end of issue 5 block ------------------------------------------------------------


def _value_columns(
    rows: Sequence[RowResult | None],
) -> dict[str, tuple[np.ndarray, np.ndarray, str]]:
    """Every computed quantity of a table's rows, column-wise:
    {name: (values, uncertainties, unit)} as float arrays, NaN where a row has no number.

    Rows whose values are views of one :class:`TableValues` are read from its arrays; the
    values set row by row (and rows holding a plain dict) are put over them one by one."""
    n = len(rows)
    out: dict[str, tuple[np.ndarray, np.ndarray, str]] = {}
    store = None
    first = next((r for r in rows if r is not None), None)
    if first is not None and isinstance(first.values, RowValues):
        store = first.values._t
        if not all(r is not None and isinstance(r.values, RowValues) and r.values._t is store
                   and r.values._i == i for i, r in enumerate(rows)):
            store = None
    if store is not None:
        for name in store.names():
            col = store.column(name)
            assert col is not None
            values, sigmas, present, unit = col
            if not present.any():
                continue
            out[name] = (np.where(present, values, np.nan),
                         np.where(present, sigmas, np.nan), unit)
    for i, r in enumerate(rows):
        if r is None:
            continue
        own = r.values.own() if store is not None else r.values  # type: ignore[attr-defined]
        for name, cv in own.items():
            col = out.get(name)
            if col is None:
                col = out[name] = (np.full(n, np.nan), np.full(n, np.nan), cv.unit)
            col[0][i] = float(cv.value)
            col[1][i] = float(cv.uncertainty)
    return out


def _table_columns(
    table: Table,
    rows: Sequence[RowResult | None],
    sheet: SheetCells,
    refs: Callable[[str, str, int], str],
    plan: AnnotationPlan,
) -> SheetAddition | None:
    quantities = _value_columns(rows)
    names = [n for n in VALUE_HEADINGS if n in quantities]
    extra = sorted(set(quantities) - set(VALUE_HEADINGS))
    if not names and not extra and not any(r is not None and r.flags for r in rows):
        return None
    start = _last_used_col(sheet, table.header_row - 1, table.last_row - 1) + 2
    layout: list[tuple[str, str]] = []  # (value name, "value" | "uncertainty")
    for n in names:
        layout.append((n, "value"))
        if n in WITH_UNCERTAINTY:
            layout.append((n, "uncertainty"))
    for n in extra:
        layout.append((n, "value"))
    col_of = {key: start + j for j, key in enumerate(layout)}
    codes = _signature_codes(rows)
    columns: list[AddedColumn] = []
    templates: dict[tuple[Any, ...], str | None] = {}  # (value, trace signature) -> formula
    job = _FormulaJob(table, rows, col_of, refs, templates, plan)
    for key in layout:
        name, part = key
        values, uncertainties, unit = quantities[name]
        numbers = values if part == "value" else uncertainties
        formulas: Sequence[str | None] | None = None
        if part == "value":
            formulas = (_formulas_by_code(job, name, numbers, col_of[key], codes)
                        if codes is not None else
                        _formulas_of(job, name, numbers, col_of[key]))
        heading = VALUE_HEADINGS.get(name) or _heading_of(name, unit)
        if part == "uncertainty":
            heading = "u(" + heading.split(" / ")[0] + ") / " + heading.split(" / ")[-1]
        columns.append(AddedColumn(heading, ColumnCells(numbers, formulas, "number"),
                                   number_format="0.0"))
    texts: list[str | None] = []
    styles: list[str | None] = []
    for r in rows:
        if r is not None and r.flags:
            texts.append(_flag_text(r.flags))
            styles.append(_worst(r.flags).value)  # type: ignore[union-attr]
        else:
            texts.append(None)
            styles.append(None)
    columns.append(AddedColumn("sheetcycle flags", ColumnCells(texts, None, styles),
                               number_format=None, width=60))
    header_cell = a1(table.header_row - 1, min(c.col for c in table.columns))
    return SheetAddition(
        table.sheet,
        table.header_row,
        table.first_row,
        start,
        columns,
        header_style_cell=header_cell,
    )


@dataclass
class _FormulaJob:
    """What the formulas of one table's value columns are made from."""

    table: Table
    rows: Sequence[RowResult | None]
    col_of: Mapping[tuple[str, str], int]  # (value name, part) -> 0-based column
    refs: Callable[[str, str, int], str]  # reference value -> its cell
    templates: dict[tuple[Any, ...], str | None]  # (value, trace signature) -> formula
    plan: AnnotationPlan

    def template(self, name: str, r: RowResult) -> str | None:
        return _row_template(name, r, self.col_of, self.refs, self.templates)


def _formulas_of(
    job: _FormulaJob, name: str, numbers: np.ndarray, col: int
) -> Sequence[str | None] | None:
    """The formulas of one value column (None: it has none), and their checks in the plan,
    row by row.

    Rows with a signature share a template (:class:`RowFormulas` keeps an index per row,
    the plan a :class:`FormulaColumn` per template); a row whose trace has none gets a
    formula of its own."""
    table, rows, plan = job.table, job.rows, job.plan
    letters = a1(0, col)[:-1]
    texts: list[str] = []
    shared: dict[str, int] = {}  # template -> its index in texts and plan.formula_columns
    checks: list[FormulaColumn] = []
    which = np.full(len(rows), -1, dtype=np.int32)
    own: dict[int, str] = {}
    for i in np.flatnonzero(np.isfinite(numbers)).tolist():
        r = rows[i]
        if r is None or not r.trace:
            continue
        number = float(numbers[i])
        sheet_row = table.first_row + i
        template = job.template(name, r)
        if template == "":  # no signature: a formula of its own
            formula = _value_formula(name, r.trace, sheet_row, job.col_of, job.refs)
            if formula is not None:
                own[i] = formula
                plan.formulas.append((table.sheet, f"{letters}{sheet_row}", formula, number))
            continue
        if template is None:
            continue
        k = shared.get(template)
        if k is None:
            k = shared[template] = len(texts)
            texts.append(template)
            checks.append(FormulaColumn(table.sheet, col, template))
        which[i] = k
        checks[k].rows.append(sheet_row)
        checks[k].expected.append(number)
    plan.formula_columns.extend(checks)
    if own:  # rows of their own: every formula spelled out
        listed: list[str | None] = list(RowFormulas(texts, which, table.first_row, ROW_MARK))
        for i, formula in own.items():
            listed[i] = formula
        return listed
    if not texts:
        return None
    return RowFormulas(texts, which, table.first_row, ROW_MARK)


def _signature_codes(rows: Sequence[RowResult | None]) -> np.ndarray | None:
    """Each row's trace signature code (-1: no trace), when every traced row is a view of
    one table's trace at its own index (the engine's rows); else None."""
    table_trace = None
    codes = np.full(len(rows), -1, dtype=np.int64)
    traced = []
    for i, r in enumerate(rows):
        if r is None or not r.trace:
            continue
        t = getattr(r.trace, "_t", None)
        if t is None or getattr(r.trace, "_i", None) != i:
            return None
        if table_trace is None:
            table_trace = t
        elif t is not table_trace:
            return None
        traced.append(i)
    if table_trace is None:
        return codes
    every = np.asarray(table_trace.codes(), dtype=np.int64)
    if every.size != len(rows):
        return None
    codes[traced] = every[traced]
    return codes


def _formulas_by_code(
    job: _FormulaJob, name: str, numbers: np.ndarray, col: int, codes: np.ndarray
) -> Sequence[str | None] | None:
    """:func:`_formulas_of` a signature at a time (``codes`` from :func:`_signature_codes`):
    one template per distinct code, made from its first row, and the rows that share it
    found on arrays."""
    table, rows = job.table, job.rows
    idx = np.flatnonzero(np.isfinite(numbers) & (codes >= 0))
    if not idx.size:
        return None
    uniq, first = np.unique(codes[idx], return_index=True)
    texts: list[str] = []
    by_text: dict[str, int] = {}
    lut = np.full(int(uniq.max()) + 1, -1, dtype=np.int32)
    for j in np.argsort(first, kind="stable").tolist():  # in the order rows meet them
        row = rows[int(idx[first[j]])]
        assert row is not None
        template = job.template(name, row)
        if not template:
            continue
        k = by_text.get(template)
        if k is None:
            k = by_text[template] = len(texts)
            texts.append(template)
        lut[int(uniq[j])] = k
    if not texts:
        return None
    which = np.full(len(rows), -1, dtype=np.int32)
    which[idx] = lut[codes[idx]]
    for k, text in enumerate(texts):
        sel = np.flatnonzero(which == k)
        job.plan.formula_columns.append(FormulaColumn(
            table.sheet, col, text, (sel + table.first_row).tolist(), numbers[sel].tolist()))
    return RowFormulas(texts, which, table.first_row, ROW_MARK)


def _heading_of(name: str, unit: str) -> str:
    label = name.replace("_", " ")
    return f"{label} / {unit}" if unit else label


def _row_template(
    name: str,
    r: RowResult,
    col_of: Mapping[tuple[str, str], int],
    refs: Callable[[str, str, int], str],
    templates: dict[tuple[Any, ...], str | None],
) -> str | None:
    """The formula template (ROW_MARK for the row) of one computed cell, made once per
    distinct row signature (rows whose cycles differ only in their row numbers); None when
    the value has no formula, "" when the row's trace has no signature (a plain mapping)."""
    signature = getattr(r.trace, "signature", None)
    if signature is None:
        return ""
    key = (name, signature())
    template = templates.get(key, "")
    if template == "":
        template = templates[key] = _value_formula(name, r.trace.templates(), ROW_MARK,
                                                   col_of, refs)
    return template


def _value_formula(
    name: str,
    trace: Mapping[str, Any],
    sheet_row: int | str,
    col_of: Mapping[tuple[str, str], int],
    refs: Callable[[str, str, int], str],
) -> str | None:
    """The formula of one computed cell; ``sheet_row`` may be ROW_MARK (a template)."""
    if name == "lattice_enthalpy":
        return cycle_formula(trace, "lattice_enthalpy", refs)
    if name == "closure_residual":
        given = trace["exprs"].get("lattice_enthalpy")
        lat = col_of.get(("lattice_enthalpy", "value"))
        if given is None or lat is None:
            return None
        return f"{a1(0, lat)[:-1]}{sheet_row}-{_paren(given)}"
    solved = trace.get("solved")
    if solved is not None and name in (
        "formation_enthalpy",
        "electron_gain_enthalpy",
        "atomization_enthalpy",
        "ionization_energy",
    ):
        return cycle_formula(trace, solved, refs)
    return None


def _plan_notes(run: RunResult, plan: AnnotationPlan) -> None:
    by_cell: dict[tuple[str, str], list[Flag]] = {}
    for f in [f for r in run.rows for f in r.flags] + list(run.file_flags):
        if f.sheet and f.cell:
            by_cell.setdefault((f.sheet, f.cell), []).append(f)
    for (sheet, cell), flags in by_cell.items():
        worst = _worst(flags)
        assert worst is not None
        plan.notes.append(CellNote(sheet, cell, share("sheetcycle\n" + _flag_text(flags)),
                                  worst.value))


def _method_rows(run: RunResult) -> tuple[list[list[AddedCell | None]], int]:
    """The method sheet's rows, and the 1-based row of the first reference value."""
    t = AddedCell
    rows: list[list[AddedCell | None]] = [
        [t("sheetcycle: method, conventions and reference values", style="header")],
        [t("version"), t(run.version)],
        [t("input"), t(Path(run.input).name)],
        [],
        [t("conventions", style="header")],
        [
            t("lattice enthalpy"),
            t(
                "dissociation convention: MaXb(s) → a M^p+(g) + b X^q−(g), "
                "positive, kJ per mol of formula unit"
            ),
        ],
        [
            t("electron gain"),
            t(
                "thermochemical electron-gain enthalpy: negative when energy is "
                "released (Cl ≈ −349 kJ/mol); a second gain is positive"
            ),
        ],
        [
            t("Born-Haber cycle"),
            t(
                "ΔH_L = a·(ΔatH(M) + IE1 + … + IEp) + b·(ΔatH(X) + ΔegH1 + … "
                "+ ΔegHq) − ΔfH(MaXb, s)"
            ),
        ],
        [
            t("closure residual"),
            t(
                "cycle lattice enthalpy minus the given lattice enthalpy; "
                "flagged when larger than max(2σ, tolerance)"
            ),
        ],
        [
            t("uncertainties"),
            t(
                "a value used n times contributes n·σ; distinct values add in "
                "quadrature; uncertainty cells hold values, not formulas"
            ),
        ],
        [t("missing values"), t("blank, text and spreadsheet errors are missing, never zero")],
        [t("ionic models"), t("Kapustinskii, Born-Landé, Born-Mayer and volume-based "
                              "(Glasser-Jenkins) lattice energies U at 0 K; before comparing "
                              "with the cycle's ΔH_L(298 K) each is corrected with Jenkins' "
                              "ion-type term [p(n_M/2 − 2) + q(n_X/2 − 2)]RT (monatomic ions "
                              "n = 3); the difference column is 100·(cycle − model)/model")],
        [t("solution"), t("ΔsolH = ΔH_L(dissociation) + Σ ν·ΔhydH(ion); single-ion hydration "
                          "enthalpies are converted to one scale before they are added")],
        [t("reconciliation"), t("with reconcile on: every closed cycle adjusted at once by "
                                "weighted least squares over the shared terms; normalised "
                                "residuals; serial elimination names the input most likely "
                                "wrong, at its own cell (docs/reconciliation.md)")],
        [
            t("formulas"),
            t(
                "every computed value that a formula can express is a formula over the "
                "row's own cells and the reference values below; edit an input and "
                "it recomputes"
            ),
        ],
        [],
        [t("settings", style="header")],
    ]
    for key, value in run.settings.items():
        rows.append([t(str(key)), t(_setting_text(value))])
    rows += [[], [t("flag fills", style="header")]]
    for sev in ("error", "warning", "note"):
        rows.append(
            [
                t(sev, style=sev),
                t(
                    {
                        "error": "the row's result is missing or wrong because of this",
                        "warning": "a result exists but should be looked at",
                        "note": "information: a convention applied, a default used",
                    }[sev]
                ),
            ]
        )
    rows += [
        [],
        [t("reference values used", style="header")],
        [
            t("element", style="header"),
            t("quantity", style="header"),
            t("index", style="header"),
            t("value / kJ mol⁻¹", style="header"),
            t("uncertainty", style="header"),
            t("source", style="header"),
        ],
    ]
    start = len(rows) + 1
    for use in run.references:
        unc = None if use.uncertainty != use.uncertainty else use.uncertainty
        rows.append(
            [
                t(use.element),
                t(use.quantity),
                t(float(use.index), style="number"),
                t(use.value, style="number"),
                t(unc, style="number") if unc is not None else None,
                t(use.source),
            ]
        )
    rows += [
        [],
        [t("caution", style="header")],
        [
            t("safety"),
            t(
                "computed enthalpies are estimates from tabulated data; where they "
                "point to a large heat release, calorimetry and a hazard assessment "
                "come before any scale-up, and local codes and licensed practice "
                "govern"
            ),
        ],
    ]
    return rows, start


def _setting_text(value: object) -> str:
    if isinstance(value, (list, tuple)):
        return ", ".join(map(str, value)) if value else "none"
    return "none" if value is None else str(value)


def _flags_sheet(run: RunResult) -> NewSheet:
    t = AddedCell
    rows: list[list[AddedCell | None]] = [
        [t(h, style="header") for h in ("sheet", "cell", "code", "severity", "message")]
    ]
    links: dict[tuple[int, int], str] = {}
    flags = [f for r in run.rows for f in r.flags] + list(run.file_flags)
    made: dict[tuple[str, str | None], AddedCell] = {}  # cells are immutable: one per text

    def cell(text: str, style: str | None = None) -> AddedCell:
        got = made.get((text, style))
        if got is None:
            got = made[(text, style)] = t(text, style=style)
        return got

    for f in flags:
        r0 = len(rows)
        rows.append(
            [
                cell(f.sheet or ""),
                t(f.cell or ""),
                cell(f.code),
                cell(f.severity.value, f.severity.value),
                cell(f.message),
            ]
        )
        if f.sheet and f.cell:
            links[(r0, 1)] = f"{_q(f.sheet)}!{f.cell}"
    return NewSheet(FLAGS_SHEET, rows, col_widths=(16, 8, 22, 9, 110), links=links)


def write_annotated_copy(
    run: RunResult,
    book: WorkbookCells,
    src: Path,
    dst: Path,
    *,
    force: bool = False,
    verify: Callable[[AnnotationPlan, WorkbookCells], None] | None = None,
) -> AnnotationPlan:
    """Plan, verify every formula, and write the annotated copy (all or nothing)."""
    plan = prepare_annotated_copy(run, book, verify=verify)
    write_planned_copy(plan, src, dst, force=force)
    return plan


def prepare_annotated_copy(
    run: RunResult,
    book: WorkbookCells,
    *,
    verify: Callable[[AnnotationPlan, WorkbookCells], None] | None = None,
) -> AnnotationPlan:
    """Plan the additions and verify every formula; the read cells are not needed after."""
    plan = plan_annotations(run, book)
    (verify or verify_formulas)(plan, book)
    return plan


def write_planned_copy(plan: AnnotationPlan, src: Path, dst: Path, *,
                       force: bool = False) -> None:
    """Write the annotated copy that ``plan`` (verified) describes (all or nothing)."""
    write_annotated(
        src,
        dst,
        additions=plan.additions,
        notes=plan.notes,
        new_sheets=plan.new_sheets,
        cell_values=plan.cell_values,  # issue 5: worksheet-function cells
        force=force,
    )


def verify_formulas(plan: AnnotationPlan, book: WorkbookCells, *, rel: float = 1e-9) -> None:
    """Evaluate every planned formula and compare it with the engine's value.

    The cells that share a row template are checked a column at a time
    (:func:`~sheetcycle.io.formula_check.check_formula_columns`); what that leaves, and
    the formulas of their own, go through the evaluator that reads users' formulas, which
    compiles each shape once with ``formulas`` and evaluates it on arrays. A mismatch is a
    bug in the tool, so it stops the write with an error rather than handing out a wrong
    formula.
    """
    from sheetcycle.io.formula_check import check_formula_columns, check_formulas

    added = {(add.sheet, add.start_col + j) for add in plan.additions
             for j in range(len(add.columns))}
    problems, rest = check_formula_columns(plan.formula_columns, book, _new_sheet_values(plan),
                                           rel=rel, added=added)
    rest += plan.formulas
    if rest:
        problems += check_formulas(rest, book, _added_values(plan), rel=rel)
    if problems:
        first = problems[0]
        raise WriteError(
            f"internal check failed: the formula in {first[0]}!{first[1]} "
            f"(={first[2]}) gives {first[4]!r}, the engine {first[3]!r}; "
            f"{len(problems)} formula(s) disagree; nothing was written"
        )


def _new_sheet_values(plan: AnnotationPlan) -> dict[tuple[str, int, int], object]:
    """Values of the cells of the tool's new sheets (the reference values among them)."""
    out: dict[tuple[str, int, int], object] = {}
    for sheet in plan.new_sheets:
        for r, row in enumerate(sheet.rows):
            for c, cell in enumerate(row):
                if cell is not None and cell.value is not None:
                    out[(sheet.name, r, c)] = cell.value
    return out


def _added_values(plan: AnnotationPlan) -> dict[tuple[str, int, int], object]:
    """Values of the added cells formulas may point at: the cells of added columns that
    hold formulas (a closure residual points at its lattice cell) and of the new sheets
    (the reference values). The plain-value columns (uncertainties, model values, flags)
    are never pointed at; leaving them out keeps the check's memory to a fraction. A
    formula that did point at one would see a blank and fail the check, never pass it."""
    out: dict[tuple[str, int, int], object] = {}
    for add in plan.additions:
        for j, col in enumerate(add.columns):
            cells = col.cells
            if isinstance(cells, ColumnCells):
                if cells.formulas is None:
                    continue
                values = cells.value_list()
            else:
                values = [cell.value for cell in cells]
            r0, c = add.first_row - 1, add.start_col + j
            for i, v in enumerate(values):
                if v is not None:
                    out[(add.sheet, r0 + i, c)] = v
    out.update(_new_sheet_values(plan))
    return out
