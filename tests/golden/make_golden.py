"""Golden input workbooks for the package writer, made by code.

All numbers are invented for a made-up lab ("Harbour Street bench
data"); they are payloads for the writer, not measurements.

``make_rich(path)`` writes an .xlsm that carries most of what a user's workbook can hold:
a VBA project part, merged title cells, data validation, conditional formats, defined names
(global and sheet-scoped), a legacy note, a threaded comment, an image, a chart, a text
box, sparklines (x14 extension), an Excel table, a pivot table, an external link, a
calculation chain, and a hand-written sheet that uses an ``x:`` namespace prefix, shared
formulas, rows without ``spans`` and cells without ``r``. xlsxwriter
(https://xlsxwriter.readthedocs.io) writes what it can; the rest is written into the zip
by hand following ECMA-376 Part 1 (pivot table, external link, calc chain) and the
published [MS-XLSX] threaded-comment parts.

Run ``python tests/golden/make_golden.py OUTDIR`` to write the files for a look in a
spreadsheet application.
"""

from __future__ import annotations

import io
import re
import struct
import sys
import zipfile
import zlib
from datetime import datetime
from pathlib import Path

import xlsxwriter

# --- the invented data -----------------------------------------------------------------

#: (formula, formation enthalpy kJ/mol, sublimation kJ/mol, IE1 kJ/mol, ratio) per row.
SALTS: list[tuple[str, float, float, float, float]] = [
    (f"Q{i}X", -300.0 - 7.25 * i, 80.0 + 1.5 * i, 400.0 + 3.125 * i, 0.5 + i / 64)
    for i in range(20)
]
SALTS_HEADER_ROW = 3  # 1-based; row 1 is a merged title, row 2 blank
SALTS_FIRST_ROW = 4
SALTS_LAST_COL = 5  # 0-based F: a formula column (sum of B:D)
IONS = [("Aa+", 101.5), ("Bb2+", 202.25), ("Cc-", -50.75), ("Dd2-", -75.0), ("Ee+", 33.5)]
PREFIXED_ROWS = 6  # data rows 2..7 in the hand-written sheet
EXTERNAL_VALUE = 42.0

VBA_BLOB = b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1" + bytes(range(256)) * 4  # opaque payload


def tiny_png() -> bytes:
    """A 2 x 2 red PNG (PNG spec, ISO/IEC 15948)."""

    def chunk(kind: bytes, data: bytes) -> bytes:
        return (
            struct.pack(">I", len(data))
            + kind
            + data
            + struct.pack(">I", zlib.crc32(kind + data) & 0xFFFFFFFF)
        )

    raw = b"".join(b"\x00" + b"\xff\x00\x00" * 2 for _ in range(2))
    return (
        b"\x89PNG\r\n\x1a\n"
        + chunk(b"IHDR", struct.pack(">IIBBBBB", 2, 2, 8, 2, 0, 0, 0))
        + chunk(b"IDAT", zlib.compress(raw))
        + chunk(b"IEND", b"")
    )


