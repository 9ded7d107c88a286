"""Tests of the low-level workbook reader (sheetcycle.io.cells, sheetcycle.io.safety).

Reference readers: python-calamine and openpyxl (independent xlsx readers from PyPI) read
the same files; hand-built packages follow the part layout of ECMA-376 Part 1 (SpreadsheetML)
and Part 2 (Open Packaging Conventions).
"""

from __future__ import annotations

import io
import math
import zipfile
from pathlib import Path

import openpyxl
import pytest
import xlsxwriter
from openpyxl.formula.translate import Translator
from python_calamine import CalamineWorkbook

from sheetcycle.errors import ReadError
from sheetcycle.io.cells import CellError, read_cells
from sheetcycle.io.safety import CountingReader, Limits, check_xml_head

MAIN_NS = "http://schemas.openxmlformats.org/spreadsheetml/2006/main"
REL_NS = "http://schemas.openxmlformats.org/officeDocument/2006/relationships"
PKG_REL = "http://schemas.openxmlformats.org/package/2006/relationships"


# ----------------------------------------------------------------------------- helpers


def build_package(
    path: Path,
    sheets: list[tuple[str, str]],
    *,
    app: str | None = "Microsoft Excel",
    calc_pr: str = '<calcPr calcId="191029"/>',
    shared: list[str] | None = None,
    defined: str = "",
    prefix: str = "",
    strict: bool = False,
) -> Path:
    """Write a minimal xlsx by hand: ``sheets`` are (name, <sheetData> inner XML)."""
    p = f"{prefix}:" if prefix else ""
    xmlns = f'xmlns{":" + prefix if prefix else ""}="{MAIN_NS}"'
    office = (
        "http://purl.oclc.org/ooxml/officeDocument/relationships"
        if strict
        else "http://schemas.openxmlformats.org/officeDocument/2006/relationships"
    )
    with zipfile.ZipFile(path, "w", zipfile.ZIP_DEFLATED) as zf:
        zf.writestr(
            "[Content_Types].xml",
            '<?xml version="1.0"?><Types xmlns="http://schemas.openxmlformats.org/'
            'package/2006/content-types"></Types>',
        )
        rels = f'<Relationship Id="rId1" Type="{office}/officeDocument" Target="xl/workbook.xml"/>'
        if app is not None:
            rels += (
                f'<Relationship Id="rId2" Type="{office}/extended-properties" '
                'Target="docProps/app.xml"/>'
            )
            zf.writestr(
                "docProps/app.xml",
                '<?xml version="1.0"?><Properties xmlns="http://schemas.openxmlformats.org/'
                f'officeDocument/2006/extended-properties"><Application>{app}</Application>'
                "</Properties>",
            )
        zf.writestr(
            "_rels/.rels",
            f'<?xml version="1.0"?><Relationships xmlns="{PKG_REL}">{rels}</Relationships>',
        )
        wb_rels = ""
        sheet_els = ""
        for i, (name, data) in enumerate(sheets, start=1):
            wb_rels += (
                f'<Relationship Id="rId{i}" Type="{office}/worksheet" '
                f'Target="worksheets/sheet{i}.xml"/>'
            )
            sheet_els += f'<{p}sheet name="{name}" sheetId="{i}" r:id="rId{i}"/>'
            zf.writestr(
                f"xl/worksheets/sheet{i}.xml",
                f'<?xml version="1.0" encoding="UTF-8"?><{p}worksheet {xmlns} '
                f'xmlns:r="{REL_NS}"><{p}sheetData>{data}</{p}sheetData></{p}worksheet>',
            )
        if shared is not None:
            wb_rels += (
                f'<Relationship Id="rId99" Type="{office}/sharedStrings" '
                'Target="sharedStrings.xml"/>'
            )
            zf.writestr(
                "xl/sharedStrings.xml",
                f'<?xml version="1.0"?><sst xmlns="{MAIN_NS}">' + "".join(shared) + "</sst>",
            )
        zf.writestr(
            "xl/_rels/workbook.xml.rels",
            f'<?xml version="1.0"?><Relationships xmlns="{PKG_REL}">{wb_rels}</Relationships>',
        )
        zf.writestr(
            "xl/workbook.xml",
            f'<?xml version="1.0"?><{p}workbook {xmlns} xmlns:r="{REL_NS}"><{p}sheets>{sheet_els}'
            f"</{p}sheets>{defined}{calc_pr}</{p}workbook>",
        )
    return path


