"""The column-at-a-time formula check against the cell-by-cell one.

The reference for every value here is independent of both checks: numpy arithmetic on
the same inputs, and spreadsheet semantics (a blank cell counts as 0, text in arithmetic
is #VALUE!: common practice, no source) which the cell-by-cell check takes from the
``formulas`` package.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from sheetcycle.io.cells import SheetCells, WorkbookCells
from sheetcycle.io.formula_check import FormulaColumn, check_formula_columns, check_formulas
from sheetcycle.model import ROW_MARK


def _book(rows: list[list[object]]) -> WorkbookCells:
    return WorkbookCells("mem.xlsx", "xlsx", [SheetCells("T", rows)], False, "test")


def _table(n: int, seed: int = 3) -> tuple[list[list[object]], np.ndarray, np.ndarray]:
    rng = np.random.default_rng(seed)
    a = np.round(rng.uniform(-900, -100, n), 3)
    b = np.round(rng.uniform(50, 200, n), 3)
    rows: list[list[object]] = [["a", "b"]]
    rows += [[float(x), float(y)] for x, y in zip(a, b, strict=True)]
    return rows, a, b


REFS = {("ref", k, 0): 100.0 + k for k in range(3)}


def _columns(a: np.ndarray, b: np.ndarray) -> list[FormulaColumn]:
    """A lattice-like column in two templates (rows by parity) and a residual column that
    points at it; expected values by numpy."""
    n = len(a)
    lat = [FormulaColumn("T", 2, f"B{ROW_MARK}+'ref'!$A${k + 1}-A{ROW_MARK}") for k in (0, 1)]
    res = FormulaColumn("T", 3, f"C{ROW_MARK}-ABS(A{ROW_MARK})")
    for i in range(n):
        k = i % 2
        v = b[i] + (100.0 + k) - a[i]
        lat[k].rows.append(i + 2)
        lat[k].expected.append(float(v))
        res.rows.append(i + 2)
        res.expected.append(float(v - abs(a[i])))
    return [res, *lat]  # the residual first: the check must order them itself


def test_columns_agree_with_numpy_and_leave_nothing_over() -> None:
    rows, a, b = _table(2000)
    problems, rest = check_formula_columns(_columns(a, b), _book(rows), REFS)
    assert problems == [] and rest == []


def test_a_wrong_value_is_caught_in_a_column_and_in_the_column_that_points_at_it() -> None:
    rows, a, b = _table(50)
    cols = _columns(a, b)
    cols[1].expected[4] += 0.5  # row 10 (i = 8) of the first lattice template
    problems, rest = check_formula_columns(cols, _book(rows), REFS)
    assert rest == []
    assert [(p[0], p[1]) for p in problems] == [("T", "C10")]
    assert problems[0][4] == pytest.approx(b[8] + 100.0 - a[8], rel=1e-12)
    # the same cells, checked one by one by the evaluator, find the same disagreement
    cells = [c for col in cols for c in col.cells()]
    extra = dict(REFS) | {("T", r - 1, col.col): v for col in cols[1:]
                          for r, v in zip(col.rows, col.expected, strict=True)}
    one = check_formulas(cells, _book(rows), extra)
    assert [(p[0], p[1]) for p in one] == [("T", "C10")]


def test_text_and_ranges_are_left_to_the_cell_by_cell_check() -> None:
    rows, a, b = _table(10)
    rows[4][0] = "−411.2"  # text with a Unicode minus in row 5
    cols = _columns(a, b)
    ranged = FormulaColumn("T", 4, f"SUM(A{ROW_MARK}:B{ROW_MARK})", [2, 3],
                           [float(a[0] + b[0]), float(a[1] + b[1])])
    problems, rest = check_formula_columns([*cols, ranged], _book(rows), REFS)
    assert problems == []
    left = {(s, c) for s, c, _, _ in rest}
    # the text sits in a template's input column: that template's cells all go one by one
    assert ("T", "C3") in left and ("T", "E2") in left and ("T", "E3") in left
    # what is left is then judged by the evaluator: row 5's text is #VALUE!, not a number
    got = check_formulas(rest, _book(rows), dict(REFS) | {
        ("T", r - 1, 2): v for col in cols[1:] for r, v in zip(col.rows, col.expected,
                                                                 strict=True)})
    assert ("T", "C5") in {(p[0], p[1]) for p in got}
    assert all(math.isnan(p[4]) for p in got if p[1] == "C5")


def test_a_column_that_points_at_itself_is_handed_back_whole() -> None:
    rows, a, b = _table(5)
    col = FormulaColumn("T", 2, f"A{ROW_MARK}+C1", [2, 3, 4], [1.0, 2.0, 3.0])
    problems, rest = check_formula_columns([col], _book(rows), {})
    assert problems == [] and len(rest) == 3


def test_a_template_over_an_added_value_column_is_left_to_the_cell_by_cell_check() -> None:
    # column C is an added column of plain values (no templates): only the cell-by-cell
    # check is given its values, so the column check must not read it as blank
    rows, a, b = _table(6)
    col = FormulaColumn("T", 3, f"C{ROW_MARK}-A{ROW_MARK}", [2, 3],
                        [float(5.0 - a[0]), float(6.0 - a[1])])
    problems, rest = check_formula_columns([col], _book(rows), {}, added={("T", 2), ("T", 3)})
    assert problems == [] and len(rest) == 2
    got = check_formulas(rest, _book(rows), {("T", 1, 2): 5.0, ("T", 2, 2): 6.0})
    assert got == []
    # without being told C is added, the column check reads blanks and disagrees
    problems, rest = check_formula_columns([col], _book(rows), {})
    assert len(problems) == 2 and rest == []
