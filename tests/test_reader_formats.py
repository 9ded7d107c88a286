"""The other formats (.csv, .xls, .ods), elements sheets, reference files and mapping files.

Expected lattice enthalpies: CRC Handbook "Lattice Energies" table (from memory); inputs:
NBS tables (Wagman et al. 1982, from memory).
"""

from __future__ import annotations

import json
from pathlib import Path

import openpyxl
import pytest

from sheetcycle import annotate, inspect
from sheetcycle.api import load_column_mapping, load_reference_file
from sheetcycle.cli import main
from sheetcycle.errors import ReadError
from sheetcycle.pipeline import Settings

ROWS = [("Formula", "dHf (kJ/mol)"), ("NaCl", -411.2), ("KBr", -393.8)]
EXPECTED = {"NaCl": 786, "KBr": 682}


def lattice(run) -> dict[str, float]:  # type: ignore[no-untyped-def]
    return {
        r.formula: r.values["lattice_enthalpy"].value
        for r in run.rows
        if "lattice_enthalpy" in r.values
    }


def check(run) -> None:  # type: ignore[no-untyped-def]
    got = lattice(run)
    for f, v in EXPECTED.items():
        assert got[f] == pytest.approx(v, rel=0.015), f


def test_csv_semicolon_and_decimal_comma(tmp_path: Path) -> None:
    path = tmp_path / "salts.csv"
    path.write_text("Formula;dHf (kJ/mol)\nNaCl;-411,2\nKBr;-393,8\n", encoding="utf-8")
    check(annotate(path))


def test_csv_with_bom_and_commas(tmp_path: Path) -> None:
    path = tmp_path / "salts.csv"
    path.write_text("\ufeff" + "\n".join(f"{a},{b}" for a, b in ROWS) + "\n", encoding="utf-8")
    run = annotate(path)
    check(run)
    assert run.tables[0].sheet == "salts"


def test_xls_values(tmp_path: Path) -> None:
    import xlwt  # test dependency: writes the legacy .xls format

    wb = xlwt.Workbook()
    ws = wb.add_sheet("Salts")
    for r, row in enumerate(ROWS):
        for c, v in enumerate(row):
            ws.write(r, c, v)
    path = tmp_path / "salts.xls"
    wb.save(str(path))
    check(annotate(path))


def test_ods_values(tmp_path: Path) -> None:
    from odf.opendocument import OpenDocumentSpreadsheet
    from odf.table import Table, TableCell, TableRow
    from odf.text import P

    doc = OpenDocumentSpreadsheet()
    table = Table(name="Salts")
    for row in ROWS:
        tr = TableRow()
        for v in row:
            if isinstance(v, str):
                cell = TableCell(valuetype="string")
            else:
                cell = TableCell(valuetype="float", value=v)
            cell.addElement(P(text=str(v)))
            tr.addElement(cell)
        table.addElement(tr)
    doc.spreadsheet.addElement(table)
    path = tmp_path / "salts.ods"
    doc.save(str(path))
    check(annotate(path))


def test_elements_sheet_overrides_builtin_and_says_so(tmp_path: Path) -> None:
    path = tmp_path / "el.xlsx"
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Salts"
    ws.append(["Formula", "ΔfH / kJ mol-1"])
    ws.append(["NaCl", -411.2])
    el = wb.create_sheet("Elements")
    el.append(["Element", "IE1 (kJ/mol)"])
    el.append(["Na", 500.0])  # deliberately 4.2 kJ/mol above the NIST value (495.8)
    wb.save(path)
    run = annotate(path)
    (row,) = [r for r in run.rows if r.formula == "NaCl"]
    lat = row.values["lattice_enthalpy"]
    assert any("Elements!B2" in s for s in lat.sources)
    baseline = annotate(path, settings=Settings(), json_path=None)
    assert lattice(baseline)["NaCl"] == pytest.approx(lat.value)
    # 4.2 kJ/mol more ionization energy gives 4.2 kJ/mol more lattice enthalpy
    plain = tmp_path / "plain.xlsx"
    wb.remove(el)
    wb.save(plain)
    assert lat.value - lattice(annotate(plain))["NaCl"] == pytest.approx(500.0 - 495.846, abs=0.01)


def test_reference_file_overrides_second_electron_gain(tmp_path: Path) -> None:
    ref = tmp_path / "ours.csv"
    ref.write_text(
        "element,quantity,index,value,unit,uncertainty,source\n"
        "O,electron_gain_enthalpy,2,844,kJ/mol,,our preferred value\n",
        encoding="utf-8",
    )
    values = load_reference_file(ref)
    assert values[0][0:3] == ("O", "electron_gain_enthalpy", 2)
    path = tmp_path / "mgo.xlsx"
    wb = openpyxl.Workbook()
    wb.active.append(["Formula", "ΔfH / kJ mol-1"])
    wb.active.append(["MgO", -601.6])
    wb.save(path)
    base = lattice(annotate(path))["MgO"]
    rep = tmp_path / "r.json"
    assert main(["annotate", str(path), "--reference", str(ref), "--json", str(rep)]) == 0
    data = json.loads(rep.read_text(encoding="utf-8"))
    lat = data["rows"][0]["values"]["lattice_enthalpy"]
    assert lat["value"] - base == pytest.approx(844 - 798, abs=0.01)
    assert any("our preferred value" in s for s in lat["sources"])
    assert any(r["source"].startswith("our preferred value") for r in data["references"])


def test_reference_file_errors_name_the_line(tmp_path: Path) -> None:
    ref = tmp_path / "bad.csv"
    ref.write_text(
        "element,quantity,index,value,unit,uncertainty,source\n"
        "O,electron_gain_enthalpy,2,844,J/K,,x\n",
        encoding="utf-8",
    )
    with pytest.raises(ReadError, match="line 2"):
        load_reference_file(ref)


def test_mapping_file(tmp_path: Path) -> None:
    mapping = tmp_path / "map.json"
    mapping.write_text(
        json.dumps(
            {"columns": [{"column": "Heat", "quantity": "formation_enthalpy", "unit": "kcal/mol"}]}
        ),
        encoding="utf-8",
    )
    overrides = load_column_mapping(mapping)
    path = tmp_path / "m.xlsx"
    wb = openpyxl.Workbook()
    wb.active.append(["Formula", "Heat"])
    wb.active.append(["NaCl", -411.2 / 4.184])
    wb.save(path)
    report = inspect(path, column_overrides=overrides)
    assert "formation_enthalpy, unit kcal/mol" in report.as_text()
    assert lattice(annotate(path, settings=Settings(column_overrides=tuple(overrides))))[
        "NaCl"
    ] == pytest.approx(787, abs=3)
    bad = tmp_path / "bad.json"
    bad.write_text('{"columns": [{"colum": "B"}]}', encoding="utf-8")
    with pytest.raises(ReadError, match="entry 1"):
        load_column_mapping(bad)