def calamine_grid(path: Path, sheet: int = 0) -> list[list[object]]:
    """python-calamine's view of a sheet, with blanks as None and trailing blanks cut."""
    grid = (
        CalamineWorkbook.from_path(str(path))
        .get_sheet_by_index(sheet)
        .to_python(skip_empty_area=False)
    )
    out = []
    for row in grid:
        vals = [None if v == "" else (float(v) if type(v) is int else v) for v in row]
        while vals and vals[-1] is None:
            vals.pop()
        out.append(vals)
    while out and not out[-1]:
        out.pop()
    return out


def trimmed(rows: list[list[object]]) -> list[list[object]]:
    out = [list(r) for r in rows]
    for r in out:
        while r and r[-1] is None:
            r.pop()
    while out and not out[-1]:
        out.pop()
    return out


# ----------------------------------------------------------------------------- values


@pytest.mark.parametrize("constant_memory", [False, True])
def test_values_match_calamine_for_xlsxwriter_file(tmp_path: Path, constant_memory: bool) -> None:
    # Shared strings (default) and inline strings (constant_memory) are both covered.
    path = tmp_path / "values.xlsx"
    wb = xlsxwriter.Workbook(str(path), {"constant_memory": constant_memory})
    ws = wb.add_worksheet("Data")
    ws.write_row(0, 0, ["Compound", "ΔfH / kJ mol−1", "note"])
    rows = [
        ["NaCl", -411.12, "s & <solid>"],
        ["KBr", -393.8, "line1\nline2"],
        ["MgO", -601.6, True],
        ["CaF2", 1228, "_x000D_ literal"],
    ]
    for r, row in enumerate(rows, start=1):
        for c, v in enumerate(row):
            if isinstance(v, bool):
                ws.write_boolean(r, c, v)
            else:
                ws.write(r, c, v)
    ws.write_number(7, 5, 1e-300)
    ws.write_string(9, 1, "gap row")
    wb.close()
    got = read_cells(path, evaluate=False)
    assert got.format == "xlsx"
    assert [s.name for s in got.sheets] == ["Data"]
    assert trimmed(got.sheets[0].rows) == calamine_grid(path)


def test_values_match_openpyxl_for_openpyxl_file(tmp_path: Path) -> None:
    path = tmp_path / "op.xlsx"
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "First"
    ws["A1"] = "Formula"
    ws["B1"] = "value"
    ws["A2"] = "LiF"
    ws["B2"] = -616.0
    ws["C5"] = 7
    ws["D5"] = False
    ws.merge_cells("A10:C10")
    ws2 = wb.create_sheet("Second sheet")
    ws2["B3"] = "x"
    wb.save(path)
    got = read_cells(path)
    ref = openpyxl.load_workbook(path)
    assert [s.name for s in got.sheets] == ref.sheetnames
    for sheet in got.sheets:
        rws = ref[sheet.name]
        for row in rws.iter_rows():
            for cell in row:
                expected = cell.value
                if isinstance(expected, int) and not isinstance(expected, bool):
                    expected = float(expected)
                assert sheet.value(cell.row - 1, cell.column - 1) == expected, cell.coordinate
    assert got.sheets[0].merged == [str(r) for r in ref["First"].merged_cells.ranges]


def test_error_bool_inline_rich_and_prefixed_cells(tmp_path: Path) -> None:
    # ECMA-376 Part 1, 18.3.1.4 (c), 18.18.11 (ST_CellType); prefixed elements are legal XML.
    data = (
        '<x:row r="1"><x:c r="A1" t="e"><x:v>#N/A</x:v></x:c><x:c r="B1" t="b"><x:v>1</x:v></x:c>'
        '<x:c r="C1" t="inlineStr"><x:is><x:r><x:t>Na</x:t></x:r><x:r><x:t>Cl</x:t></x:r>'
        "<x:rPh><x:t>ignored</x:t></x:rPh></x:is></x:c>"
        '<x:c r="D1" t="s"><x:v>0</x:v></x:c><x:c r="E1" s="3"/><x:c r="F1"><x:v>2.5E-3</x:v></x:c>'
        '</x:row><x:row r="3"><x:c t="s"><x:v>1</x:v></x:c><x:c><x:v>4</x:v></x:c></x:row>'
    )
    shared = [
        "<si><t>K&amp;Br</t></si>",
        '<si><r><t xml:space="preserve">a </t></r><r><t>b</t></r></si>',
    ]
    path = build_package(tmp_path / "p.xlsx", [("S", data)], shared=shared, prefix="x")
    rows = read_cells(path).sheets[0].rows
    assert rows[0] == [CellError("#N/A"), True, "NaCl", "K&Br", None, 0.0025]
    assert rows[2] == ["a b", 4.0]  # cells without r follow on from the row's start


