"""Column-wise holding of results and column-wise writing of added cells.

Both are devices for large tables; each is checked against the row-by-row way it replaces,
which the golden round-trip tests check against the file format (common practice, no
source: a differential test of an optimisation against its plain form).
"""

from __future__ import annotations

import math
import pickle
import re
import zipfile
from pathlib import Path

import numpy as np
import pytest
import xlsxwriter

from sheetcycle.io import package_sheet
from sheetcycle.io.package import (
    AddedCell,
    AddedColumn,
    CellNote,
    ColumnCells,
    SheetAddition,
    write_annotated,
)
from sheetcycle.model import ComputedValue, RowValues, TableValues


def _words(tag: str):  # noqa: ANN202 - a renderer: row index -> (method, sources)
    return lambda i: (f"{tag} of row {i}", (f"source {i}",))


# --- the value store ----------------------------------------------------------------------


def test_row_views_show_the_columns_where_present() -> None:
    t = TableValues(4)
    t.put("a", [1.0, np.nan, 3.0, 4.0], 0.5, "kJ/mol", _words("a"))
    t.put("b", [10.0, 20.0, 30.0, 40.0], [1.0, 2.0, 3.0, 4.0], "%", _words("b"),
          present=[False, True, True, False])
    rows = [t.row(i) for i in range(4)]
    assert [sorted(r) for r in rows] == [["a"], ["b"], ["a", "b"], ["a"]]
    assert "a" not in rows[1] and "b" in rows[1]
    v = rows[2]["b"]
    assert (v.value, v.uncertainty, v.unit) == (30.0, 3.0, "%")
    assert v.method == "b of row 2" and v.sources == ("source 2",)
    with pytest.raises(KeyError):
        rows[0]["b"]
    assert rows[3] == {"a": ComputedValue(4.0, 0.5, "kJ/mol", "a of row 3", ("source 3",))}


def test_values_set_per_row_keep_the_order_a_dict_would_have() -> None:
    t = TableValues(2)
    plain: dict[str, ComputedValue] = {}
    row = t.row(0)
    t.put("first", [1.0, 2.0], 0.0, "kJ/mol", _words("first"))
    plain["first"] = row["first"]
    own = ComputedValue(5.0, 0.1, "kJ/mol", "set by hand")
    row["middle"] = own
    plain["middle"] = own
    t.put("last", [7.0, 8.0], 0.0, "kJ/mol", _words("last"))
    plain["last"] = row["last"]
    replaced = ComputedValue(-1.0, 0.0, "kJ/mol", "replaces the column's value")
    row["first"] = replaced  # overwriting keeps the key's place, as in a dict
    plain["first"] = replaced
    assert list(row) == list(plain) == ["first", "middle", "last"]
    assert dict(row) == plain
    assert row.own() == {"middle": own, "first": replaced}
    assert list(t.row(1)) == ["first", "last"]  # the other row is untouched


def test_put_again_replaces_where_given_and_keeps_the_rest() -> None:
    t = TableValues(3)
    t.put("x", [1.0, 2.0, np.nan], 0.0, "kJ/mol", _words("old"))
    t.put("x", [np.nan, 20.0, 30.0], 0.0, "kJ/mol", _words("new"))
    got = [(t.row(i)["x"].value, t.row(i)["x"].method) for i in range(3)]
    assert got == [(1.0, "old of row 0"), (20.0, "new of row 1"), (30.0, "new of row 2")]


def test_a_row_view_pickles_as_a_plain_dict_with_its_words() -> None:
    t = TableValues(1)
    t.put("x", [1.5], [0.5], "kJ/mol", _words("x"))
    back = pickle.loads(pickle.dumps(t.row(0)))
    assert type(back) is dict
    assert back == {"x": ComputedValue(1.5, 0.5, "kJ/mol", "x of row 0", ("source 0",))}
    assert isinstance(t.row(0), RowValues)


# --- column-wise writing of the added cells -----------------------------------------------