def _xlsxwriter_part(path: Path) -> None:
    wb = xlsxwriter.Workbook(str(path))
    wb.set_properties({"title": "golden", "created": datetime(2024, 1, 2, 3, 4, 5)})
    wb.add_vba_project(io.BytesIO(VBA_BLOB), is_stream=True)
    bold = wb.add_format({"bold": True, "bottom": 2, "bg_color": "#D9E1F2"})
    num = wb.add_format({"num_format": "0.00", "border": 1, "font_color": "#203040"})
    title = wb.add_format({"bold": True, "align": "center"})

    ws = wb.add_worksheet("Salts")
    ws.merge_range(0, 0, 0, SALTS_LAST_COL, "Harbour Street bench data (invented)", title)
    ws.write_row(
        SALTS_HEADER_ROW - 1,
        0,
        ["Formula", "dHf (kJ/mol)", "dHsub (kJ/mol)", "IE1 (kJ/mol)", "ratio", "sum"],
        bold,
    )
    for i, (f, a, b, c, d) in enumerate(SALTS):
        r = SALTS_FIRST_ROW - 1 + i
        ws.write_string(r, 0, f)
        ws.write_number(r, 1, a, num)
        ws.write_number(r, 2, b, num)
        ws.write_number(r, 3, c, num)
        ws.write_number(r, 4, d)
        ws.write_formula(r, 5, f"=B{r + 1}+C{r + 1}+D{r + 1}", num, a + b + c)
    last = SALTS_FIRST_ROW - 1 + len(SALTS)
    ws.set_column(0, 0, 14)
    ws.set_column(1, 3, 12)
    ws.data_validation(
        SALTS_FIRST_ROW - 1,
        4,
        last - 1,
        4,
        {"validate": "decimal", "criteria": "between", "minimum": 0, "maximum": 1},
    )
    ws.conditional_format(
        SALTS_FIRST_ROW - 1,
        1,
        last - 1,
        1,
        {
            "type": "cell",
            "criteria": "<",
            "value": -400,
            "format": wb.add_format({"font_color": "#9C0006"}),
        },
    )
    ws.conditional_format(SALTS_FIRST_ROW - 1, 2, last - 1, 2, {"type": "data_bar"})
    ws.write_comment(f"B{SALTS_FIRST_ROW}", "checked twice (legacy note)")
    ws.write_comment(f"C{SALTS_FIRST_ROW}", "[Threaded comment]\nChecked against the bench log")
    ws.add_sparkline(last + 1, 1, {"range": f"Salts!B{SALTS_FIRST_ROW}:B{last}"})
    ws.add_sparkline(last + 1, 2, {"range": f"Salts!C{SALTS_FIRST_ROW}:C{last}", "type": "column"})
    ws.insert_image(last + 3, 0, "dot.png", {"image_data": io.BytesIO(tiny_png())})
    ws.insert_textbox(last + 3, 2, "Invented demo data: not measurements", {"width": 240})
    chart = wb.add_chart({"type": "line"})
    chart.add_series({"values": f"=Salts!$B${SALTS_FIRST_ROW}:$B${last}", "name": "dHf"})
    ws.insert_chart(last + 8, 0, chart)
    wb.define_name("FirstFormation", f"=Salts!$B${SALTS_FIRST_ROW}")
    wb.define_name("Salts!LocalRatio", f"=Salts!$E${SALTS_FIRST_ROW}")

    ions = wb.add_worksheet("Ions")
    ions.add_table(
        0,
        0,
        len(IONS),
        1,
        {
            "name": "IonTable",
            "columns": [{"header": "Ion"}, {"header": "Value (kJ/mol)"}],
            "data": [list(x) for x in IONS],
        },
    )
    ions.write_formula(len(IONS) + 2, 0, "=[1]Sheet1!$A$1", None, EXTERNAL_VALUE)

    pivot = wb.add_worksheet("Pivot")
    pivot.write_row(0, 0, ["Kind", "Val"])
    pivot.write_row(1, 0, ["a", 1])
    pivot.write_row(2, 0, ["b", 2])
    pivot.write_row(0, 3, ["Row Labels", "Sum of Val"])
    pivot.write_row(1, 3, ["a", 1])
    pivot.write_row(2, 3, ["b", 2])
    pivot.write_row(3, 3, ["Grand Total", 3])
    wb.close()


# --- parts written by hand ----------------------------------------------------------------

_MAIN = "http://schemas.openxmlformats.org/spreadsheetml/2006/main"
_R = "http://schemas.openxmlformats.org/officeDocument/2006/relationships"
_RT = _R + "/"
_CT = "application/vnd.openxmlformats-officedocument.spreadsheetml."
_HEAD = '<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'


def _rels(*rels: tuple[str, str, str, bool]) -> bytes:
    items = "".join(
        f'<Relationship Id="{i}" Type="{t}" Target="{g}"'
        + (' TargetMode="External"' if ext else "")
        + "/>"
        for i, t, g, ext in rels
    )
    return (
        _HEAD + '<Relationships xmlns="http://schemas.openxmlformats.org/package/2006/'
        f'relationships">{items}</Relationships>'
    ).encode()