def test_merged_cells_listed(tmp_path: Path) -> None:
    path = tmp_path / "m.xlsx"
    wb = xlsxwriter.Workbook(str(path))
    ws = wb.add_worksheet()
    ws.merge_range("A1:C1", "Born-Haber inputs")
    ws.merge_range("B3:B6", 5)
    wb.close()
    ref = openpyxl.load_workbook(path).active
    got = read_cells(path).sheets[0]
    assert sorted(got.merged) == sorted(str(r) for r in ref.merged_cells.ranges)
    assert got.rows[0][0] == "Born-Haber inputs"


# ----------------------------------------------------------------------------- formulas


def test_formation_enthalpy_formula_with_cached_zero_from_xlsxwriter_is_evaluated(
    tmp_path: Path,
) -> None:
    # Regression: xlsxwriter writes <v>0</v> and fullCalcOnLoad="1" for every formula.
    # ΔfH°(NaCl, s) = -98.26 kcal/mol (NIST-JANAF -411.12 kJ/mol / 4.184; from memory).
    path = tmp_path / "x.xlsx"
    wb = xlsxwriter.Workbook(str(path))
    ws = wb.add_worksheet("Data")
    ws.write_row(0, 0, ["Compound", "dHf kcal/mol", "dHf kJ/mol"])
    ws.write_row(1, 0, ["NaCl", -98.26])
    ws.write_formula(1, 2, "=B2*4.184")
    wb.close()
    with zipfile.ZipFile(path) as zf:  # the premise: the cached value really is 0
        assert "<v>0</v>" in zf.read("xl/worksheets/sheet1.xml").decode()
    got = read_cells(path)
    assert not got.cache_trusted
    assert "fullCalcOnLoad" in got.cache_reason
    cell = got.sheets[0].formulas[(1, 2)]
    assert cell.formula == "=B2*4.184"
    assert cell.cached == 0.0
    assert cell.evaluated
    assert cell.value == pytest.approx(-98.26 * 4.184)
    assert got.sheets[0].rows[1][2] == pytest.approx(-411.12, abs=0.01)


def test_openpyxl_formulas_without_cache_are_evaluated(tmp_path: Path) -> None:
    path = tmp_path / "o.xlsx"
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Main"
    ws.append(["x", "a", "b", "c", "mean", "sum"])
    ws.append(["r", 1.5, 2.5, 4.0, "=(B2+C2)/2", "=SUM(B2:D2)"])
    ws.append(["r", -3.0, 0.0, 9.0, "=(B3+C3)/2", "=SUM(B3:D3)"])
    wb.save(path)
    got = read_cells(path)
    rows = got.sheets[0].rows
    assert rows[1][4] == (1.5 + 2.5) / 2
    assert rows[1][5] == 1.5 + 2.5 + 4.0
    assert rows[2][4] == (-3.0 + 0.0) / 2
    assert rows[2][5] == -3.0 + 0.0 + 9.0
    assert got.sheets[0].formulas[(2, 5)].cached is None


def _shared_formula_sheet() -> str:
    # Excel's layout for a filled-down formula: the master carries the text and ref range,
    # dependents only t="shared" si="0" (ECMA-376 Part 1, 18.3.1.40).
    cells = ['<row r="1"><c r="A1"><v>2</v></c><c r="B1"><v>10</v></c></row>']
    for r in range(2, 7):
        cells.append(f'<row r="{r}"><c r="A{r}"><v>{r * 1.5}</v></c><c r="B{r}"><v>{r}</v></c>')
        if r == 2:
            cells.append('<c r="C2"><f t="shared" ref="C2:C6" si="0">A2*$B$1+B1</f><v>99</v></c>')
        else:
            cells.append(f'<c r="C{r}"><f t="shared" si="0"/><v>99</v></c>')
        cells.append("</row>")
    return "".join(cells)


