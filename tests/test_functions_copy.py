"""Cells that use sheetcycle's worksheet functions, in the annotated copy.

The workbook is invented for this test (a made-up screening sheet; the compounds and
values are handbook ones, the layout is ours). Oracles outside the project:

* lattice enthalpy of NaCl 787 kJ/mol (CRC Handbook of Chemistry and Physics, "Lattice
  energies" table; from memory), with ΔfH°(NaCl, s) = −411.2 kJ/mol (NBS/CODATA tables,
  from memory);
* 1 eV per particle = e·N_A = 96.485 332 12 kJ/mol (CODATA 2018 exact constants, taken from
  scipy.constants); 1 kcal (thermochemical) = 4.184 kJ (NIST SP 811, scipy.constants.calorie);
* the worksheet XML as ECMA-376 Part 1 defines it (<f>, <v>, t="e", t="inlineStr"), read
  raw; python-calamine (the cached values a viewer shows) and openpyxl (formulas, notes);
* LibreOffice recalculating on load (tests/lo.py), which does not know our functions.
"""

from __future__ import annotations

import argparse
import math
import re
import sys
import zipfile
from pathlib import Path

import numpy as np
import openpyxl
import pytest
from python_calamine import CalamineWorkbook
from scipy import constants

from sheetcycle.api import annotate
from sheetcycle.cli import main
from sheetcycle.cli_extra import add_annotate_options, settings_kwargs
from sheetcycle.io.cells import SheetCells, WorkbookCells
from sheetcycle.io.formula_check import check_formulas
from sheetcycle.pipeline import Settings

sys.path.insert(0, str(Path(__file__).parent))
import lo

EV_KJ = constants.e * constants.N_A / 1000.0  # kJ/mol per eV (CODATA 2018, exact)
KCAL = constants.calorie  # 4.184 kJ per kcal, thermochemical (NIST SP 811)
NACL_LATTICE = 787.0  # kJ/mol, CRC Handbook (from memory)
KCL_DFH_KCAL = -104.33  # ΔfH°(KCl, s) = −436.5 kJ/mol (NBS tables, from memory) in kcal/mol

#: (sheet, cell) -> formula text of every cell that uses one of our functions
OWN = {
    ("Calc", "B2"): 'LATTICEH("NaCl", -411.2)',
    ("Calc", "B3"): 'UNITCONV(1, "eV", "kJ/mol")',
    ("Calc", "B4"): 'UNITCONV(1, "eV", "furlong")',  # not a unit: an error value
    ("Salts", "B3"): f'UNITCONV({KCL_DFH_KCAL}, "kcal/mol", "kJ/mol")',
}


def book(path: Path) -> Path:
    """An invented screening workbook: a compound table and a sheet of our functions."""
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Salts"
    ws.append(["Compound", "ΔfH° / kJ mol⁻¹", "Remarks"])
    ws.append(["NaCl", -411.2, "typed"])
    ws.append(["KCl", "=" + OWN[("Salts", "B3")], "converted from kcal/mol"])
    calc = wb.create_sheet("Calc")
    calc.append(["quantity", "value"])
    for (sheet, cell), formula in OWN.items():
        if sheet == "Calc":
            calc[cell] = "=" + formula
    calc["A2"], calc["A3"], calc["A4"] = "lattice NaCl", "1 eV", "a bad unit"
    calc["A5"], calc["B5"] = "plain", "=2*21"  # not ours: left as it is
    calc["A6"], calc["B6"] = "twice 1 eV", "=B3*2"  # ours feeds it: left as it is
    wb.save(path)
    return path


def _parts(path: Path) -> dict[str, str]:
    """Sheet name -> worksheet part, from workbook.xml and its relationships."""
    with zipfile.ZipFile(path) as z:
        wb = z.read("xl/workbook.xml").decode()
        rels = z.read("xl/_rels/workbook.xml.rels").decode()
    targets = dict(re.findall(r'<Relationship[^>]*?Id="(\w+)"[^>]*?Target="([^"]+)"', rels))
    targets |= {
        k: v for v, k in re.findall(r'<Relationship[^>]*?Target="([^"]+)"[^>]*?Id="(\w+)"', rels)
    }
    out = {}
    for name, rid in re.findall(r'<sheet [^>]*?name="([^"]+)"[^>]*?r:id="(\w+)"', wb):
        t = targets[rid].lstrip("/")
        out[name] = t if t.startswith("xl/") else "xl/" + t
    return out


def _cells(path: Path, sheet: str) -> dict[str, bytes]:
    """Raw <c> elements of one sheet by A1."""
    with zipfile.ZipFile(path) as z:
        xml = z.read(_parts(path)[sheet])
    out = {}
    for m in re.finditer(rb'<c r="([A-Z]+\d+)"[^>]*?(?:/>|>.*?</c>)', xml, re.S):
        out[m.group(1).decode()] = m.group()
    return out