PIVOT_CACHE = (
    _HEAD + f'<pivotCacheDefinition xmlns="{_MAIN}" xmlns:r="{_R}" r:id="rId1" '
    'recordCount="2" createdVersion="6" refreshedVersion="6" minRefreshableVersion="3">'
    '<cacheSource type="worksheet"><worksheetSource ref="A1:B3" sheet="Pivot"/></cacheSource>'
    '<cacheFields count="2">'
    '<cacheField name="Kind" numFmtId="0"><sharedItems count="2"><s v="a"/><s v="b"/>'
    "</sharedItems></cacheField>"
    '<cacheField name="Val" numFmtId="0"><sharedItems containsSemiMixedTypes="0" '
    'containsString="0" containsNumber="1" containsInteger="1" minValue="1" maxValue="2"/>'
    "</cacheField></cacheFields></pivotCacheDefinition>"
).encode()
PIVOT_RECORDS = (
    _HEAD + f'<pivotCacheRecords xmlns="{_MAIN}" xmlns:r="{_R}" count="2">'
    '<r><x v="0"/><n v="1"/></r><r><x v="1"/><n v="2"/></r></pivotCacheRecords>'
).encode()
PIVOT_TABLE = (
    _HEAD + f'<pivotTableDefinition xmlns="{_MAIN}" name="BenchPivot" cacheId="7" '
    'applyNumberFormats="0" applyBorderFormats="0" applyFontFormats="0" '
    'applyPatternFormats="0" applyAlignmentFormats="0" applyWidthHeightFormats="1" '
    'dataCaption="Values" updatedVersion="6" minRefreshableVersion="3" useAutoFormatting="1" '
    'itemPrintTitles="1" createdVersion="6" indent="0" outline="1" outlineData="1">'
    '<location ref="D1:E4" firstHeaderRow="1" firstDataRow="1" firstDataCol="1"/>'
    '<pivotFields count="2"><pivotField axis="axisRow" showAll="0"><items count="3">'
    '<item x="0"/><item x="1"/><item t="default"/></items></pivotField>'
    '<pivotField dataField="1" showAll="0"/></pivotFields>'
    '<rowFields count="1"><field x="0"/></rowFields>'
    '<rowItems count="3"><i><x/></i><i><x v="1"/></i><i t="grand"><x/></i></rowItems>'
    '<colItems count="1"><i/></colItems>'
    '<dataFields count="1"><dataField name="Sum of Val" fld="1" baseField="0" baseItem="0"/>'
    "</dataFields></pivotTableDefinition>"
).encode()
EXTERNAL_LINK = (
    _HEAD + f'<externalLink xmlns="{_MAIN}" xmlns:r="{_R}"><externalBook r:id="rId1">'
    '<sheetNames><sheetName val="Sheet1"/></sheetNames><sheetDataSet><sheetData sheetId="0">'
    f'<row r="1"><cell r="A1"><v>{EXTERNAL_VALUE:g}</v></cell></row></sheetData>'
    "</sheetDataSet></externalBook></externalLink>"
).encode()
PERSON_ID = "{6A1B2C3D-0000-4000-8000-000000000001}"
PERSONS = (
    _HEAD + '<personList xmlns="http://schemas.microsoft.com/office/spreadsheetml/2018/'
    f'threadedcomments" xmlns:x="{_MAIN}"><person displayName="Bench User" '
    f'id="{PERSON_ID}" userId="bench" providerId="None"/></personList>'
).encode()
THREADED = (
    _HEAD + '<ThreadedComments xmlns="http://schemas.microsoft.com/office/spreadsheetml/2018/'
    f'threadedcomments" xmlns:x="{_MAIN}"><threadedComment ref="C{SALTS_FIRST_ROW}" '
    f'dT="2024-01-02T03:04:05.00" personId="{PERSON_ID}" '
    'id="{6A1B2C3D-0000-4000-8000-000000000002}"><text>Checked against the bench log</text>'
    "</threadedComment></ThreadedComments>"
).encode()