def test_shared_formulas_expand_like_openpyxl_translator(tmp_path: Path) -> None:
    path = build_package(
        tmp_path / "sh.xlsx", [("S", _shared_formula_sheet())], app="SomeWriter 1.0"
    )
    got = read_cells(path)
    assert not got.cache_trusted
    sheet = got.sheets[0]
    for r in range(2, 7):
        expected = Translator("=A2*$B$1+B1", origin="C2").translate_formula(f"C{r}")
        cell = sheet.formulas[(r - 1, 2)]
        assert cell.formula == expected
        b_prev = 10.0 if r == 2 else float(r - 1)
        assert cell.value == pytest.approx(r * 1.5 * 10.0 + b_prev)
        assert cell.cached == 99.0


def test_trusted_cache_is_used_and_verify_keeps_both(tmp_path: Path) -> None:
    sheet = '<row r="1"><c r="A1"><v>3</v></c><c r="B1"><f>A1*2</f><v>7</v></c></row>'
    path = build_package(tmp_path / "t.xlsx", [("S", sheet)], app="Microsoft Excel")
    got = read_cells(path)
    assert got.cache_trusted
    cell = got.sheets[0].formulas[(0, 1)]
    assert (cell.value, cell.evaluated) == (7.0, False)  # a stale cache, but trusted
    checked = read_cells(path, verify=True).sheets[0].formulas[(0, 1)]
    assert (checked.cached, checked.value, checked.evaluated) == (7.0, 6.0, True)


def test_empty_cached_value_is_evaluated_even_when_trusted(tmp_path: Path) -> None:
    sheet = '<row r="1"><c r="A1"><v>3</v></c><c r="B1"><f>A1*2</f><v></v></c></row>'
    path = build_package(tmp_path / "t.xlsx", [("S", sheet)], app="LibreOffice/7.6")
    got = read_cells(path)
    assert got.cache_trusted
    assert got.sheets[0].rows[0][1] == 6.0


def test_no_evaluation_leaves_untrusted_formulas_blank(tmp_path: Path) -> None:
    sheet = '<row r="1"><c r="A1"><v>3</v></c><c r="B1"><f>A1*2</f><v>0</v></c></row>'
    path = build_package(
        tmp_path / "t.xlsx", [("S", sheet)], calc_pr='<calcPr fullCalcOnLoad="1"/>'
    )
    got = read_cells(path, evaluate=False)
    assert got.sheets[0].rows[0][1] is None
    assert got.sheets[0].formulas[(0, 1)].cached == 0.0


def test_defined_names_read(tmp_path: Path) -> None:
    sheet = '<row r="1"><c r="A1"><v>4.184</v></c><c r="B1"><f>factor*2</f></c></row>'
    names = (
        '<definedNames><definedName name="factor">S!$A$1</definedName>'
        '<definedName name="local" localSheetId="0">S!$B$1</definedName></definedNames>'
    )
    path = build_package(tmp_path / "n.xlsx", [("S", sheet)], defined=names)
    got = read_cells(path)
    assert got.defined_names == {"factor": "S!$A$1", "S!local": "S!$B$1"}
    assert got.sheets[0].rows[0][1] == 4.184 * 2


# ----------------------------------------------------------------------------- csv, ods


def test_csv_semicolon_cp1252(tmp_path: Path) -> None:
    path = tmp_path / "Lab data.csv"
    # b"\xb0" (degree sign in cp1252) is not valid UTF-8, so the cp1252 fallback is taken.
    path.write_bytes("Verbindung;Enthalpie bei 25 °C\nNaCl;-411,12\nKCl;\n".encode("cp1252"))
    got = read_cells(path)
    assert got.format == "csv"
    assert got.sheets[0].name == "Lab data"
    assert got.sheets[0].rows == [
        ["Verbindung", "Enthalpie bei 25 °C"],
        ["NaCl", "-411,12"],
        ["KCl"],
    ]


def test_csv_utf8_bom_tab(tmp_path: Path) -> None:
    path = tmp_path / "t.csv"
    path.write_bytes("\ufeffFormel\tΔfH / kJ mol−1\nLiF\t-616.0\n".encode())
    got = read_cells(path)
    assert got.sheets[0].rows == [["Formel", "ΔfH / kJ mol−1"], ["LiF", "-616.0"]]


