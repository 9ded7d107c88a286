"""The annotated copy in a real spreadsheet application (LibreOffice, recalculating on load).

LibreOffice is an independent implementation of the spreadsheet formula language: opened
with a profile that recalculates every formula, its value of every cell the tool computed
must equal the tool's cached value (relative 1e-9), and every original cell must read the
same in the annotated copy as in the input.
"""

from __future__ import annotations

import math
import shutil
import sys
from pathlib import Path

import pytest

from sheetcycle.api import _read_tables
from sheetcycle.io.annotated import FLAGS_SHEET, METHOD_SHEET, write_annotated_copy
from sheetcycle.io.tables import a1
from sheetcycle.pipeline import Settings, run_tables

sys.path.insert(0, str(Path(__file__).parent))
from lo import convert_to_csv, sheets_csv
from test_workbook_e2e import lab_book

DEMO = Path(__file__).parents[1] / "workbooks" / "demo_salts.xlsx"


def _num(text: str) -> float:
    try:
        return float(text)
    except ValueError:
        return math.nan


def _cell(grid: list[list[str]], ref: str) -> str:
    from openpyxl.utils.cell import column_index_from_string, coordinate_from_string

    letters, row = coordinate_from_string(ref)
    r, c = row - 1, column_index_from_string(letters) - 1
    return grid[r][c] if r < len(grid) and c < len(grid[r]) else ""


@pytest.fixture(scope="module")
def converted(tmp_path_factory: pytest.TempPathFactory):  # type: ignore[no-untyped-def]
    root = tmp_path_factory.mktemp("lo")
    cases = {}
    for name, src in (("demo", DEMO), ("lab", lab_book(root / "lab.xlsx"))):
        copy = root / f"{name}-in.xlsx"
        shutil.copyfile(src, copy)
        found = _read_tables(copy, ())
        run = run_tables(copy, found.tables, Settings(), list(found.flags))
        out = root / f"{name}-out.xlsx"
        assert found.book is not None
        plan = write_annotated_copy(run, found.book, copy, out)
        cases[name] = (copy, out, plan, [s.name for s in found.book.sheets])
    csv_dir = root / "csv"
    convert_to_csv([p for c in cases.values() for p in c[:2]], csv_dir)
    return csv_dir, cases


@pytest.mark.parametrize("name", ["demo", "lab"])
def test_libreoffice_recomputes_every_formula_to_the_cached_value(converted, name: str) -> None:
    csv_dir, cases = converted
    _src, out, plan, sheets = cases[name]
    grids = sheets_csv(csv_dir, out.stem, [*sheets, METHOD_SHEET, FLAGS_SHEET])
    assert any(True for _ in plan.all_formulas()), "the plan emitted no formulas"
    for sheet, cell, formula, expected in plan.all_formulas():
        got = _num(_cell(grids[sheet], cell))
        assert got == pytest.approx(expected, rel=1e-9, abs=1e-9), (sheet, cell, formula)


@pytest.mark.parametrize("name", ["demo", "lab"])
def test_every_original_cell_reads_the_same(converted, name: str) -> None:
    csv_dir, cases = converted
    src, out, _plan, sheets = cases[name]
    before = sheets_csv(csv_dir, src.stem, sheets)
    after = sheets_csv(csv_dir, out.stem, sheets)
    for sheet in sheets:
        for r, row in enumerate(before[sheet]):
            for c, text in enumerate(row):
                assert _cell(after[sheet], a1(r, c)) == text, (sheet, a1(r, c))