def prefixed_sheet() -> bytes:
    """A sheet as some generators write it: 'x:' prefix, shared formulas, sparse rows."""
    rows = [
        '<x:row r="1"><x:c r="A1" t="inlineStr"><x:is><x:t>Label</x:t></x:is></x:c>'
        '<x:c r="B1" t="inlineStr"><x:is><x:t>Amount</x:t></x:is></x:c>'
        '<x:c r="C1" t="inlineStr"><x:is><x:t>Twice</x:t></x:is></x:c></x:row>'
    ]
    for i in range(PREFIXED_ROWS):
        r = i + 2
        if r == 4:
            continue  # a missing row: the writer must create it for its added cell
        formula = (
            f'<x:f t="shared" ref="C2:C{PREFIXED_ROWS + 1}" si="0">B2*2</x:f>'
            if r == 2
            else '<x:f t="shared" si="0"/>'
        )
        if r == 5:  # cells without r attributes (allowed by the schema)
            rows.append(
                f'<x:row r="{r}"><x:c t="inlineStr"><x:is><x:t>L{r}</x:t></x:is></x:c>'
                f"<x:c><x:v>{r * 1.5}</x:v></x:c><x:c>{formula}<x:v>{r * 3.0}</x:v></x:c>"
                "</x:row>"
            )
            continue
        rows.append(
            f'<x:row r="{r}"><x:c r="A{r}" t="inlineStr"><x:is><x:t>L{r}</x:t></x:is></x:c>'
            f'<x:c r="B{r}"><x:v>{r * 1.5}</x:v></x:c><x:c r="C{r}">{formula}'
            f"<x:v>{r * 3.0}</x:v></x:c></x:row>"
        )
    return (
        _HEAD + f'<x:worksheet xmlns:x="{_MAIN}" xmlns:r="{_R}" '
        'xmlns:mc="http://schemas.openxmlformats.org/markup-compatibility/2006" '
        'xmlns:x14ac="http://schemas.microsoft.com/office/spreadsheetml/2009/9/ac" '
        'mc:Ignorable="x14ac">'
        f'<x:dimension ref="A1:C{PREFIXED_ROWS + 1}"/>'
        '<x:sheetViews><x:sheetView workbookViewId="0"/></x:sheetViews>'
        '<x:sheetFormatPr defaultRowHeight="15" x14ac:dyDescent="0.25"/>'
        '<x:cols><x:col min="1" max="16384" width="11" customWidth="1"/></x:cols>'
        f"<x:sheetData>{''.join(rows)}</x:sheetData>"
        '<x:pageMargins left="0.7" right="0.7" top="0.75" bottom="0.75" header="0.3" '
        'footer="0.3"/></x:worksheet>'
    ).encode()


def _calc_chain(sheet_ids: dict[str, int]) -> bytes:
    cells = "".join(
        f'<c r="F{SALTS_FIRST_ROW + i}" i="{sheet_ids["Salts"]}"/>' for i in range(len(SALTS))
    )
    return (_HEAD + f'<calcChain xmlns="{_MAIN}">{cells}</calcChain>').encode()


def _sheet_parts(files: dict[str, bytes]) -> dict[str, str]:
    """Sheet name -> worksheet part, from workbook.xml and its relationships."""
    wb = files["xl/workbook.xml"].decode()
    rels = files["xl/_rels/workbook.xml.rels"].decode()
    targets = dict(re.findall(r'Id="(rId\d+)"[^>]*Target="([^"]+)"', rels))
    out = {}
    for name, rid in re.findall(r'<sheet name="([^"]+)" sheetId="\d+" r:id="(rId\d+)"', wb):
        out[name] = "xl/" + targets[rid]
    return out