def test_ods_values_via_calamine(tmp_path: Path) -> None:
    from odf.opendocument import OpenDocumentSpreadsheet
    from odf.table import Table, TableCell, TableRow
    from odf.text import P

    doc = OpenDocumentSpreadsheet()
    table = Table(name="Sheet A")
    for row in (["Compound", "dHf"], ["NaF", -576.6]):
        tr = TableRow()
        for v in row:
            if isinstance(v, float):
                tc = TableCell(valuetype="float", value=v)
            else:
                tc = TableCell(valuetype="string")
            tc.addElement(P(text=str(v)))
            tr.addElement(tc)
        table.addElement(tr)
    doc.spreadsheet.addElement(table)
    path = tmp_path / "v.ods"
    doc.save(str(path))
    got = read_cells(path)
    assert got.format == "ods"
    assert got.sheets[0].name == "Sheet A"
    assert got.sheets[0].rows == [["Compound", "dHf"], ["NaF", -576.6]]
    assert "cached values only" in got.cache_reason


# ----------------------------------------------------------------------------- bad files


def _raises(path: Path, *words: str, **kw: object) -> ReadError:
    with pytest.raises(ReadError) as info:
        read_cells(path, **kw)  # type: ignore[arg-type]
    text = str(info.value).lower()
    for w in words:
        assert w.lower() in text, text
    assert str(path.name) in str(info.value)
    return info.value


def test_missing_file(tmp_path: Path) -> None:
    _raises(tmp_path / "nope.xlsx", "not found")


def test_unsupported_extension(tmp_path: Path) -> None:
    p = tmp_path / "a.numbers"
    p.write_bytes(b"x")
    _raises(p, "unsupported", ".numbers")


def test_not_a_zip(tmp_path: Path) -> None:
    p = tmp_path / "a.xlsx"
    p.write_text("Compound,dHf\n")
    _raises(p, "not an xlsx", "zip")


