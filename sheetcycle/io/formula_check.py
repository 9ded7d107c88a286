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
from collections.abc import Iterator, Mapping, Sequence, Set
from dataclasses import dataclass, field
from typing import Any

from sheetcycle.io.cells import WorkbookCells
from sheetcycle.model import ROW_MARK

__all__ = ["FormulaColumn", "check_formula_columns", "check_formulas", "formula_shape"]

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


@dataclass
class FormulaColumn:
    """Cells of one added column that share one formula template.

    ``template`` holds :data:`sheetcycle.model.ROW_MARK` where each cell's own sheet row
    goes; ``rows`` are those 1-based sheet rows and ``expected`` the engine's values, in
    the same order.
    """

    sheet: str
    col: int  # 0-based
    template: str
    rows: list[int] = field(default_factory=list)
    expected: list[float] = field(default_factory=list)

    def cell(self, n: int, letters: str | None = None) -> tuple[str, str, str, float]:
        """(sheet, A1 cell, formula, expected) of the n-th cell, as :func:`check_formulas`
        takes them (``letters``: the column's, when the caller has them)."""
        if letters is None:
            from sheetcycle.io.tables import a1

            letters = a1(0, self.col)[:-1]
        row = self.rows[n]
        return (self.sheet, f"{letters}{row}",
                self.template.replace(ROW_MARK, str(row)), self.expected[n])

    def cells(self) -> Iterator[tuple[str, str, str, float]]:
        """:meth:`cell` of every cell, in order."""
        from sheetcycle.io.tables import a1

        letters = a1(0, self.col)[:-1]
        for n in range(len(self.rows)):
            yield self.cell(n, letters)


def _column_order(columns: Sequence[FormulaColumn],
                  points_at: Mapping[int, set[tuple[str, int]]]) -> list[int] | None:
    """Indices of ``columns`` so that a template comes after every column it points at;
    None when they point at each other (or a column at itself)."""
    left = list(range(len(columns)))
    order: list[int] = []
    while left:
        pending = {(columns[j].sheet, columns[j].col) for j in left}
        ready = [i for i in left if not points_at[i] & pending]
        if not ready:
            return None
        order.extend(ready)
        left = [i for i in left if i not in set(ready)]
    return order


