"""Check formulas the tool emits against the values the engine computed.

Formulas are grouped by shape: every cell reference is replaced by a placeholder in order
of first appearance, so the lattice formulas of a whole table (which differ only in their
row numbers and in which reference-value cells they point at) share one shape. Each shape
is compiled once with the ``formulas`` package and evaluated on arrays of its inputs, as
the reader evaluates users' formulas; 100,000 rows cost a few compilations, not 100,000.
"""

from __future__ import annotations

import math
import re
from collections.abc import Mapping, Sequence
from functools import lru_cache
from typing import Any

import numpy as np

from sheetcycle.io.cells import CellError, WorkbookCells

__all__ = ["check_formulas", "formula_shape"]

_REF = re.compile(
    r"(?:'((?:[^']|'')+)'|([A-Za-z_][A-Za-z0-9_.]*))?(!)?\$?([A-Z]{1,3})\$?(\d+)(?![\w(])"
)


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


@lru_cache(maxsize=256)
def _compiled(template: str) -> Any:
    import formulas

    return formulas.Parser().ast("=" + template)[1].compile()


def _value(
    grids: Mapping[str, list[list[object]]],
    extra: Mapping[tuple[str, int, int], object],
    key: tuple[str, int, int],
) -> float:
    v = extra.get(key, _MISSING)
    if v is _MISSING:
        sheet, r, c = key
        grid = grids.get(sheet)
        if grid is None:
            return math.nan
        v = grid[r][c] if r < len(grid) and c < len(grid[r]) else None
    if v is None:
        return 0.0  # a blank cell is 0 in a spreadsheet formula
    if isinstance(v, bool):
        return float(v)
    if isinstance(v, (int, float)):
        return float(v)
    if isinstance(v, CellError):
        return math.nan
    try:
        return float(str(v).replace("−", "-"))
    except ValueError:
        return math.nan


_MISSING = object()


def _as_float(x: object) -> float:
    try:
        return float(x)  # type: ignore[arg-type]
    except (TypeError, ValueError):
        return math.nan  # a spreadsheet error value


def check_formulas(
    formulas_: Sequence[tuple[str, str, str, float]],
    book: WorkbookCells,
    extra: Mapping[tuple[str, int, int], object],
    *,
    rel: float = 1e-9,
) -> list[tuple[str, str, str, float, float]]:
    """Evaluate (sheet, cell, formula, expected) and return the ones that disagree.

    ``extra`` gives the values of cells the tool adds itself, keyed by (sheet, row0, col0).
    """
    grids = {s.name: s.rows for s in book.sheets}
    groups: dict[str, list[tuple[int, list[tuple[str, int, int]]]]] = {}
    for k, (sheet, _cell, formula, _v) in enumerate(formulas_):
        template, refs = formula_shape(formula, sheet)
        groups.setdefault(template, []).append((k, refs))
    problems: list[tuple[str, str, str, float, float]] = []
    for template, members in groups.items():
        fn = _compiled(template)
        n_inputs = len(members[0][1])
        columns = [
            np.array([_value(grids, extra, refs[j]) for _, refs in members])
            for j in range(n_inputs)
        ]
        order = [int(name[2:]) - 1 for name in fn.inputs]
        raw = np.asarray(fn(*[columns[j] for j in order]), dtype=object).reshape(-1)
        if raw.shape[0] != len(members):
            raw = np.broadcast_to(raw, (len(members),))
        out = np.array([_as_float(x) for x in raw])
        for (k, _), got in zip(members, out, strict=True):
            sheet, cell, formula, expected = formulas_[k]
            scale = max(abs(expected), 1.0)
            if not (abs(got - expected) <= rel * scale):
                problems.append((sheet, cell, formula, expected, float(got)))
    return problems
