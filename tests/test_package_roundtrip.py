"""Round trip of the package writer on golden workbooks: only the additions differ.

Oracles outside the project: the zip format (Python's zipfile: entry bytes, CRC and
compression method), the worksheet XML as ECMA-376 Part 1 defines it (cells keyed by
their A1 ``r``), and two independent readers of the output: openpyxl (formulas, notes,
fills, formats) and python-calamine (the cached values a viewer shows); LibreOffice for
a shared formula group whose master was replaced by a value. The expected
values are computed in the test from the golden data (tests/golden/make_golden.py).
"""

from __future__ import annotations

import hashlib
import math
import re
import warnings
import zipfile
from pathlib import Path

import lo
import openpyxl
import openpyxl.worksheet.formula
import pytest
from golden.make_golden import (
    FLAGS_SHEET,
    IONS,
    PREFIXED_ROWS,
    REF_OFFSET,
    REFS_SHEET,
    SALTS,
    SALTS_FIRST_ROW,
    SALTS_HEADER_ROW,
    make_plain,
    make_rich,
    rich_annotation,
)
from lxml import etree
from python_calamine import CalamineWorkbook

from sheetcycle.errors import ReadError, WriteError
from sheetcycle.io.evaluate import CellError
from sheetcycle.io.package import (
    FILLS,
    AddedCell,
    AddedColumn,
    CellNote,
    CellValue,
    NewSheet,
    SheetAddition,
    write_annotated,
)

MAIN = "http://schemas.openxmlformats.org/spreadsheetml/2006/main"
PKG_RELS = "http://schemas.openxmlformats.org/package/2006/relationships"
SHEET_PARTS = {
    "Salts": "xl/worksheets/sheet1.xml",
    "Ions": "xl/worksheets/sheet2.xml",
    "Prefixed": "xl/worksheets/sheet90.xml",
}
# Parts the annotation must change, and nothing else (besides new parts and calcChain).
CHANGED = {
    "[Content_Types].xml",
    "xl/workbook.xml",
    "xl/_rels/workbook.xml.rels",
    "xl/styles.xml",
    *SHEET_PARTS.values(),
    "xl/comments1.xml",
    "xl/drawings/vmlDrawing1.vml",  # Salts' existing notes parts
    "xl/worksheets/_rels/sheet2.xml.rels",  # Ions (has a table relationship already)
}
DROPPED = {"xl/calcChain.xml"}


