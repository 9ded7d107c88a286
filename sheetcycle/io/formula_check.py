"""Check formulas the tool emits against the values the engine computed.

One engine: the formulas are evaluated by :func:`sheetcycle.io.evaluate.evaluate_cells`,
the evaluator that reads users' formulas (and sheetcycle's own worksheet functions). It
groups them by shape (the text with every reference abstracted), compiles each shape once
with the ``formulas`` package and evaluates a whole column of one shape on arrays, so the
lattice formulas of a 100,000-row table cost a few compilations, not 100,000. Formulas that
point at other emitted formulas (a closure residual at its lattice cell) are evaluated in
dependency order; cells the tool adds as plain values are given in ``extra``.
"""

from __future__ import annotations

import math
import re
from collections.abc import Mapping, Sequence

from sheetcycle.io.cells import WorkbookCells

__all__ = ["check_formulas", "formula_shape"]

_REF = re.compile(
    r"(?:'((?:[^']|'')+)'|([A-Za-z_][A-Za-z0-9_.]*))?(!)?\$?([A-Z]{1,3})\$?(\d+)(?![\w(])"
)
_A1 = re.compile(r"^\$?([A-Z]{1,3})\$?(\d+)$")


def _col_index(letters: str) -> int:
    n = 0
    for ch in letters:
        n = n * 26 + ord(ch) - 64
    return n - 1


def formula_shape(formula: str, sheet: str) -> tuple[str, list[tuple[str, int, int]]]:
    """(template with placeholders, the (sheet, row0, col0) each placeholder stands for)."""
    refs: list[tuple[str, int, int]] = []
    seen: dict[tuple[str, int, int], int] = {}

    def sub(m: re.Match[str]) -> str:
        quoted, bare, bang, col, row = m.groups()
        if bang is None and (quoted or bare):
            return m.group(0)  # a function or name followed by digits, not a reference
        ref_sheet = (quoted.replace("''", "'") if quoted else bare) if bang else sheet
        key = (ref_sheet, int(row) - 1, _col_index(col))
        if key not in seen:
            seen[key] = len(refs)
            refs.append(key)
        return f"ZZ{seen[key] + 1}"

    return _REF.sub(sub, formula), refs


def _grids(
    book: WorkbookCells,
    extra: Mapping[tuple[str, int, int], object],
    written: set[str],
) -> dict[str, list[list[object]]]:
    """Value grids of the book's sheets and the tool's new sheets, with ``extra`` put in.

    Sheets that get values or results (``written``) are copied; the others are the book's
    own grids, which the evaluator only reads.
    """
    grids: dict[str, list[list[object]]] = {}
    for sheet in book.sheets:
        rows = sheet.rows
        grids[sheet.name] = [list(r) for r in rows] if sheet.name in written else rows
    for (name, r, c), v in extra.items():
        grid = grids.get(name)
        if grid is None:
            grid = grids[name] = []
        while len(grid) <= r:
            grid.append([])
        row = grid[r]
        if len(row) <= c:
            row.extend([None] * (c + 1 - len(row)))
        row[c] = v
    return grids


def _as_float(v: object) -> float:
    if isinstance(v, bool):
        return float(v)
    if isinstance(v, int | float):
        return float(v)
    return math.nan  # an error value, text or blank: no number


def check_formulas(
    formulas_: Sequence[tuple[str, str, str, float]],
    book: WorkbookCells,
    extra: Mapping[tuple[str, int, int], object],
    *,
    rel: float = 1e-9,
) -> list[tuple[str, str, str, float, float]]:
    """Evaluate (sheet, cell, formula, expected) and return the ones that disagree.

    ``extra`` gives the values of cells the tool adds itself, keyed by (sheet, row0, col0).
    A disagreement is (sheet, cell, formula, expected, got), ``got`` NaN when the formula
    gives an error value or no number.
    """
    from sheetcycle.io.evaluate import evaluate_cells

    if not formulas_:
        return []
    targets: list[tuple[str, int, int, str]] = []
    for sheet, cell, formula, _v in formulas_:
        m = _A1.match(cell)
        if m is None:
            raise ValueError(f"not an A1 cell reference: {cell!r}")
        targets.append((sheet, int(m.group(2)) - 1, _col_index(m.group(1)), formula))
    written = {name for name, _, _ in extra} | {t[0] for t in targets}
    grids = _grids(book, extra, written)
    got = evaluate_cells(grids, targets)
    problems: list[tuple[str, str, str, float, float]] = []
    for (sheet, cell, formula, expected), (_, r, c, _) in zip(formulas_, targets, strict=True):
        value = _as_float(got.get((sheet, r, c)))
        scale = max(abs(expected), 1.0)
        if not (abs(value - expected) <= rel * scale):
            problems.append((sheet, cell, formula, expected, value))
    return problems
