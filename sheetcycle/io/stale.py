"""Flags about a workbook's own formula cells: stale cached values and error values.

A formula cell's cached value is what every viewer shows until it recalculates, and many
never do. :func:`stale_flags` compares each cached value with the formula's value (both
as the reader has them, see :func:`sheetcycle.io.cells.read_cells`) and flags every cell
where they differ (numbers: relative 1e-9; text, logical values and error codes: exactly),
showing both values and saying which one the run used.

Which value a run uses: read the book with ``read_cells(verify=True)``; then every formula
the evaluator supports is evaluated and its value used, and a stale trusted cache is
flagged "the formula's value was used". Read without ``verify``, trusted caches are used as
they are; :func:`stale_flags` then evaluates those cells itself, on a copy of the values,
and says "the cached value was used".

:func:`formula_error_flags` flags formula cells whose value is a spreadsheet error
(#DIV/0!, #N/A, #REF!, a circular reference ...), naming the cell, the formula, the error
and, where known, why.
"""

from __future__ import annotations

from collections.abc import Collection

from sheetcycle.io.cells import WorkbookCells
from sheetcycle.io.evaluate import (
    CellError,
    col_letters,
    evaluate_cells,
    show_value,
    values_match,
)
from sheetcycle.model import Flag, Severity

__all__ = ["ERROR_MEANINGS", "formula_error_flags", "stale_flags"]

#: What each error value means, for messages where the evaluator gave no reason.
ERROR_MEANINGS = {
    "#DIV/0!": "a division by zero (or by a blank cell)",
    "#N/A": "a value is not available",
    "#REF!": "a reference to a cell or sheet that does not exist",
    "#VALUE!": "a value of the wrong kind, such as text in arithmetic",
    "#NAME?": "an unknown function or name",
    "#NUM!": "a number out of range",
    "#NULL!": "ranges that do not intersect",
    "#CIRC!": "a circular reference",
    "#SPILL!": "an array result that cannot spill",
    "#CALC!": "a calculation the application could not do",
    "#GETTING_DATA": "data still being fetched when the file was saved",
}


def _cant_check(value: object) -> bool:
    """Results that say nothing about the cache: the evaluator could not evaluate it."""
    return isinstance(value, CellError) and value.code == "#NAME?"


def stale_flags(book: WorkbookCells, *, rel: float = 1e-9) -> list[Flag]:
    """A ``cache-stale`` warning for every formula cell whose cached value differs from
    the formula's value. Cells without a cached value, and formulas the evaluator cannot
    evaluate (unknown functions, OFFSET ...), are not compared."""
    pending: list[tuple[str, int, int, str]] = []
    flags: list[tuple[int, int, int, Flag]] = []
    order = {s.name: k for k, s in enumerate(book.sheets)}
    for sheet in book.sheets:
        for (r, c), fc in sheet.formulas.items():
            if fc.cached is None:
                continue
            if not fc.evaluated:
                pending.append((sheet.name, r, c, fc.formula))
                continue
            if _cant_check(fc.value) or values_match(fc.cached, fc.value, rel):
                continue
            flag = _stale(book, sheet.name, r, c, fc.formula, fc.cached, fc.value, used="formula")
            flags.append((order[sheet.name], r, c, flag))
    if pending:
        grids = {s.name: [list(row) for row in s.rows] for s in book.sheets}
        got = evaluate_cells(grids, pending, names=book.defined_names)
        for name, r, c, formula in pending:
            value = got.get((name, r, c))
            cached = book.sheet(name).formulas[(r, c)].cached
            if value is None or _cant_check(value) or values_match(cached, value, rel):
                continue
            flag = _stale(book, name, r, c, formula, cached, value, used="cached")
            flags.append((order[name], r, c, flag))
    flags.sort(key=lambda t: t[:3])
    return [f for *_, f in flags]


def _stale(
    book: WorkbookCells,
    sheet: str,
    r: int,
    c: int,
    formula: str,
    cached: object,
    value: object,
    *,
    used: str,
) -> Flag:
    cell = f"{col_letters(c)}{r + 1}"
    which = "the formula's value" if used == "formula" else "the cached value"
    note = ""
    if not book.cache_trusted:
        note = (" (the cached values of this workbook are not trusted: "
                "applications that do not recalculate show them)")  # fmt: skip
    message = (
        f"{sheet}!{cell}: the cached value {show_value(cached, value)} differs from the "
        f"formula's value {show_value(value, cached)} ({formula}); {which} was used{note}"
    )
    return Flag("cache-stale", Severity.WARNING, message, sheet, cell)


def formula_error_flags(
    book: WorkbookCells, *, skip: Collection[tuple[str, str]] = ()
) -> list[Flag]:
    """A ``formula-error`` error for every formula cell whose value is a spreadsheet error.

    ``skip`` lists (sheet, A1 cell) pairs not to flag (cells another flag already covers).
    The cell's value counts as missing wherever a table uses it.
    """
    out: list[Flag] = []
    for sheet in book.sheets:
        for (r, c), fc in sorted(sheet.formulas.items()):
            value = fc.value
            if not isinstance(value, CellError):
                continue
            cell = f"{col_letters(c)}{r + 1}"
            if (sheet.name, cell) in skip:
                continue
            why = value.reason or ERROR_MEANINGS.get(value.code, "a spreadsheet error")
            source = "" if fc.evaluated else " (its cached value)"
            message = (
                f"{sheet.name}!{cell}: the formula {fc.formula} gives the error "
                f"{value.code}{source}: {why}; the cell counts as missing"
            )
            out.append(Flag("formula-error", Severity.ERROR, message, sheet.name, cell))
    return out
