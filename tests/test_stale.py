"""Stale cached formula values and formula error values (sheetcycle.io.stale).

The workbooks are written by openpyxl (formulas without cached values) and their cached
values then forged by editing the worksheet XML inside the zip, so each test knows exactly
which caches are right and which are stale. Expected formula values are computed in the
tests with plain Python arithmetic. Spreadsheet error semantics (x/0 is #DIV/0!, NA() is
#N/A, a reference to a missing sheet is #REF!) are common practice, no source.
"""

from __future__ import annotations

import re
import zipfile
from pathlib import Path

import openpyxl
import pytest
from openpyxl.workbook.defined_name import DefinedName

from sheetcycle.api import inspect
from sheetcycle.io.cells import read_cells
from sheetcycle.io.stale import formula_error_flags, stale_flags
from sheetcycle.model import Severity


def forge(src: Path, dst: Path, caches: dict[str, object], *, app: str = "Microsoft Excel",
          full_calc: bool = False) -> None:
    """Copy an openpyxl-saved workbook, giving formula cells the cached values asked for
    (first sheet, by A1 reference) and the saving application ``app``."""
    with zipfile.ZipFile(src) as zin, zipfile.ZipFile(dst, "w", zipfile.ZIP_DEFLATED) as zout:
        for info in zin.infolist():
            data = zin.read(info.filename)
            if info.filename == "xl/worksheets/sheet1.xml":
                text = data.decode()
                for ref, value in caches.items():
                    pattern = re.compile(rf'<c r="{ref}"([^>]*)><f>(.*?)</f><v\s*/?>(?:</v>)?</c>')
                    if isinstance(value, str) and value.startswith("#"):
                        t, v = ' t="e"', value
                    elif isinstance(value, str):
                        t, v = ' t="str"', value
                    else:
                        t, v = "", repr(float(value))
                    text, n = pattern.subn(
                        lambda m, t=t, v=v, ref=ref: (
                            f'<c r="{ref}"{m.group(1)}{t}><f>{m.group(2)}</f><v>{v}</v></c>'
                        ),
                        text,
                    )
                    assert n == 1, ref
                data = text.encode()
            elif info.filename == "xl/workbook.xml" and not full_calc:
                data = data.replace(b' fullCalcOnLoad="1"', b"")
            elif info.filename == "docProps/app.xml":
                data = re.sub(rb"<Application>[^<]*</Application>",
                              f"<Application>{app}</Application>".encode(), data)
            zout.writestr(info, data)


def salts_book(tmp_path: Path) -> Path:
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Salts"
    ws.append(["Formula", "kcal", "kJ", "next", "label"])
    b = [-98.26, -104.4, -97.825047801147, -95.0, 10.0, 12.0]
    for i, x in enumerate(b, start=2):
        ws.append(["NaCl", x, f"=B{i}*4.184", f"=C{i}+1", f'=A{i}&"-{i}"'])
    src = tmp_path / "plain.xlsx"
    wb.save(src)
    return src


# Right caches: B*4.184 as Python computes it; a relative error of 1e-12 still matches.
def caches(stale: dict[str, object]) -> dict[str, object]:
    b = [-98.26, -104.4, -97.825047801147, -95.0, 10.0, 12.0]
    out: dict[str, object] = {}
    for i, x in enumerate(b, start=2):
        out[f"C{i}"] = x * 4.184 * (1 + 1e-12)
        out[f"D{i}"] = x * 4.184 + 1
        out[f"E{i}"] = f"NaCl-{i}"
    out.update(stale)
    return out


STALE = {"C4": -411.0, "C6": 10.0 * 4.184 * (1 + 2e-9), "E7": "NaCl-6", "D3": 0.0}


def test_stale_caches_are_flagged_and_the_formula_value_used(tmp_path: Path) -> None:
    path = tmp_path / "forged.xlsx"
    forge(salts_book(tmp_path), path, caches(STALE))
    book = read_cells(path, verify=True)
    assert book.cache_trusted
    flags = stale_flags(book)
    assert [f.cell for f in flags] == ["D3", "C4", "C6", "E7"]
    assert all(f.code == "cache-stale" and f.severity is Severity.WARNING for f in flags)
    assert all(f.sheet == "Salts" for f in flags)
    by_cell = {f.cell: f.message for f in flags}
    assert by_cell["C4"] == (
        "Salts!C4: the cached value −411.0 differs from the formula's value −409.3 "
        "(=B4*4.184); the formula's value was used"
    )
    assert "'NaCl-6'" in by_cell["E7"] and "'NaCl-7'" in by_cell["E7"]
    rows = book.sheet("Salts").rows
    assert rows[3][2] == pytest.approx(-97.825047801147 * 4.184, rel=1e-15)  # the formula's
    assert rows[2][3] == pytest.approx(-104.4 * 4.184 + 1, rel=1e-15)