def test_truncated_zip(tmp_path: Path) -> None:
    full = tmp_path / "full.xlsx"
    wb = xlsxwriter.Workbook(str(full))
    wb.add_worksheet().write_column(0, 0, list(range(5000)))
    wb.close()
    p = tmp_path / "cut.xlsx"
    p.write_bytes(full.read_bytes()[: full.stat().st_size // 2])
    _raises(p, "truncated")


def test_encrypted_ole(tmp_path: Path) -> None:
    # An encrypted OOXML file is an OLE compound file (magic D0 CF 11 E0 A1 B1 1A E1,
    # [MS-CFB] 2.2) whose directory holds an "EncryptionInfo" stream ([MS-OFFCRYPTO] 2.3.4).
    p = tmp_path / "locked.xlsx"
    header = b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1" + b"\0" * 504
    entry = "EncryptionInfo".encode("utf-16-le").ljust(128, b"\0")
    p.write_bytes(header + b"\0" * 1024 + entry + b"\0" * 512)
    _raises(p, "encrypted", "unprotected copy")


def test_strict_ooxml_refused(tmp_path: Path) -> None:
    p = build_package(tmp_path / "s.xlsx", [("S", "")], strict=True)
    _raises(p, "strict", "not supported")


def test_empty_workbook(tmp_path: Path) -> None:
    p = build_package(tmp_path / "e.xlsx", [])
    _raises(p, "no worksheets")


def test_zip_without_workbook(tmp_path: Path) -> None:
    p = tmp_path / "z.xlsx"
    with zipfile.ZipFile(p, "w") as zf:
        zf.writestr("hello.txt", "hi")
    _raises(p, "not an xlsx workbook")


def test_zip_bomb_ratio_refused(tmp_path: Path) -> None:
    p = build_package(tmp_path / "b.xlsx", [("S", "")])
    with zipfile.ZipFile(p, "a", zipfile.ZIP_DEFLATED) as zf:
        zf.writestr("xl/media/pad.bin", b"\0" * (20 * 1024 * 1024))  # deflates ~1000:1
    _raises(p, "zip bomb", "--max-unzipped-size")


def test_total_size_and_entry_limits(tmp_path: Path) -> None:
    p = build_package(tmp_path / "b.xlsx", [("S", '<row r="1"><c r="A1"><v>1</v></c></row>')])
    _raises(p, "unpacks to", "--max-unzipped-size", limits=Limits(max_total_uncompressed=500))
    _raises(p, "too many zip entries", limits=Limits(max_entries=3))
    assert read_cells(p).sheets[0].rows == [[1.0]]


def test_dtd_refused(tmp_path: Path) -> None:
    p = build_package(tmp_path / "d.xlsx", [("S", "")])
    buf = io.BytesIO()
    with zipfile.ZipFile(p) as src, zipfile.ZipFile(buf, "w") as dst:
        for info in src.infolist():
            data = src.read(info)
            if info.filename == "xl/workbook.xml":
                data = data.replace(
                    b'<?xml version="1.0"?>',
                    b'<?xml version="1.0"?><!DOCTYPE lol [<!ENTITY lol "lol">]>',
                )
            dst.writestr(info, data)
    p.write_bytes(buf.getvalue())
    _raises(p, "document type declaration", "unsafe")


def test_counting_reader_stops_at_allowed_size() -> None:
    reader = CountingReader(io.BytesIO(b"x" * 1000), "part.xml", 999, "f.xlsx")
    with pytest.raises(ReadError, match="inflates to more than"):
        reader.read()
    ok = CountingReader(io.BytesIO(b"x" * 1000), "part.xml", 1000, "f.xlsx")
    assert len(ok.read()) == 1000


def test_xml_head_check_allows_comments_and_declaration() -> None:
    check_xml_head(b'<?xml version="1.0"?><!-- c --><worksheet/>', "p")
    with pytest.raises(ReadError):
        check_xml_head(b'<?xml version="1.0"?>\n<!DOCTYPE x SYSTEM "http://e/x">', "p")


def test_large_sheet_matches_calamine(tmp_path: Path) -> None:
    # Several 4 MiB read chunks, so rows straddle chunk boundaries.
    path = tmp_path / "big.xlsx"
    wb = xlsxwriter.Workbook(str(path), {"constant_memory": True})
    ws = wb.add_worksheet()
    for r in range(60_000):
        ws.write_string(r, 0, f"row {r} <&>")
        for c in range(1, 6):
            ws.write_number(r, c, math.sin(r * c) * 1000)
    wb.close()
    assert trimmed(read_cells(path).sheets[0].rows) == calamine_grid(path)


def test_repeated_inline_strings_read_once_and_escapes_decoded(tmp_path: Path) -> None:
    # ECMA-376 Part 1, 18.3.1.4 (c t="inlineStr"), 22.9.2.19 (ST_Xstring: _xHHHH_ escapes)
    rows_xml = "".join(
        f'<row r="{r}"><c r="A{r}" t="inlineStr"><is><t>K&amp;Br</t></is></c>'
        f'<c r="B{r}" t="inlineStr"><is><t>a_x0009_b</t></is></c>'
        f'<c r="C{r}" t="inlineStr"><is><t>row {r}</t></is></c></row>'
        for r in range(1, 6)
    )
    path = build_package(tmp_path / "i.xlsx", [("S", rows_xml)])
    rows = read_cells(path).sheets[0].rows
    assert [r[:2] for r in rows] == [["K&Br", "a\tb"]] * 5
    assert [r[2] for r in rows] == [f"row {r}" for r in range(1, 6)]
    assert rows[0][0] is rows[4][0]  # one text for the column's repeats


def test_rows_with_gaps_out_of_order_and_styled_blanks(tmp_path: Path) -> None:
    # ECMA-376 Part 1, 18.3.1.4: a cell's place is its r reference; a <c> without <v> is
    # blank (a format only). Cells out of order are legal XML the reader must still place.
    data = (
        '<row r="1"><c r="A1"><v>1</v></c><c r="C1"><v>3</v></c><c r="F1"><v>6</v></c></row>'
        '<row r="2"><c r="B2" s="1"/><c r="D2"><v>4</v></c><c r="E2" s="2"/></row>'
        '<row r="3"><c r="C3"><v>3</v></c><c r="A3"><v>1</v></c></row>'
    )
    path = build_package(tmp_path / "g.xlsx", [("S", data)])
    rows = read_cells(path).sheets[0].rows
    assert rows[0] == [1.0, None, 3.0, None, None, 6.0]
    assert rows[1] == [None, None, None, 4.0]  # trailing styled blank left out
    assert rows[2] == [1.0, None, 3.0]