def _add_rel(
    files: dict[str, bytes],
    rels_part: str,
    rid: str,
    kind: str,
    target: str,
    external: bool = False,
) -> None:
    extra = ' TargetMode="External"' if external else ""
    el = f'<Relationship Id="{rid}" Type="{kind}" Target="{target}"{extra}/>'.encode()
    if rels_part in files:
        files[rels_part] = files[rels_part].replace(b"</Relationships>", el + b"</Relationships>")
    else:
        files[rels_part] = _rels((rid, kind, target, external))


def _add_override(files: dict[str, bytes], part: str, ctype: str) -> None:
    el = f'<Override PartName="/{part}" ContentType="{ctype}"/>'.encode()
    files["[Content_Types].xml"] = files["[Content_Types].xml"].replace(
        b"</Types>", el + b"</Types>"
    )


def make_rich(path: Path) -> Path:
    """Write the rich golden .xlsm at ``path`` (must end in .xlsm)."""
    base = path.with_name(path.stem + "-base.xlsm")
    _xlsxwriter_part(base)
    with zipfile.ZipFile(base) as z:
        order = z.namelist()
        files = {n: z.read(n) for n in order}
    base.unlink()
    parts = _sheet_parts(files)
    wb_rels = "xl/_rels/workbook.xml.rels"
    # threaded comment on Salts!C4 (its legacy placeholder note is already there)
    salts_rels = "xl/worksheets/_rels/" + parts["Salts"].rsplit("/", 1)[1] + ".rels"
    files["xl/threadedComments/threadedComment1.xml"] = THREADED
    files["xl/persons/person.xml"] = PERSONS
    _add_rel(
        files,
        salts_rels,
        "rId90",
        "http://schemas.microsoft.com/office/2017/10/relationships/threadedComment",
        "../threadedComments/threadedComment1.xml",
    )
    _add_rel(
        files,
        wb_rels,
        "rId90",
        "http://schemas.microsoft.com/office/2017/10/relationships/person",
        "persons/person.xml",
    )
    _add_override(
        files,
        "xl/threadedComments/threadedComment1.xml",
        "application/vnd.ms-excel.threadedcomments+xml",
    )
    _add_override(files, "xl/persons/person.xml", "application/vnd.ms-excel.person+xml")
    # pivot table on the Pivot sheet
    pivot_rels = "xl/worksheets/_rels/" + parts["Pivot"].rsplit("/", 1)[1] + ".rels"
    files["xl/pivotCache/pivotCacheDefinition1.xml"] = PIVOT_CACHE
    files["xl/pivotCache/pivotCacheRecords1.xml"] = PIVOT_RECORDS
    files["xl/pivotCache/_rels/pivotCacheDefinition1.xml.rels"] = _rels(
        ("rId1", _RT + "pivotCacheRecords", "pivotCacheRecords1.xml", False)
    )
    files["xl/pivotTables/pivotTable1.xml"] = PIVOT_TABLE
    files["xl/pivotTables/_rels/pivotTable1.xml.rels"] = _rels(
        ("rId1", _RT + "pivotCacheDefinition", "../pivotCache/pivotCacheDefinition1.xml", False)
    )
    _add_rel(files, pivot_rels, "rId1", _RT + "pivotTable", "../pivotTables/pivotTable1.xml")
    _add_rel(
        files,
        wb_rels,
        "rId91",
        _RT + "pivotCacheDefinition",
        "pivotCache/pivotCacheDefinition1.xml",
    )
    _add_override(
        files, "xl/pivotCache/pivotCacheDefinition1.xml", _CT + "pivotCacheDefinition+xml"
    )
    _add_override(files, "xl/pivotCache/pivotCacheRecords1.xml", _CT + "pivotCacheRecords+xml")
    _add_override(files, "xl/pivotTables/pivotTable1.xml", _CT + "pivotTable+xml")
    # external link
    files["xl/externalLinks/externalLink1.xml"] = EXTERNAL_LINK
    files["xl/externalLinks/_rels/externalLink1.xml.rels"] = _rels(
        ("rId1", _RT + "externalLinkPath", "bench-other.xlsx", True)
    )
    _add_rel(files, wb_rels, "rId92", _RT + "externalLink", "externalLinks/externalLink1.xml")
    _add_override(files, "xl/externalLinks/externalLink1.xml", _CT + "externalLink+xml")
    # the hand-written prefixed sheet
    files["xl/worksheets/sheet90.xml"] = prefixed_sheet()
    _add_rel(files, wb_rels, "rId93", _RT + "worksheet", "worksheets/sheet90.xml")
    _add_override(files, "xl/worksheets/sheet90.xml", _CT + "worksheet+xml")
    # calculation chain
    wb = files["xl/workbook.xml"]
    sheet_ids = {n: int(i) for n, i in re.findall(rb'<sheet name="([^"]+)" sheetId="(\d+)"', wb)}
    sheet_ids = {k.decode(): v for k, v in sheet_ids.items()}  # type: ignore[attr-defined]
    files["xl/calcChain.xml"] = _calc_chain(sheet_ids)
    _add_rel(files, wb_rels, "rId94", _RT + "calcChain", "calcChain.xml")
    _add_override(files, "xl/calcChain.xml", _CT + "calcChain+xml")
    # workbook.xml: the new sheet, external reference, pivot cache
    next_id = max(sheet_ids.values()) + 1
    wb = wb.replace(
        b"</sheets>", f'<sheet name="Prefixed" sheetId="{next_id}" r:id="rId93"/></sheets>'.encode()
    )
    wb = wb.replace(
        b"</sheets>",
        b'</sheets><externalReferences><externalReference r:id="rId92"/></externalReferences>',
        1,
    )
    wb = re.sub(
        rb"(<calcPr[^>]*/>)",
        rb'\1<pivotCaches><pivotCache cacheId="7" r:id="rId91"/>'
        rb"</pivotCaches>",
        wb,
    )
    files["xl/workbook.xml"] = wb
    added = [n for n in files if n not in order]
    with zipfile.ZipFile(path, "w", zipfile.ZIP_DEFLATED) as z:
        for name in order + added:
            # one entry stored (not deflated), as some writers do for images
            kind = zipfile.ZIP_STORED if name.endswith(".png") else zipfile.ZIP_DEFLATED
            info = zipfile.ZipInfo(name, date_time=(2024, 1, 2, 3, 4, 6))
            info.compress_type = kind
            z.writestr(info, files[name])
    return path