def _v(raw: bytes) -> bytes | None:
    m = re.search(rb"<v>(.*?)</v>", raw)
    return m.group(1) if m else None


@pytest.fixture(scope="module")
def copies(tmp_path_factory: pytest.TempPathFactory) -> dict[str, Path]:
    root = tmp_path_factory.mktemp("functions")
    src = book(root / "screening.xlsx")
    cached = root / "cached.xlsx"
    values = root / "values.xlsx"
    annotate(src, cached)
    annotate(src, values, settings=Settings(functions_as_values=True))
    return {"src": src, "cached": cached, "values": values}


def _expected() -> dict[tuple[str, str], float]:
    return {
        ("Calc", "B2"): NACL_LATTICE,
        ("Calc", "B3"): EV_KJ,
        ("Salts", "B3"): KCL_DFH_KCAL * KCAL,
    }


def _check_others_identical(src: Path, dst: Path) -> None:
    """Every original cell but ours is byte-identical; a noted one differs only in s."""
    wb = openpyxl.load_workbook(dst)
    for sheet in ("Salts", "Calc"):
        before, after = _cells(src, sheet), _cells(dst, sheet)
        for ref, raw in before.items():
            if (sheet, ref) in OWN:
                continue
            assert ref in after, f"{sheet}!{ref} lost"
            if after[ref] != raw:
                assert wb[sheet][ref].comment is not None, f"{sheet}!{ref} changed"
                strip = re.compile(rb'\ss="\d+"')
                assert strip.sub(b"", after[ref]) == strip.sub(b"", raw), f"{sheet}!{ref}"


def test_annotate_caches_our_functions_values(copies: dict[str, Path]) -> None:
    src, dst = copies["src"], copies["cached"]
    for (sheet, ref), formula in OWN.items():
        before, after = _cells(src, sheet)[ref], _cells(dst, sheet)[ref]
        f_old = re.search(rb"<f>.*?</f>", before).group()
        assert re.search(rb"<f>.*?</f>", after).group() == f_old  # formula kept exactly
        assert f_old == b"<f>" + formula.replace("&", "&amp;").encode() + b"</f>"
    cells = {**{("Calc", k): v for k, v in _cells(dst, "Calc").items()},
             **{("Salts", k): v for k, v in _cells(dst, "Salts").items()}}  # fmt: skip
    for key, want in _expected().items():
        got = float(_v(cells[key]))
        rel = 0.01 if key == ("Calc", "B2") else 1e-9
        assert got == pytest.approx(want, rel=rel), key
    assert b't="e"' in cells[("Calc", "B4")] and _v(cells[("Calc", "B4")]) == b"#VALUE!"
    # a viewer that shows cached values (python-calamine) sees them
    wb = CalamineWorkbook.from_path(str(dst))
    calc = wb.get_sheet_by_name("Calc").to_python()
    salts = wb.get_sheet_by_name("Salts").to_python()
    assert calc[1][1] == pytest.approx(NACL_LATTICE, rel=0.01)
    assert calc[2][1] == pytest.approx(EV_KJ, rel=1e-9)
    assert salts[2][1] == pytest.approx(KCL_DFH_KCAL * KCAL, rel=1e-9)
    # openpyxl still reads the formulas
    ws = openpyxl.load_workbook(dst)["Calc"]
    assert ws["B2"].value == "=" + OWN[("Calc", "B2")]
    _check_others_identical(src, dst)


def test_functions_as_values_writes_values_with_the_formula_in_a_note(
    copies: dict[str, Path],
) -> None:
    src, dst = copies["src"], copies["values"]
    cells = {(s, k): v for s in ("Salts", "Calc") for k, v in _cells(dst, s).items()}
    for key, want in _expected().items():
        assert b"<f" not in cells[key], key
        rel = 0.01 if key == ("Calc", "B2") else 1e-9
        assert float(_v(cells[key])) == pytest.approx(want, rel=rel), key
    assert b"<f" not in cells[("Calc", "B4")] and _v(cells[("Calc", "B4")]) == b"#VALUE!"
    wb = openpyxl.load_workbook(dst)
    for (sheet, ref), formula in OWN.items():
        cell = wb[sheet][ref]
        assert cell.data_type != "f", f"{sheet}!{ref}"
        assert cell.comment is not None and f"={formula}" in cell.comment.text
    # the cells that are not ours keep their formulas
    assert wb["Calc"]["B5"].value == "=2*21" and wb["Calc"]["B6"].value == "=B3*2"
    # the style index of a replaced cell is only changed by its note's fill
    old = openpyxl.load_workbook(src)["Calc"]["B3"]
    assert wb["Calc"]["B3"].number_format == old.number_format
    _check_others_identical(src, dst)
    # formulas became values: no calculation chain may list them
    with zipfile.ZipFile(dst) as z:
        assert not any("calcChain" in n for n in z.namelist())