def _book(path: Path, rows: int) -> Path:
    wb = xlsxwriter.Workbook(str(path))
    ws = wb.add_worksheet("Data")
    bold = wb.add_format({"bold": True})
    ws.write_row(0, 0, ["Compound", "value", "other"])
    for r in range(1, rows + 1):
        ws.write_string(r, 0, f"X{r}", bold if r % 11 == 0 else None)
        if r % 5:
            ws.write_number(r, 1, r * 0.25)
        if r % 7 == 0:
            ws.write_string(r, 2, "a & b <c>")
    wb.close()
    return path


def _annotation(rows: int) -> tuple[list[SheetAddition], list[CellNote]]:
    nan = math.nan
    values = [float(r) if r % 3 else None for r in range(2, rows + 2)]
    formulas = [f"B{r}*2" if r % 3 and r % 4 else None for r in range(2, rows + 2)]
    big = [1e308 * 10 if r == 50 else (nan if r == 60 else r / 7) for r in range(2, rows + 2)]
    texts = [("warning: A & <B>" if r % 13 == 0 else None) for r in range(2, rows + 2)]
    styles = ["warning" if t else None for t in texts]
    columns = [
        AddedColumn("v", ColumnCells(values, formulas, "number"), number_format="0.0"),
        AddedColumn("w", ColumnCells(big, None, "number"), number_format="0.0"),
        AddedColumn("flags", ColumnCells(texts, None, styles), number_format=None),
        # a list of AddedCells: its blanks keep their format (a styled empty cell)
        AddedColumn("listed", [AddedCell(None if r % 2 else r / 3, None, "number")
                               for r in range(2, rows + 2)], number_format="0.000"),
    ]
    notes = []
    for r in range(2, rows + 2, 9):  # on filled cells, empty cells and an added cell
        col = "ABCF"[(r // 9) % 4]
        notes.append(CellNote("Data", f"{col}{r}", f"note on {col}{r}", "warning"))
    return [SheetAddition("Data", 1, 2, 4, columns)], notes


def test_column_wise_cells_equal_cell_by_cell(tmp_path: Path, monkeypatch: pytest.MonkeyPatch
                                               ) -> None:
    rows = 9000  # more than two chunks of rows made at once
    src = _book(tmp_path / "in.xlsx", rows)
    additions, notes = _annotation(rows)
    made = []
    real = package_sheet.SheetRewriter._fast_adds

    def counted(self, r):  # type: ignore[no-untyped-def]
        got = real(self, r)
        made.append(got is not None)
        return got

    monkeypatch.setattr(package_sheet.SheetRewriter, "_fast_adds", counted)
    fast = tmp_path / "fast.xlsx"
    write_annotated(src, fast, additions=additions, notes=notes)
    assert sum(made) > 0.8 * rows  # most rows went the column-wise way
    monkeypatch.setattr(package_sheet.SheetRewriter, "_fast_adds", lambda self, r: None)
    slow = tmp_path / "slow.xlsx"
    write_annotated(src, slow, additions=additions, notes=notes)
    with zipfile.ZipFile(fast) as a, zipfile.ZipFile(slow) as b:
        assert a.namelist() == b.namelist()
        for name in a.namelist():
            assert a.read(name) == b.read(name), name
    with zipfile.ZipFile(fast) as a:
        sheet = a.read("xl/worksheets/sheet1.xml")
    assert b'<c r="E2" s="' in sheet and b"<f>B2*2</f>" in sheet  # the check sees cells
    assert re.search(rb'<c r="H3" s="\d+"/>', sheet)  # the listed column's blank, formatted


def test_row_formulas_spell_the_same_texts_as_a_list() -> None:
    from sheetcycle.io.package_cells import RowFormulas

    which = [0, -1, 1, 0, -1, 1]
    got = RowFormulas(["B{#}*2", "'m s'!$D$4-C{#}"], which, 7, "{#}")
    want = ["B7*2", None, "'m s'!$D$4-C9", "B10*2", None, "'m s'!$D$4-C12"]
    assert list(got) == want and len(got) == 6
    assert got[2:5] == want[2:5] and got[::2] == want[::2] and got[-1] == want[-1]
    with pytest.raises(ValueError):
        RowFormulas(["A{#}"], [0, 1], 2, "{#}")


def test_array_values_and_row_formulas_write_the_same_bytes_as_lists(tmp_path: Path) -> None:
    import numpy as np

    from sheetcycle.io.package_cells import RowFormulas

    rows = 5000
    src = _book(tmp_path / "in.xlsx", rows)
    values = [float(r) if r % 3 else None for r in range(2, rows + 2)]
    formulas = [f"B{r}*2" if r % 3 and r % 4 else None for r in range(2, rows + 2)]
    which = [0 if f else -1 for f in formulas]
    as_lists = [SheetAddition("Data", 1, 2, 4, [AddedColumn(
        "v", ColumnCells(values, formulas, "number"), number_format="0.0")])]
    as_arrays = [SheetAddition("Data", 1, 2, 4, [AddedColumn(
        "v", ColumnCells(np.array([math.nan if v is None else v for v in values]),
                         RowFormulas(["B{#}*2"], which, 2, "{#}"), "number"),
        number_format="0.0")])]
    notes = [CellNote("Data", "E20", "a note on an added cell", "note")]
    a_path, b_path = tmp_path / "lists.xlsx", tmp_path / "arrays.xlsx"
    write_annotated(src, a_path, additions=as_lists, notes=notes)
    write_annotated(src, b_path, additions=as_arrays, notes=notes)
    with zipfile.ZipFile(a_path) as a, zipfile.ZipFile(b_path) as b:
        assert a.namelist() == b.namelist()
        for name in a.namelist():
            assert a.read(name) == b.read(name), name
    cells = as_arrays[0].columns[0].cells
    assert cells[0] == AddedCell(2.0, "B2*2", "number")  # r = 2: a value and a formula
    assert cells[1] == AddedCell(None, None, None)  # r = 3: blank
    assert cells[2] == AddedCell(4.0, None, "number")  # r = 4: a value only


def test_shared_texts_are_one_copy_and_forgotten_between_runs() -> None:
    from sheetcycle.model import _SHARED, forget_shared, share

    a = "".join(["covalent ", "character"])  # two equal texts, two objects
    b = "".join(["covalent char", "acter"])
    assert a == b and a is not b
    assert share(a) is share(b) is a
    forget_shared()
    assert not _SHARED
    assert share(b) is b  # a fresh registry keeps the first copy it sees


def test_formulas_by_signature_equal_the_row_by_row_plan(monkeypatch: pytest.MonkeyPatch
                                                         ) -> None:
    # the demo workbook (invented data) has rows of many cycle shapes, missing terms,
    # derived terms and flags; both ways of planning must give the same cells and checks
    from sheetcycle.api import _read_tables
    from sheetcycle.io import annotated
    from sheetcycle.pipeline import Settings, run_tables

    demo = Path(__file__).resolve().parent.parent / "workbooks" / "demo_salts.xlsx"
    settings = Settings()
    found = _read_tables(demo, settings.column_overrides, settings.limits)
    run = run_tables(demo, found.tables, settings, list(found.flags))

    def planned() -> tuple[list[list[object]], list[tuple[str, str, str, float]]]:
        plan = annotated.plan_annotations(run, found.book)
        cells = [[col.cells[i] for i in range(len(col.cells))]
                 for add in plan.additions for col in add.columns]
        return cells, sorted(plan.all_formulas())

    by_code = planned()
    assert annotated._signature_codes is not None
    monkeypatch.setattr(annotated, "_signature_codes", lambda rows: None)
    by_row = planned()
    assert by_code[1], "the demo emitted no formulas"
    assert by_code == by_row