def test_without_verify_the_cache_is_used_and_still_checked(tmp_path: Path) -> None:
    path = tmp_path / "forged.xlsx"
    forge(salts_book(tmp_path), path, caches(STALE))
    book = read_cells(path)
    rows = book.sheet("Salts").rows
    assert rows[3][2] == -411.0  # the trusted cache, as read
    flags = stale_flags(book)
    assert [f.cell for f in flags] == ["D3", "C4", "C6", "E7"]
    assert all(f.message.endswith("the cached value was used") for f in flags)
    # the check did not change what the book holds
    assert book.sheet("Salts").rows[3][2] == -411.0


def test_a_stale_input_makes_its_dependents_stale_too(tmp_path: Path) -> None:
    # C4's cache is stale; D4 (=C4+1) cached from the stale value is stale as well.
    path = tmp_path / "chain.xlsx"
    forged = caches({"C4": -411.0, "D4": -410.0})
    forge(salts_book(tmp_path), path, forged)
    cells = [f.cell for f in stale_flags(read_cells(path, verify=True))]
    assert cells == ["C4", "D4"]


def test_untrusted_caches_are_compared_too(tmp_path: Path) -> None:
    path = tmp_path / "script.xlsx"
    forge(salts_book(tmp_path), path, caches({"C2": 0.0}), app="somescript", full_calc=True)
    book = read_cells(path)
    assert not book.cache_trusted
    flags = stale_flags(book)
    assert [f.cell for f in flags] == ["C2"]
    assert "not trusted" in flags[0].message
    assert "the formula's value was used" in flags[0].message


def test_no_cached_values_no_flags(tmp_path: Path) -> None:
    assert stale_flags(read_cells(salts_book(tmp_path))) == []


def test_formula_errors_name_cell_formula_and_error(tmp_path: Path) -> None:
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Data"
    ws.append(["Formula", "dHf (kJ/mol)", "x"])
    ws.append(["NaCl", "=C2/0", 0.0])
    ws.append(["KCl", "=NA()", 1.0])
    ws.append(["KBr", "=Missing!A1*2", 1.0])
    ws.append(["LiF", "=B6+1", 1.0])  # B5 <-> B6: a circular reference
    ws.append(["NaF", "=B5*2", 1.0])
    ws.append(["CsCl", "=-443.0*scale", 1.0])  # a named range: fine
    wb.create_sheet("Factors")["A1"] = 1.0
    wb.defined_names["scale"] = DefinedName("scale", attr_text="Factors!$A$1")
    path = tmp_path / "errors.xlsx"
    wb.save(path)
    book = read_cells(path)
    flags = formula_error_flags(book)
    by_cell = {f.cell: f for f in flags}
    assert sorted(by_cell) == ["B2", "B3", "B4", "B5", "B6"]
    assert all(f.code == "formula-error" and f.severity is Severity.ERROR for f in flags)
    assert by_cell["B2"].message == (
        "Data!B2: the formula =C2/0 gives the error #DIV/0!: a division by zero (or by a "
        "blank cell); the cell counts as missing"
    )
    assert "#N/A" in by_cell["B3"].message
    assert "#REF!" in by_cell["B4"].message and "'Missing'" in by_cell["B4"].message
    assert "circular reference" in by_cell["B5"].message
    assert "=B6+1" in by_cell["B5"].message
    assert book.sheet("Data").rows[6][1] == -443.0
    # skipping cells another flag covers
    assert next(f.cell for f in formula_error_flags(book, skip={("Data", "B2")})) == "B3"

    # The table reader turns the same error values into missing values; the cell is
    # flagged once, by the formula-error flag that also names the formula and the reason
    # (the reader's own cell-not-number flag for that cell is dropped as a duplicate).
    report = inspect(path)
    table_flags = {f.cell: f for f in report.flags if f.code == "formula-error"}
    assert "#DIV/0!" in table_flags["B2"].message
    assert "circular reference" in table_flags["B5"].message
    assert not [f for f in report.flags if f.code == "cell-not-number" and f.cell in table_flags]
    (table,) = report.tables
    values = table.column("formation_enthalpy").values
    assert values[5] == pytest.approx(-443.0)
    assert all(v != v for v in values[:5])  # NaN: missing, not zero


def test_cached_error_values_of_a_trusted_file_are_flagged(tmp_path: Path) -> None:
    src = salts_book(tmp_path)
    path = tmp_path / "err.xlsx"
    forge(src, path, {**caches({}), "C2": "#DIV/0!"})
    book = read_cells(path)
    flags = formula_error_flags(book)
    assert [f.cell for f in flags] == ["C2"]
    assert "(its cached value)" in flags[0].message