def test_libreoffice_reads_the_values_back(copies: dict[str, Path], tmp_path: Path) -> None:
    """LibreOffice does not know our functions (the point of the option): recalculating on
    load, it shows the values of the functions_as_values copy, and #NAME? for the cells
    that kept their formulas."""
    lo.soffice()
    lo.convert_to_csv([copies["values"], copies["cached"]], tmp_path)
    values = lo.sheets_csv(tmp_path, "values", ["Calc", "Salts"])
    cached = lo.sheets_csv(tmp_path, "cached", ["Calc"])
    ours_values = CalamineWorkbook.from_path(str(copies["values"]))
    ours = ours_values.get_sheet_by_name("Calc").to_python()
    calc = values["Calc"]
    assert float(calc[1][1]) == pytest.approx(ours[1][1], rel=1e-12)
    assert float(calc[1][1]) == pytest.approx(NACL_LATTICE, rel=0.01)
    assert float(calc[2][1]) == pytest.approx(EV_KJ, rel=1e-12)
    assert calc[3][1] == "#VALUE!"
    assert float(calc[4][1]) == 42.0
    assert float(calc[5][1]) == pytest.approx(2 * EV_KJ, rel=1e-12)  # recalculated over B3
    assert float(values["Salts"][2][1]) == pytest.approx(KCL_DFH_KCAL * KCAL, rel=1e-12)
    # the copy that keeps the formulas: LibreOffice cannot compute them
    assert cached["Calc"][1][1] == "#NAME?"
    assert cached["Calc"][2][1] == "#NAME?"


def test_cli_option_maps_to_the_setting(copies: dict[str, Path], tmp_path: Path) -> None:
    parser = argparse.ArgumentParser()
    add_annotate_options(parser)
    assert settings_kwargs(parser.parse_args(["--functions-as-values"]))["functions_as_values"]
    assert not settings_kwargs(parser.parse_args([]))["functions_as_values"]
    out = tmp_path / "cli.xlsx"
    assert main(["annotate", str(copies["src"]), "-o", str(out), "--functions-as-values",
                 "-q"]) == 0  # fmt: skip
    assert _cells(out, "Calc") == _cells(copies["values"], "Calc")
    assert _cells(out, "Salts").keys() == _cells(copies["values"], "Salts").keys()


# --- one engine: the writer's formulas verified by the reader's evaluator -------------------


def _grid_book(rows: list[list[object]]) -> WorkbookCells:
    return WorkbookCells("mem.xlsx", "xlsx", [SheetCells("T", rows)], False, "test")


def test_check_formulas_uses_the_readers_engine() -> None:
    # our own functions evaluate in an emitted formula, and a wrong value is reported
    rows: list[list[object]] = [["eV", "kJ/mol"], [2.0, None], ["−411.2", None]]
    items = [
        ("T", "B2", 'UNITCONV(A2,"eV","kJ/mol")', 2 * EV_KJ),
        ("T", "C2", 'UNITCONV(A2,"eV","kJ/mol")', 2 * EV_KJ + 1.0),
        ("T", "B3", "A3+1", -410.2),  # text with a Unicode minus: #VALUE! in a spreadsheet
    ]
    problems = check_formulas(items, _grid_book(rows), {})
    assert [p[:2] for p in problems] == [("T", "C2"), ("T", "B3")]
    assert problems[0][4] == pytest.approx(2 * EV_KJ, rel=1e-12)
    assert math.isnan(problems[1][4])


def test_check_formulas_100k_rows_in_a_few_seconds() -> None:
    n = 100_000
    rng = np.random.default_rng(7)
    a = np.round(rng.uniform(-900, -100, n), 3)
    b = np.round(rng.uniform(50, 200, n), 3)
    rows: list[list[object]] = [["a", "b"]]
    rows += [[float(x), float(y)] for x, y in zip(a, b, strict=True)]
    refs = [100.0 + k for k in range(20)]
    extra = {("ref", k, 0): v for k, v in enumerate(refs)}
    items = []
    for i in range(n):
        r = i + 2
        k = i % 20
        lat = b[i] + refs[k] - a[i]  # the expected values by numpy arithmetic
        items.append(("T", f"C{r}", f"B{r}+'ref'!$A${k + 1}-A{r}", float(lat)))
        items.append(("T", f"D{r}", f"C{r}-ABS(A{r})", float(lat - abs(a[i]))))
    extra |= {("T", i + 1, 2): v for i, (_, _, _, v) in enumerate(items[::2])}
    problems = check_formulas(items, _grid_book(rows), extra)
    assert problems == []  # (its speed is measured in tests/bench, not asserted here)