def make_plain(path: Path, rows: int = 10, cols: int = 8) -> Path:
    """A plain .xlsx of numbers with a header row (used for small unit cases)."""
    wb = xlsxwriter.Workbook(str(path))
    ws = wb.add_worksheet("Data")
    ws.write_row(0, 0, [f"h{c}" for c in range(cols)])
    for r in range(rows):
        ws.write_row(r + 1, 0, [r * 10 + c + 0.5 for c in range(cols)])
    wb.close()
    return path


if __name__ == "__main__":
    out = Path(sys.argv[1] if len(sys.argv) > 1 else ".")
    out.mkdir(parents=True, exist_ok=True)
    print(make_rich(out / "golden-rich.xlsm"))
    print(make_plain(out / "golden-plain.xlsx"))


# --- the annotation the tests ask for -------------------------------------------------

REFS_SHEET = "sheetcycle refs"
FLAGS_SHEET = "sheetcycle flags"
REF_OFFSET = 121.5  # invented reference value, in the refs sheet at B2


def rich_annotation(*, probe: bool = False):
    """The additions, notes and new sheets the tests write into the rich golden workbook.

    Cached values are computed here in plain Python from the golden data above, the way
    a spreadsheet evaluates the formulas. With ``probe`` one more column carries a
    deliberately wrong cached value: an application that recalculates must replace it.
    """
    from sheetcycle.io.package import (
        AddedCell,
        AddedColumn,
        CellNote,
        NewSheet,
        SheetAddition,
    )

    refs = f"'{REFS_SHEET}'!$B$2"
    rows = [SALTS_FIRST_ROW + i for i in range(len(SALTS))]
    lattice = AddedColumn(
        "lattice est (kJ/mol)",
        [
            AddedCell(a - b - c + REF_OFFSET, f"B{r}-C{r}-D{r}+{refs}")
            for r, (_, a, b, c, _) in zip(rows, SALTS, strict=True)
        ],
    )
    kcal = AddedColumn(
        "dHf (kcal/mol)",
        [AddedCell(a / 4.184, f"B{r}/4.184") for r, (_, a, *_) in zip(rows, SALTS, strict=True)],
        number_format="0.000",
    )
    check = AddedColumn(
        "check",
        [
            AddedCell("=not a formula" if i == 0 else "ok", None, "warning" if i == 0 else None)
            for i in range(len(SALTS))
        ],
        number_format=None,
    )
    label = AddedColumn(
        "label",
        [AddedCell(f"{f}-x", f'A{r}&"-x"') for r, (f, *_) in zip(rows, SALTS, strict=True)],
        number_format=None,
    )
    salts_cols = [lattice, kcal, check, label]
    if probe:
        salts_cols.append(
            AddedColumn(
                "probe",
                [
                    AddedCell(-1.0, f"E{r}*3")
                    for r in rows  # wrong on purpose: true value is E*3
                ],
                number_format=None,
            )
        )
    additions = [
        SheetAddition(
            "Salts",
            SALTS_HEADER_ROW,
            SALTS_FIRST_ROW,
            SALTS_LAST_COL + 2,
            salts_cols,
            header_style_cell=f"B{SALTS_HEADER_ROW}",
        ),
        SheetAddition(
            "Ions",
            1,
            2,
            3,
            [
                AddedColumn(
                    "twice", [AddedCell(v * 2, f"B{i + 2}*2") for i, (_, v) in enumerate(IONS)]
                )
            ],
        ),
        SheetAddition(
            "Prefixed",
            1,
            2,
            4,
            [
                AddedColumn(
                    "B+C",
                    [
                        AddedCell(0.0 if r == 4 else r * 1.5 + r * 3.0, f"B{r}+C{r}")
                        for r in range(2, PREFIXED_ROWS + 2)
                    ],
                )
            ],
        ),
    ]
    notes = [
        CellNote("Salts", f"B{SALTS_FIRST_ROW + 1}", "value looks low for this kind", "warning"),
        CellNote("Salts", f"B{SALTS_FIRST_ROW}", "second look: unit was kcal?", "error"),
        CellNote("Salts", f"C{SALTS_FIRST_ROW}", "=taken from the bench log", "note"),
        CellNote("Salts", f"H{SALTS_FIRST_ROW + 2}", "estimate uses the offset", "note"),
        CellNote("Ions", "A3", "charge read from the name", "warning"),
        CellNote("Prefixed", "B3", "amount typed as text?", "error"),
        CellNote("Prefixed", "E4", "inputs are blank in this row", "note"),
    ]
    ref_rows = [
        [
            AddedCell("name", style="header"),
            AddedCell("value", style="header"),
            AddedCell("source", style="header"),
        ],
        [
            AddedCell("offset"),
            AddedCell(REF_OFFSET, style="number"),
            AddedCell("invented for the writer tests"),
        ],
    ]
    flag_rows: list[list[AddedCell | None]] = [
        [AddedCell(h, style="header") for h in ("sheet", "cell", "severity", "message")]
    ]
    links = {}
    for k, n in enumerate(notes, start=1):
        flag_rows.append(
            [
                AddedCell(n.sheet),
                AddedCell(n.cell),
                AddedCell(n.severity, style=n.severity),
                AddedCell(n.text, style="text"),
            ]
        )
        links[(k, 1)] = f"'{n.sheet}'!{n.cell}"
    flag_rows.append([None, None, AddedCell("=SUM(1,2)")])  # text, never a formula
    new_sheets = [
        NewSheet(REFS_SHEET, ref_rows, col_widths=(12, 10, 30)),
        NewSheet(FLAGS_SHEET, flag_rows, col_widths=(12, 8, 10, 40), links=links),
    ]
    return additions, notes, new_sheets