def check_formula_columns(
    columns: Sequence[FormulaColumn],
    book: WorkbookCells,
    extra: Mapping[tuple[str, int, int], object],
    *,
    rel: float = 1e-9,
    added: Set[tuple[str, int]] = frozenset(),
) -> tuple[list[tuple[str, str, str, float, float]], list[tuple[str, str, str, float]]]:
    """Check whole template columns at once: (disagreements, cells left to check one by one).

    Each template is tokenized twice, at its first two rows, by the evaluator's own
    tokenizer; the references whose row moves with the cell's row are then read a column
    at a time, the others once, and a template of + - * /, ABS and parentheses is
    evaluated on arrays (the evaluator's own fast path). The cells of a template that does
    not fit (ranges, functions, text inputs, error values, a result that is not finite)
    are handed back to be checked by :func:`check_formulas`, whose answers are the
    reference. ``extra`` gives the values of the tool's new sheets (the reference cells);
    added formula columns are read from this check's own results. A template that points
    at another added column (``added``: its (sheet, 0-based column)) that is not one of
    ``columns`` is handed back too: only the cell-by-cell check is given those values.
    """
    import numpy as np

    from sheetcycle.io.evaluate import _arithmetic, _arithmetic_order, _get, _make_target

    grids = _grids(book, extra, {name for name, _, _ in extra})
    names = list(grids)
    lookup = {n.upper(): i for i, n in enumerate(names)}
    glist = [grids[n] for n in names]
    extents = [(len(g), max((len(r) for r in g), default=0)) for g in glist]
    shapes: dict[str, Any] = {}
    problems: list[tuple[str, str, str, float, float]] = []
    one_by_one: list[tuple[str, str, str, float]] = []
    # per template: (shape, [(sheet index, row offset or None, fixed row, col)]) or None
    plans: list[Any] = []
    points_at: dict[int, set[tuple[str, int]]] = {}
    checked_cols = {(c.sheet, c.col) for c in columns}
    for k, column in enumerate(columns):
        points_at[k] = set()
        plans.append(None)
        if column.sheet.upper() not in lookup or not column.rows:
            continue
        si = lookup[column.sheet.upper()]
        samples = [_make_target(si, row - 1, column.col,
                                column.template.replace(ROW_MARK, str(row)), lookup,
                                extents, shapes)
                   for row in column.rows[:2]]
        first = samples[0]
        if (first.problem is not None or not first.single
                or any(s.shape != first.shape or len(s.refs) != len(first.refs)
                       for s in samples)):
            continue
        refs = []
        for j, (s, r1, c1, r2, c2) in enumerate(first.refs):
            elsewhere = (names[s], c1) in added and (names[s], c1) not in checked_cols
            if r1 != r2 or c1 != c2 or elsewhere:
                break
            offset = r1 - (column.rows[0] - 1)
            moves = len(samples) > 1 and samples[1].refs[j][1] != r1
            if moves and samples[1].refs[j][1] - (column.rows[1] - 1) != offset:
                break
            refs.append((s, offset if moves else None, r1, c1))
            points_at[k].add((names[s], c1))
        else:
            plans[k] = (first.shape, refs)
    order = _column_order(columns, points_at)
    if order is None:  # columns that point at each other: the evaluator's own ordering
        return [], [cell for column in columns for cell in column.cells()]
    # each checked column's values by 0-based row, NaN where this check left a cell open
    extent: dict[tuple[str, int], int] = {}
    for column in columns:
        key = (column.sheet, column.col)
        extent[key] = max(extent.get(key, 0), max(column.rows, default=0))
    computed = {key: np.full(size, np.nan) for key, size in extent.items()}

    def read(values: np.ndarray, at: np.ndarray) -> np.ndarray:
        inside = (at >= 0) & (at < values.size)
        return np.where(inside, values[np.where(inside, at, 0)], np.nan)

    for k in order:
        column = columns[k]
        results = computed[(column.sheet, column.col)]
        plan = plans[k]
        arith = None if plan is None else _arithmetic_order(plan[0])
        if plan is None or arith is None:
            one_by_one.extend(column.cells())
            continue
        shape, refs = plan
        rows0 = np.asarray(column.rows, dtype=np.int64) - 1
        raw = []
        unchecked = np.zeros(len(rows0), dtype=bool)  # reads a cell this check left open
        for j in arith:
            s, offset, fixed, c = refs[j]
            mine = computed.get((names[s], c))
            grid = glist[s]
            if mine is None:
                raw.append([_get(grid, fixed, c)] * len(rows0) if offset is None
                           else [_get(grid, r + offset, c) for r in rows0.tolist()])
                continue
            got_here = read(mine, np.full(len(rows0), fixed) if offset is None
                            else rows0 + offset)
            unchecked |= np.isnan(got_here)
            raw.append(np.nan_to_num(got_here, nan=0.0))  # an array: no cell objects
        got = _arithmetic(shape, arith, raw, np, len(rows0))
        if got is None:
            one_by_one.extend(column.cells())
            continue
        expected = np.asarray(column.expected, dtype=float)
        finite = np.isfinite(got) & ~unchecked
        bad = finite & ~(np.abs(got - expected) <= rel * np.maximum(np.abs(expected), 1.0))
        for n in np.flatnonzero(bad).tolist():
            sheet, cell, formula, value = column.cell(n)
            problems.append((sheet, cell, formula, value, float(got[n])))
        for n in np.flatnonzero(~finite).tolist():
            one_by_one.append(column.cell(n))
        results[rows0[finite]] = got[finite]
    return problems, one_by_one