def _sha(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def _load(path: Path, **kw: object) -> tuple[openpyxl.Workbook, list[str]]:
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        wb = openpyxl.load_workbook(path, **kw)
    return wb, sorted(str(w.message) for w in caught)


@pytest.fixture(scope="module")
def rich(tmp_path_factory: pytest.TempPathFactory) -> tuple[Path, Path]:
    folder = tmp_path_factory.mktemp("rich")
    src = make_rich(folder / "golden.xlsm")
    before = _sha(src)
    additions, notes, new_sheets = rich_annotation()
    dst = folder / "annotated.xlsm"
    write_annotated(src, dst, additions=additions, notes=notes, new_sheets=new_sheets)
    assert _sha(src) == before, "the input file was modified"
    return src, dst


# --- the package ------------------------------------------------------------------------


def test_unchanged_entries_are_byte_identical(rich: tuple[Path, Path]) -> None:
    src, dst = rich
    with zipfile.ZipFile(src) as zi, zipfile.ZipFile(dst) as zo:
        assert zo.testzip() is None
        out = {i.filename: i for i in zo.infolist()}
        changed = set()
        for info in zi.infolist():
            if info.filename in DROPPED:
                assert info.filename not in out
                continue
            assert info.filename in out, f"{info.filename} lost"
            o = out[info.filename]
            assert o.compress_type == info.compress_type, info.filename
            if zi.read(info) != zo.read(o):
                changed.add(info.filename)
            else:
                assert o.CRC == info.CRC
        assert changed == CHANGED
        new = set(out) - {i.filename for i in zi.infolist()}
        # two new sheets, comments + VML for Ions and Prefixed, and Prefixed's rels
        kinds = sorted(re.sub(r"\d+", "N", n) for n in new)
        assert kinds == sorted(
            ["xl/worksheets/sheetN.xml"] * 2
            + ["xl/commentsN.xml"] * 2
            + ["xl/drawings/vmlDrawingN.vml"] * 2
            + ["xl/worksheets/_rels/sheetN.xml.rels"]
        )
        # the stored (not deflated) image stays stored
        assert out["xl/media/image1.png"].compress_type == zipfile.ZIP_STORED


def test_relationships_and_content_types_are_consistent(rich: tuple[Path, Path]) -> None:
    _, dst = rich
    with zipfile.ZipFile(dst) as z:
        names = set(z.namelist())
        types = etree.fromstring(z.read("[Content_Types].xml"))
        ns = "{http://schemas.openxmlformats.org/package/2006/content-types}"
        overrides = {e.get("PartName").lstrip("/") for e in types.iter(ns + "Override")}
        defaults = {e.get("Extension").lower() for e in types.iter(ns + "Default")}
        assert overrides <= names, overrides - names
        for n in names:
            assert n in overrides or n.rsplit(".", 1)[-1].lower() in defaults, n
        assert "xl/calcChain.xml" not in overrides
        for rels in (n for n in names if n.endswith(".rels")):
            base = rels.replace("_rels/", "").removesuffix(".rels")
            ids = []
            for el in etree.fromstring(z.read(rels)).iter(f"{{{PKG_RELS}}}Relationship"):
                ids.append(el.get("Id"))
                assert not el.get("Type").endswith("/calcChain")
                if el.get("TargetMode") == "External":
                    continue
                target = el.get("Target")
                folder = base.rsplit("/", 1)[0] if "/" in base else ""
                path = (
                    target.lstrip("/")
                    if target.startswith("/")
                    else str(Path(folder, target)).replace("\\", "/")
                )
                path = re.sub(r"[^/]+/\.\./", "", path)
                assert path in names, f"{rels}: {target} missing"
            assert len(ids) == len(set(ids)), rels


def test_workbook_sheets_appended_last(rich: tuple[Path, Path]) -> None:
    src, dst = rich

    def sheets(p: Path) -> list[tuple[str, int]]:
        with zipfile.ZipFile(p) as z:
            root = etree.fromstring(z.read("xl/workbook.xml"))
        return [(e.get("name"), int(e.get("sheetId"))) for e in root.iter(f"{{{MAIN}}}sheet")]

    before, after = sheets(src), sheets(dst)
    assert after[: len(before)] == before
    top = max(i for _, i in before)
    assert after[len(before) :] == [(REFS_SHEET, top + 1), (FLAGS_SHEET, top + 2)]
    with zipfile.ZipFile(src) as zi, zipfile.ZipFile(dst) as zo:
        a, b = zi.read("xl/workbook.xml"), zo.read("xl/workbook.xml")
    # everything but the new <sheet> elements is byte-identical (defined names included)
    assert re.sub(rb'<sheet name="sheetcycle[^>]*/>', b"", b) == a


def test_styles_only_appended(rich: tuple[Path, Path]) -> None:
    src, dst = rich
    with zipfile.ZipFile(src) as zi, zipfile.ZipFile(dst) as zo:
        a, b = zi.read("xl/styles.xml"), zo.read("xl/styles.xml")
    for section, child in (("fonts", "font"), ("fills", "fill"), ("cellXfs", "xf")):
        pat = (
            rb"<"
            + section.encode()
            + rb'\b[^>]*count="(\d+)"[^>]*>(.*?)</'
            + section.encode()
            + rb">"
        )
        ma, mb = re.search(pat, a, re.S), re.search(pat, b, re.S)
        assert mb.group(2).startswith(ma.group(2)), section  # old entries first, unchanged
        n = len(re.findall(rb"<" + child.encode() + rb"\b", mb.group(2)))
        assert int(mb.group(1)) == n > int(ma.group(1))
    fmt = re.findall(rb'<numFmt numFmtId="(\d+)" formatCode="0\.000"', b)
    assert fmt and int(fmt[0]) >= 164


# --- the sheets ---------------------------------------------------------------------------


def _raw_cells(xml: bytes) -> dict[str, bytes]:
    """Raw bytes of every <c> element by its position (A1), prefix-agnostic."""
    out: dict[str, bytes] = {}
    for rm in re.finditer(rb"<(\w+:)?row\b([^>]*?)(?:/>|>(.*?)</\1?row>)", xml, re.S):
        r = int(re.search(rb'\sr="(\d+)"', rm.group(2)).group(1))
        col = 0  # 1-based; a cell without r follows the previous one
        for cm in re.finditer(rb"<(\w+:)?c\b[^>]*?(?:/>|>.*?</\1?c>)", rm.group(3) or b"", re.S):
            ref = re.match(rb'<(?:\w+:)?c\b[^>]*?\sr="([A-Z]+)\d+"', cm.group())
            col = openpyxl.utils.column_index_from_string(ref.group(1).decode()) if ref else col + 1
            out[f"{openpyxl.utils.get_column_letter(col)}{r}"] = cm.group()
    return out


def _noted(sheet: str) -> set[str]:
    _, notes, _ = rich_annotation()
    return {n.cell for n in notes if n.sheet == sheet}


@pytest.mark.parametrize("sheet", sorted(SHEET_PARTS))
def test_original_cells_are_byte_identical(rich: tuple[Path, Path], sheet: str) -> None:
    src, dst = rich
    part = SHEET_PARTS[sheet]
    with zipfile.ZipFile(src) as zi, zipfile.ZipFile(dst) as zo:
        a, b = zi.read(part), zo.read(part)
    before, after = _raw_cells(a), _raw_cells(b)
    noted = _noted(sheet)
    for ref, raw in before.items():
        assert ref in after, f"{sheet}!{ref} lost"
        if ref in noted:
            strip = re.compile(rb'\ss="\d+"')
            assert strip.sub(b"", after[ref]) == strip.sub(b"", raw), ref
            assert after[ref] != raw, f"{sheet}!{ref}: format not changed for the note"
        else:
            assert after[ref] == raw, f"{sheet}!{ref} changed"

    # outside <sheetData> only <dimension>, <cols> and <legacyDrawing> may change
    def outside(x: bytes) -> bytes:
        x = re.sub(rb"<(\w+:)?sheetData>.*</\1?sheetData>", b"", x, flags=re.S)
        x = re.sub(rb"<(\w+:)?cols>.*?</\1?cols>", b"", x, flags=re.S)
        x = re.sub(rb"<(\w+:)?dimension [^>]*/>", b"", x)
        return x

    new_tail = outside(b)
    if b"legacyDrawing" not in a:
        new_tail = re.sub(rb"<(\w+:)?legacyDrawing [^>]*/>", b"", new_tail)
    assert new_tail == outside(a)


def test_added_cells_are_what_was_asked(rich: tuple[Path, Path]) -> None:
    _, dst = rich
    wb, _ = _load(dst, keep_vba=True)
    cached = CalamineWorkbook.from_path(str(dst))
    ws = wb["Salts"]
    values = cached.get_sheet_by_name("Salts").to_python()
    headers = ["lattice est (kJ/mol)", "dHf (kcal/mol)", "check", "label"]
    assert [ws.cell(SALTS_HEADER_ROW, 8 + k).value for k in range(4)] == headers
    # the headers copy the format of the existing header cell B3
    for k in range(4):
        assert ws.cell(SALTS_HEADER_ROW, 8 + k).style_id == ws["B3"].style_id
    assert ws.cell(SALTS_HEADER_ROW, 7).value is None  # one blank column before them
    for i, (f, a, b, c, _) in enumerate(SALTS):
        r = SALTS_FIRST_ROW + i
        row = values[r - 1]
        assert ws.cell(r, 8).value == f"=B{r}-C{r}-D{r}+'{REFS_SHEET}'!$B$2"
        assert row[7] == pytest.approx(a - b - c + REF_OFFSET, rel=1e-15)
        assert ws.cell(r, 9).value == f"=B{r}/4.184"
        assert row[8] == pytest.approx(a / 4.184, rel=1e-15)
        assert ws.cell(r, 9).number_format == "0.000"
        assert ws.cell(r, 10).data_type == "s"  # text stays text, even '=not a formula'
        assert ws.cell(r, 10).value == ("=not a formula" if i == 0 else "ok")
        assert ws.cell(r, 11).value == f'=A{r}&"-x"'
        assert row[10] == f"{f}-x"
    assert ws.cell(SALTS_FIRST_ROW, 10).fill.fgColor.rgb == "FF" + FILLS["warning"][1:]
    ions = cached.get_sheet_by_name("Ions").to_python()
    for i, (_, v) in enumerate(IONS):
        assert wb["Ions"].cell(i + 2, 4).value == f"=B{i + 2}*2"
        assert ions[i + 1][3] == v * 2
    pre = cached.get_sheet_by_name("Prefixed").to_python()
    for r in range(2, PREFIXED_ROWS + 2):
        assert wb["Prefixed"].cell(r, 5).value == f"=B{r}+C{r}"
        assert pre[r - 1][4] == (0.0 if r == 4 else r * 4.5)
    # Prefixed!D:XFD was one <col> range: it is split, the widths around it kept
    assert wb["Prefixed"].column_dimensions["A"].width == 11
    refs = wb[REFS_SHEET]
    assert refs["B2"].value == REF_OFFSET and refs["A1"].font.b
    flags = wb[FLAGS_SHEET]
    assert flags["B2"].hyperlink.location == "'Salts'!B5"
    assert flags["C9"].value == "=SUM(1,2)" and flags["C9"].data_type == "s"
    assert flags["C2"].fill.fgColor.rgb == "FF" + FILLS["warning"][1:]


def test_notes_and_fills(rich: tuple[Path, Path]) -> None:
    src, dst = rich
    old, _ = _load(src, keep_vba=True)
    new, _ = _load(dst, keep_vba=True)
    _, notes, _ = rich_annotation()
    for n in notes:
        cell_new = new[n.sheet][n.cell]
        assert cell_new.comment is not None, f"{n.sheet}!{n.cell} has no note"
        assert cell_new.comment.text.endswith(n.text)
        assert cell_new.fill.fill_type == "solid"
        assert cell_new.fill.fgColor.rgb == "FF" + FILLS[n.severity][1:]
        cell_old = old[n.sheet][n.cell]
        if cell_old.value is not None:  # the rest of its format stays
            assert cell_new.number_format == cell_old.number_format
            a, b = cell_old._style, cell_new._style  # indices into the same font/border lists
            assert (a.fontId, a.borderId, a.numFmtId, a.alignmentId, a.protectionId) == (
                b.fontId,
                b.borderId,
                b.numFmtId,
                b.alignmentId,
                b.protectionId,
            )
            assert repr(cell_new.font) == repr(cell_old.font)
    # the existing notes keep their text; the new text is appended after it
    b4 = new["Salts"][f"B{SALTS_FIRST_ROW}"].comment.text
    assert b4.startswith("checked twice (legacy note)\n")
    c4 = new["Salts"][f"C{SALTS_FIRST_ROW}"].comment.text
    assert c4.startswith("[Threaded comment]\nChecked against the bench log")
    # unnoted cells keep their format
    assert new["Salts"]["B6"]._style == old["Salts"]["B6"]._style


def test_openpyxl_reads_it_with_no_new_warnings(rich: tuple[Path, Path]) -> None:
    src, dst = rich
    _, w_in = _load(src, keep_vba=True)
    _, w_out = _load(dst, keep_vba=True)
    # the input itself warns about its sparklines (openpyxl cannot keep them); nothing else
    assert w_out == w_in == ["Sparkline Group extension is not supported and will be removed"]


def test_rows_cells_without_r_and_missing_rows(rich: tuple[Path, Path]) -> None:
    _, dst = rich
    with zipfile.ZipFile(dst) as z:
        xml = z.read(SHEET_PARTS["Prefixed"])
    assert b'<x:row r="4"><x:c r="E4"' in xml  # created in row order, with the sheet prefix
    order = [int(x) for x in re.findall(rb'<x:row r="(\d+)"', xml)]
    assert order == sorted(order)
    assert b'<x:dimension ref="A1:E7"/>' in xml
    assert b"<c " not in xml  # nothing without the prefix
    shared = re.findall(rb'<x:f t="shared"[^>]*>', xml)
    assert len(shared) == PREFIXED_ROWS - 1  # shared formula group intact
    with zipfile.ZipFile(dst) as z:
        salts = z.read(SHEET_PARTS["Salts"])
    assert re.search(rb'<row r="4" spans="1:11"', salts)


# --- refusals -------------------------------------------------------------------------------


def _one_col(n: int = 10, sheet: str = "Data", start: int = 9) -> SheetAddition:
    return SheetAddition(sheet, 1, 2, start, [AddedColumn("x", [AddedCell(1.0)] * n)])


def test_refuses_occupied_cell_and_leaves_nothing(tmp_path: Path) -> None:
    src = make_plain(tmp_path / "in.xlsx")
    before = _sha(src)
    with pytest.raises(WriteError) as err:
        write_annotated(src, tmp_path / "out.xlsx", additions=[_one_col(start=7)])
    assert err.value.sheet == "Data" and err.value.cell == "H1"
    assert "Data!H1" in str(err.value)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["in.xlsx"]
    assert _sha(src) == before


def test_refuses_merged_landing(tmp_path: Path) -> None:
    src = make_rich(tmp_path / "in.xlsm")
    add = SheetAddition("Salts", 1, 2, 2, [AddedColumn("x", [AddedCell(1.0)])])
    with pytest.raises(WriteError) as err:
        write_annotated(src, tmp_path / "out.xlsm", additions=[add])
    assert "merged" in str(err.value) and err.value.sheet == "Salts"
    assert not (tmp_path / "out.xlsm").exists()


def test_refuses_taken_sheet_name_and_unknown_sheet(tmp_path: Path) -> None:
    src = make_plain(tmp_path / "in.xlsx")
    with pytest.raises(WriteError, match="already exists"):
        write_annotated(src, tmp_path / "o.xlsx", new_sheets=[NewSheet("data", [])])
    with pytest.raises(WriteError, match="no worksheet"):
        write_annotated(src, tmp_path / "o.xlsx", notes=[CellNote("Nope", "A1", "t", "note")])
    assert not (tmp_path / "o.xlsx").exists()


def test_refuses_existing_output_without_force(tmp_path: Path) -> None:
    src = make_plain(tmp_path / "in.xlsx")
    dst = tmp_path / "out.xlsx"
    dst.write_bytes(b"keep me")
    with pytest.raises(WriteError, match="exists"):
        write_annotated(src, dst, additions=[_one_col()])
    assert dst.read_bytes() == b"keep me"
    write_annotated(src, dst, additions=[_one_col()], force=True)
    assert openpyxl.load_workbook(dst)["Data"]["J2"].value == 1.0


@pytest.mark.parametrize("suffix", [".xls", ".ods", ".csv"])
def test_refuses_other_file_types(tmp_path: Path, suffix: str) -> None:
    src = tmp_path / f"in{suffix}"
    src.write_bytes(b"a,b\n1,2\n")
    with pytest.raises(WriteError, match=r"\.xlsx/\.xlsm.*results workbook"):
        write_annotated(src, tmp_path / "out.xlsx")


def test_refuses_encrypted(tmp_path: Path) -> None:
    # An encrypted OOXML file is an OLE compound document ([MS-OFFCRYPTO] 2.3.4.1),
    # recognised by its signature D0 CF 11 E0 A1 B1 1A E1 ([MS-CFB] 2.2).
    src = tmp_path / "locked.xlsx"
    src.write_bytes(b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1" + bytes(504))
    with pytest.raises(WriteError, match="encrypted"):
        write_annotated(src, tmp_path / "out.xlsx")


def test_refuses_strict_ooxml(tmp_path: Path) -> None:
    # Strict OOXML (ISO/IEC 29500-1 Strict) uses the purl.oclc.org namespaces.
    src = tmp_path / "strict.xlsx"
    with zipfile.ZipFile(src, "w") as z:
        z.writestr(
            "[Content_Types].xml",
            '<Types xmlns="http://schemas.openxmlformats.org/package/2006/content-types"/>',
        )
        z.writestr(
            "_rels/.rels",
            '<Relationships xmlns="http://schemas.openxmlformats.org/'
            'package/2006/relationships"><Relationship Id="rId1" Type="http://purl.'
            'oclc.org/ooxml/officeDocument/relationships/officeDocument" '
            'Target="xl/workbook.xml"/></Relationships>',
        )
        z.writestr(
            "xl/workbook.xml",
            '<workbook xmlns="http://purl.oclc.org/ooxml/spreadsheetml/main"><sheets/></workbook>',
        )
    with pytest.raises(WriteError, match="Strict"):
        write_annotated(src, tmp_path / "out.xlsx")


def test_refuses_damaged_zip(tmp_path: Path) -> None:
    src = tmp_path / "bad.xlsx"
    src.write_bytes(b"PK\x03\x04 not really a zip")
    with pytest.raises(ReadError):
        write_annotated(src, tmp_path / "out.xlsx")


# --- smaller cases ------------------------------------------------------------------------


def test_blank_formatted_cell_is_replaced_and_cols_range_split(tmp_path: Path) -> None:
    import xlsxwriter

    src = tmp_path / "in.xlsx"
    wb = xlsxwriter.Workbook(str(src))
    ws = wb.add_worksheet("Data")
    fmt = wb.add_format({"bg_color": "#00FF00"})
    ws.set_column(0, 20, 9, fmt)
    ws.write_row(0, 0, ["a", "b"])
    ws.write_row(1, 0, [1, 2])
    ws.write_blank(1, 3, None, fmt)  # a formatted blank where the new column goes
    wb.close()
    add = SheetAddition("Data", 1, 2, 3, [AddedColumn("sum", [AddedCell(3.0, "A2+B2")], width=15)])
    write_annotated(src, tmp_path / "out.xlsx", additions=[add])
    out = openpyxl.load_workbook(tmp_path / "out.xlsx")["Data"]
    old = openpyxl.load_workbook(src)["Data"]
    assert out["D2"].value == "=A2+B2" and out["D1"].value == "sum"
    assert out.column_dimensions["D"].width == 15
    # the rest of the range keeps its width and format
    assert out.column_dimensions["A"].width == old.column_dimensions["A"].width
    assert out.column_dimensions["E"].width == old.column_dimensions["A"].width
    assert out.column_dimensions["E"].style == old.column_dimensions["A"].style
    cached = CalamineWorkbook.from_path(str(tmp_path / "out.xlsx")).get_sheet_by_name("Data")
    assert cached.to_python()[1][3] == 3.0


def test_large_numbers_and_special_text_round_trip(tmp_path: Path) -> None:
    src = make_plain(tmp_path / "in.xlsx", rows=3, cols=2)
    texts = ["a & b < c", "  padded  ", "_x0041_ literal", "tab\there"]
    col = AddedColumn("t", [AddedCell(t) for t in texts[:3]], number_format=None)
    num = AddedColumn("n", [AddedCell(v) for v in (1e-300, 123456789.123456789, -0.0)])
    write_annotated(
        src,
        tmp_path / "out.xlsx",
        additions=[SheetAddition("Data", 1, 2, 3, [col, num])],
        new_sheets=[NewSheet("T", [[AddedCell(texts[3])]])],
    )
    got = CalamineWorkbook.from_path(str(tmp_path / "out.xlsx"))
    rows = got.get_sheet_by_name("Data").to_python()
    assert [r[3] for r in rows[1:4]] == texts[:3]
    assert rows[1][4] == 1e-300 and rows[2][4] == 123456789.123456789
    assert math.copysign(1, rows[3][4]) in (1, -1)
    assert got.get_sheet_by_name("T").to_python()[0][0] == texts[3]


def test_chunk_boundaries_do_not_matter(
    rich: tuple[Path, Path], tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    """Streaming in 97-byte reads (rows and tags split everywhere) gives the same parts."""
    from sheetcycle.io import package_sheet

    src, dst = rich
    monkeypatch.setattr(package_sheet, "CHUNK", 97)
    additions, notes, new_sheets = rich_annotation()
    small = tmp_path / "small-chunks.xlsm"
    write_annotated(src, small, additions=additions, notes=notes, new_sheets=new_sheets)
    with zipfile.ZipFile(dst) as a, zipfile.ZipFile(small) as b:
        assert a.namelist() == b.namelist()
        for name in a.namelist():
            assert a.read(name) == b.read(name), name


# --- pictures on a new sheet ---------------------------------------------------------------


def _png(width_in: float, height_in: float, dpi: int) -> bytes:
    """A small PNG from matplotlib (it writes a pHYs chunk with the dpi it saved at)."""
    import io

    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    fig = Figure(figsize=(width_in, height_in))
    FigureCanvasAgg(fig)
    fig.add_subplot().plot([0, 1], [1, 0])
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=dpi)
    return buf.getvalue()


@pytest.fixture(scope="module")
def pictured(tmp_path_factory: pytest.TempPathFactory) -> tuple[Path, Path, list[bytes]]:
    folder = tmp_path_factory.mktemp("pictures")
    src = make_rich(folder / "golden.xlsm")  # it already holds a stored xl/media/image1.png
    additions, notes, new_sheets = rich_annotation()
    pngs = [_png(2.0, 1.0, 100), _png(3.0, 2.0, 72)]
    pics = NewSheet(
        "sheetcycle pictures",
        [[AddedCell("first")], *[[]] * 11, [AddedCell("second")]],
        images=[(1, 0, pngs[0]), (13, 2, pngs[1])],
    )
    dst = folder / "annotated.xlsm"
    write_annotated(src, dst, additions=additions, notes=notes, new_sheets=[*new_sheets, pics])
    return src, dst, pngs


def test_pictures_become_media_drawing_and_relationships(
    pictured: tuple[Path, Path, list[bytes]],
) -> None:
    src, dst, pngs = pictured
    xdr = "{http://schemas.openxmlformats.org/drawingml/2006/spreadsheetDrawing}"
    with zipfile.ZipFile(src) as zi, zipfile.ZipFile(dst) as zo:
        old = set(zi.namelist())
        new = sorted(set(zo.namelist()) - old)
        media = [n for n in new if n.startswith("xl/media/")]
        assert len(media) == 2 and all(n.endswith(".png") for n in media)
        assert sorted(zo.read(n) for n in media) == sorted(pngs)  # stored byte for byte
        # the workbook's own picture is untouched
        assert zo.read("xl/media/image1.png") == zi.read("xl/media/image1.png")
        types = zo.read("[Content_Types].xml")
        assert re.search(rb'Extension="png"[^>]*ContentType="image/png"', types, re.I)
        assert len(re.findall(rb'Extension="png"', types, re.I)) == 1  # not added twice
        drawings = [n for n in new if re.fullmatch(r"xl/drawings/drawing\d+\.xml", n)]
        assert len(drawings) == 1
        leaf = drawings[0].rsplit("/", 1)[1]
        sheet_rels = [n for n in new if "worksheets/_rels/" in n and leaf.encode() in zo.read(n)]
        assert len(sheet_rels) == 1
        sheet_part = sheet_rels[0].replace("_rels/", "").removesuffix(".rels")
        assert re.search(rb'<drawing r:id="rId\d+"/></worksheet>', zo.read(sheet_part))
        root = etree.fromstring(zo.read(drawings[0]))
        anchors = list(root.iter(xdr + "oneCellAnchor"))
        assert [
            (int(a.find(f"{xdr}from/{xdr}row").text), int(a.find(f"{xdr}from/{xdr}col").text))
            for a in anchors
        ] == [(1, 0), (13, 2)]
        # ECMA-376: 914400 EMU per inch; the size is the figure's size in inches, to the
        # rounding of pHYs, which stores whole pixels per metre (PNG spec §11.3.5.3)
        exts = [
            (int(a.find(xdr + "ext").get("cx")), int(a.find(xdr + "ext").get("cy")))
            for a in anchors
        ]
        want = [(2 * 914400, 914400), (3 * 914400, 2 * 914400)]
        for got, exp in zip(exts, want, strict=True):
            assert got == pytest.approx(exp, rel=2e-4)
        # the drawing's relationships point at the new media
        rels = etree.fromstring(zo.read(f"xl/drawings/_rels/{leaf}.rels"))
        targets = sorted(
            str(Path("xl/drawings", e.get("Target"))).replace("xl/drawings/../", "xl/")
            for e in rels.iter(f"{{{PKG_RELS}}}Relationship")
        )
        assert targets == sorted(media)


def test_pictures_keep_relationships_and_content_types_consistent(
    pictured: tuple[Path, Path, list[bytes]],
) -> None:
    src, dst, _ = pictured
    test_relationships_and_content_types_are_consistent((src, dst))


def test_pictures_read_back_by_openpyxl(pictured: tuple[Path, Path, list[bytes]]) -> None:
    """An independent reader (openpyxl with Pillow) finds both pictures at their cells."""
    _, dst, _ = pictured
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        wb = openpyxl.load_workbook(dst, keep_vba=True)
    ws = wb["sheetcycle pictures"]
    found = sorted((img.anchor._from.row, img.anchor._from.col) for img in ws._images)
    assert found == [(1, 0), (13, 2)]
    assert ws["A1"].value == "first" and ws["A13"].value == "second"


def test_not_a_png_is_refused_and_nothing_written(tmp_path: Path) -> None:
    src = make_plain(tmp_path / "in.xlsx", rows=3, cols=2)
    with pytest.raises(WriteError, match="not a PNG"):
        write_annotated(
            src,
            tmp_path / "out.xlsx",
            new_sheets=[NewSheet("P", [[AddedCell("x")]], images=[(0, 0, b"GIF89a....")])],
        )
    assert not (tmp_path / "out.xlsx").exists()


# --- new values of existing formula cells ---------------------------------------------------
#
# Oracles: ECMA-376 Part 1 §18.3.1.4 (c: t="str"/"b"/"e"/"inlineStr", f, v, is) and
# §18.3.1.40 (f: a shared group's master holds the text and ref, the others only si);
# openpyxl (reads formulas, expands shared ones) and python-calamine (cached values), and
# LibreOffice recalculating the shared group on load.

F_COL = 5  # Salts!F holds =B+C+D in every data row (golden)


def _updates() -> list[CellValue]:
    r = SALTS_FIRST_ROW
    return [
        CellValue("Salts", f"F{r}", 1.5),  # number: cached, formula kept
        CellValue("Salts", f"F{r + 1}", "a & b"),  # text: t="str"
        CellValue("Salts", f"F{r + 2}", True),  # logical: t="b"
        CellValue("Salts", f"F{r + 3}", CellError("#DIV/0!", "why")),  # error: t="e"
        CellValue("Salts", f"F{r + 4}", 2.25, replace_formula=True),  # value replaces it
        CellValue("Salts", f"F{r + 5}", " text <x> ", replace_formula=True),  # inline string
        CellValue("Prefixed", "C2", 99.0, replace_formula=True),  # master of a shared group
        CellValue("Prefixed", "C3", 9.0),  # a member that keeps its formula, newly cached
    ]


@pytest.fixture(scope="module")
def updated(tmp_path_factory: pytest.TempPathFactory) -> tuple[Path, Path]:
    folder = tmp_path_factory.mktemp("updated")
    src = make_rich(folder / "golden.xlsm")
    dst = folder / "updated.xlsm"
    note = CellNote("Salts", f"F{SALTS_FIRST_ROW + 4}", "held a formula", "note")
    write_annotated(src, dst, notes=[note], cell_values=_updates())
    return src, dst


def _part(path: Path, part: str) -> bytes:
    with zipfile.ZipFile(path) as z:
        return z.read(part)


def test_cell_values_leave_every_other_cell_byte_identical(updated: tuple[Path, Path]) -> None:
    src, dst = updated
    changed = {(u.sheet, u.cell) for u in _updates()} | {("Prefixed", "C3")}
    for sheet, part in SHEET_PARTS.items():
        before, after = _raw_cells(_part(src, part)), _raw_cells(_part(dst, part))
        assert set(before) == set(after), sheet
        for ref, raw in before.items():
            if (sheet, ref) in changed:
                assert after[ref] != raw, f"{sheet}!{ref} not changed"
            else:
                assert after[ref] == raw, f"{sheet}!{ref} changed"
    # Ions had nothing asked of it: its part is copied as it was
    assert _part(src, SHEET_PARTS["Ions"]) == _part(dst, SHEET_PARTS["Ions"])


def test_cached_values_keep_the_formula_element_exactly(updated: tuple[Path, Path]) -> None:
    src, dst = updated
    before = _raw_cells(_part(src, SHEET_PARTS["Salts"]))
    after = _raw_cells(_part(dst, SHEET_PARTS["Salts"]))
    r = SALTS_FIRST_ROW

    def f_el(raw: bytes) -> bytes:
        return re.search(rb"<f>.*?</f>", raw).group()

    expect = {
        r: (None, b"<v>1.5</v>"),
        r + 1: (b"str", b"<v>a &amp; b</v>"),
        r + 2: (b"b", b"<v>1</v>"),
        r + 3: (b"e", b"<v>#DIV/0!</v>"),
    }
    for row, (t, v) in expect.items():
        raw = after[f"F{row}"]
        assert f_el(raw) == f_el(before[f"F{row}"]) == f"<f>B{row}+C{row}+D{row}</f>".encode()
        got_t = re.search(rb'\st="(\w+)"', raw)
        assert (got_t.group(1) if got_t else None) == t, raw
        assert v in raw and raw.count(b"<v>") == 1, raw
        s_old = re.search(rb'\ss="\d+"', before[f"F{row}"]).group()
        assert s_old in raw  # the format stays
    wb, _ = _load(dst, keep_vba=True)
    ws = wb["Salts"]
    for row in expect:
        assert ws.cell(row, F_COL + 1).value == f"=B{row}+C{row}+D{row}"
    cached = CalamineWorkbook.from_path(str(dst)).get_sheet_by_name("Salts").to_python()
    assert cached[r - 1][F_COL] == 1.5
    assert cached[r][F_COL] == "a & b"
    assert cached[r + 1][F_COL] is True


def test_replaced_formulas_become_values_with_their_format(updated: tuple[Path, Path]) -> None:
    src, dst = updated
    r = SALTS_FIRST_ROW + 4
    before = _raw_cells(_part(src, SHEET_PARTS["Salts"]))
    after = _raw_cells(_part(dst, SHEET_PARTS["Salts"]))
    assert b"<f" not in after[f"F{r}"] and b"<v>2.25</v>" in after[f"F{r}"]
    assert b'<is><t xml:space="preserve"> text &lt;x&gt; </t></is>' in after[f"F{r + 1}"]
    assert b't="inlineStr"' in after[f"F{r + 1}"]
    assert re.search(rb'\ss="\d+"', after[f"F{r + 1}"]).group() in before[f"F{r + 1}"]
    old, _ = _load(src, keep_vba=True)
    new, _ = _load(dst, keep_vba=True)
    assert new["Salts"].cell(r, F_COL + 1).value == 2.25
    assert new["Salts"].cell(r + 1, F_COL + 1).value == " text <x> "
    assert new["Salts"].cell(r + 1, F_COL + 1).number_format == (
        old["Salts"].cell(r + 1, F_COL + 1).number_format
    )
    # the noted cell: a value now, the note's fill on top of its own format
    cell = new["Salts"].cell(r, F_COL + 1)
    assert cell.comment is not None and cell.comment.text.endswith("held a formula")
    assert cell.fill.fgColor.rgb == "FF" + FILLS["note"][1:]
    assert cell.number_format == old["Salts"].cell(r, F_COL + 1).number_format
    # formula cells became values: the calculation chain (which lists them) is dropped
    with zipfile.ZipFile(dst) as z:
        assert "xl/calcChain.xml" not in z.namelist()
        assert b"calcChain" not in z.read("[Content_Types].xml")


def test_shared_group_gets_a_new_master(updated: tuple[Path, Path], tmp_path: Path) -> None:
    _, dst = updated
    xml = _part(dst, SHEET_PARTS["Prefixed"])
    cells = _raw_cells(xml)
    assert cells["C2"] == b'<x:c r="C2"><x:v>99.0</x:v></x:c>'
    # the next cell of the group holds the group's text, shifted to its row, and its range
    assert b'<x:f t="shared" si="0" ref="C3:C7">B3*2</x:f><x:v>9.0</x:v>' in cells["C3"]
    for ref in ("C5", "C6", "C7"):
        assert b'<x:f t="shared" si="0"/>' in cells[ref]
    wb, _ = _load(dst, keep_vba=True)
    ws = wb["Prefixed"]
    assert ws["C2"].value == 99.0
    # openpyxl expands the shared formula from the new master (row 5's cells carry no r
    # attribute, which openpyxl does not follow for shared formulas: LibreOffice checks it)
    for r in (3, 6, 7):
        assert ws[f"C{r}"].value == f"=B{r}*2"
    # LibreOffice recalculates the group on load: C = 2·B (golden: B = 1.5·row)
    lo.soffice()
    lo.convert_to_csv([dst], tmp_path)
    rows = lo.sheets_csv(tmp_path, dst.stem, ["Prefixed"])["Prefixed"]
    by_row = {int(row[0][1:]): row for row in rows[1:] if row and row[0].startswith("L")}
    assert float(by_row[2][2]) == 99.0
    for r in (3, 5, 6, 7):
        assert float(by_row[r][2]) == pytest.approx(2 * 1.5 * r, rel=1e-12)


def test_cached_values_only_keep_the_calculation_chain(tmp_path: Path) -> None:
    src = make_rich(tmp_path / "golden.xlsm")
    dst = tmp_path / "cached.xlsm"
    write_annotated(src, dst, cell_values=[CellValue("Salts", f"F{SALTS_FIRST_ROW}", 3.0)])
    with zipfile.ZipFile(src) as zi, zipfile.ZipFile(dst) as zo:
        assert zo.read("xl/calcChain.xml") == zi.read("xl/calcChain.xml")
        changed = {n for n in zi.namelist() if zi.read(n) != zo.read(n)}
    assert changed == {SHEET_PARTS["Salts"]}


@pytest.mark.parametrize(
    ("update", "why"),
    [
        (CellValue("Salts", f"B{SALTS_FIRST_ROW}", 1.0), "holds no formula"),
        (CellValue("Salts", "Q4", 1.0, replace_formula=True), "no such cell"),
        (CellValue("Salts", "A900", 1.0), "does not exist"),
        (CellValue("Salts", "F4", object()), "must be a number"),
        (CellValue("Nowhere", "A1", 1.0), "no worksheet"),
        (CellValue("Salts", "F", 1.0), "A1 cell reference"),
    ],
)
def test_refused_cell_values_write_nothing(tmp_path: Path, update: CellValue, why: str) -> None:
    src = make_rich(tmp_path / "golden.xlsm")
    dst = tmp_path / "out.xlsm"
    with pytest.raises(WriteError, match=why):
        write_annotated(src, dst, cell_values=[update])
    assert not dst.exists()
    assert list(tmp_path.iterdir()) == [src]


def test_refuses_two_values_for_one_cell_and_array_masters(tmp_path: Path) -> None:
    src = make_rich(tmp_path / "golden.xlsm")
    twice = [CellValue("Salts", "F4", 1.0), CellValue("Salts", "$F$4", 2.0)]
    with pytest.raises(WriteError, match="two new values"):
        write_annotated(src, tmp_path / "a.xlsm", cell_values=twice)
    # a multi-cell array formula (openpyxl writes <f t="array" ref="A2:A3">)
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Data"
    ws["B2"], ws["B3"] = 1, 2
    ws["A2"] = openpyxl.worksheet.formula.ArrayFormula("A2:A3", "=B2:B3*2")
    arr = tmp_path / "array.xlsx"
    wb.save(arr)
    with pytest.raises(WriteError, match="array formula"):
        write_annotated(arr, tmp_path / "b.xlsx", cell_values=[CellValue("Data", "A2", 2.0, True)])
    write_annotated(arr, tmp_path / "c.xlsx", cell_values=[CellValue("Data", "A2", 2.0)])
    got = openpyxl.load_workbook(tmp_path / "c.xlsx")["Data"]["A2"].value
    assert got.ref == "A2:A3" and got.text == "=B2:B3*2"
    assert not (tmp_path / "a.xlsm").exists() and not (tmp_path / "b.xlsx").exists()
