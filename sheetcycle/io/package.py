"""The user's own .xlsx/.xlsm handed back with additions, by editing the package.

The workbook is never loaded and saved by a spreadsheet library (that rewrites every part
and drops what it does not know: shapes, threaded comments, sparklines, VBA ...). Instead
every zip entry that needs no change is copied as its stored bytes, and the few parts that
change are edited by splicing bytes:

* the worksheets that get columns, notes or new cell values (streamed row by row, see
  package_sheet; a formula cell's new cached value, or its formula replaced by the value,
  see package_update),
* ``xl/styles.xml`` (formats appended; existing indices unchanged),
* ``[Content_Types].xml``, ``xl/workbook.xml`` and its relationships (new sheets last),
* the notes' comments and VML parts (added to the sheet's own parts when it has them),
* ``xl/calcChain.xml`` is dropped whenever formulas are added or replaced by values
  (applications rebuild it).

Everything that can be checked is checked before the output is opened; a problem found
while streaming (an added column landing on an occupied cell) aborts the temporary file,
so no output appears. The input file is only read.
"""

from __future__ import annotations

import re
import time
import zipfile
from collections.abc import Callable, Iterable, Mapping, Sequence
from dataclasses import dataclass, field
from functools import partial
from pathlib import Path

from sheetcycle.errors import ReadError, WriteError
from sheetcycle.io.atomic import atomic_output
from sheetcycle.io.package_cells import (
    AddedCell,
    CellStyler,
    ColumnCells,
    new_sheet_chunks,
    register_new_sheet_styles,
)
from sheetcycle.io.package_images import (
    CT_DRAWING,
    CT_PNG,
    T_DRAWING,
    T_IMAGE,
    Picture,
    check_anchor,
    drawing_xml,
    png_extent,
)
from sheetcycle.io.package_notes import (
    NoteText,
    add_comments,
    add_vml,
    comments_chunks,
    existing_refs,
    new_vml_chunks,
    used_vml_blocks,
    vml_blocks,
)
from sheetcycle.io.package_sheet import (
    ColumnJob,
    SheetJob,
    SheetRewriter,
    find_cell_styles,
    legacy_drawing_id,
    scan_tail,
)
from sheetcycle.io.package_styles import MINIMAL_STYLES, StyleBook
from sheetcycle.io.package_update import check_value
from sheetcycle.io.package_xml import (
    MAX_COL,
    MAX_ROW,
    STRICT_NS,
    Rel,
    add_rels,
    esc_attr,
    free_rel_ids,
    open_empty,
    parse_a1,
    parse_rels,
    parse_xml,
    relative_target,
    rels_path,
    remove_rel,
    resolve_target,
)
from sheetcycle.io.package_zip import copy_raw
from sheetcycle.io.results_book import SEVERITY_FILLS
from sheetcycle.io.safety import Limits, check_zip, read_member

__all__ = [
    "AddedCell",
    "AddedColumn",
    "CellNote",
    "CellValue",
    "ColumnCells",
    "NewSheet",
    "SheetAddition",
    "write_annotated",
]

#: Fill colour per severity name (shared with the results workbook's legend).
FILLS: dict[str, str] = {sev.value: colour for sev, (colour, _) in SEVERITY_FILLS.items()}
_RANK = {"note": 0, "warning": 1, "error": 2}

_RT = "http://schemas.openxmlformats.org/officeDocument/2006/relationships/"
_T_SHEET = _RT + "worksheet"
_T_STYLES = _RT + "styles"
_T_COMMENTS = _RT + "comments"
_T_VML = _RT + "vmlDrawing"
_T_CALC = _RT + "calcChain"
_T_OFFICE = _RT + "officeDocument"
_STRICT_OFFICE = "http://purl.oclc.org/ooxml/officeDocument/relationships/officeDocument"
_CT = "application/vnd.openxmlformats-officedocument."
_CT_SHEET = _CT + "spreadsheetml.worksheet+xml"
_CT_COMMENTS = _CT + "spreadsheetml.comments+xml"
_CT_STYLES = _CT + "spreadsheetml.styles+xml"
_CT_VML = _CT + "vmlDrawing"
_OLE_MAGIC = b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1"
_OK_SUFFIXES = {".xlsx", ".xlsm", ".xltx", ".xltm"}
_OTHER_SUFFIXES = {".xls", ".xlsb", ".ods", ".csv", ".tsv", ".txt", ".fods"}
_BAD_SHEET_CHARS = re.compile(r"[\[\]:*?/\\]")


@dataclass(frozen=True, slots=True)
class AddedColumn:
    header: str
    cells: Sequence[AddedCell]  # one per data row, in order
    number_format: str | None = "0.0"
    width: float | None = None  # None: from the header's length


@dataclass(frozen=True, slots=True)
class SheetAddition:
    sheet: str  # an existing sheet
    header_row: int  # 1-based
    first_row: int  # 1-based first data row
    start_col: int  # 0-based column of the first added column
    columns: Sequence[AddedColumn]
    header_style_cell: str | None = None  # A1 of a header cell whose format the headers copy


@dataclass(frozen=True, slots=True)
class CellNote:
    sheet: str
    cell: str  # A1
    text: str
    severity: str  # error, warning, note


@dataclass(frozen=True, slots=True)
class CellValue:
    """A new value for an existing formula cell.

    With ``replace_formula`` False the cell keeps its ``<f>`` exactly and ``value`` becomes
    its cached value; with True the formula goes and the cell holds ``value`` (a number,
    text as an inline string, a logical value, or an error), keeping its format. ``value``
    is a float, int, str, bool, None (no value) or a CellError-like object (anything with
    a ``code`` such as ``"#N/A"``; a code that is not a spreadsheet error is written as
    #N/A).
    """

    sheet: str
    cell: str  # A1
    value: object
    replace_formula: bool = False


@dataclass(frozen=True, slots=True)
class NewSheet:
    name: str
    rows: Sequence[Sequence[AddedCell | None]]
    col_widths: Sequence[float] = ()
    links: Mapping[tuple[int, int], str] = field(default_factory=dict)  # (row0, col0) -> target
    # Pictures: (row0, col0, PNG bytes), each anchored by its top-left corner at that cell
    # and shown at the size its pixels and resolution give (see package_images).
    images: Sequence[tuple[int, int, bytes]] = ()


def _cell_attrs(cell: object) -> tuple[object, str | None, str | None]:
    c: AddedCell = cell  # type: ignore[assignment]
    return c.value, c.formula, c.style


# --- refusing what cannot be annotated --------------------------------------------------


def _cell_ref(cell: str, what: str, file: str, sheet: str) -> tuple[int, int]:
    """parse_a1 of an A1 reference given to the writer, or a WriteError naming it."""
    try:
        return parse_a1(cell)
    except ValueError as exc:
        raise WriteError(f"{what} is not an A1 cell reference", file=file, sheet=sheet,
                         found=cell) from exc


def _check_kind(src: Path, dst: Path) -> None:
    file = str(src)
    suffix = src.suffix.lower()
    if suffix in _OTHER_SUFFIXES:
        raise WriteError(
            f"annotated copies are for .xlsx/.xlsm workbooks; for a {suffix} file use the "
            "results workbook option",
            file=file,
            expected=".xlsx or .xlsm",
            found=suffix,
        )
    try:
        with open(src, "rb") as fh:
            magic = fh.read(8)
    except OSError as exc:
        raise ReadError(f"cannot read the workbook ({exc.strerror})", file=file) from exc
    if magic == _OLE_MAGIC:
        raise WriteError(
            "the workbook is encrypted (password-protected) or is a legacy binary .xls "
            "renamed; it cannot be annotated. Save an unprotected .xlsx copy, or use the "
            "results workbook option",
            file=file,
        )
    if not magic.startswith(b"PK"):
        raise ReadError(
            "not a workbook package (no zip signature)",
            file=file,
            expected=".xlsx or .xlsm (a zip file)",
        )
    if suffix not in _OK_SUFFIXES:
        raise WriteError(
            "annotated copies are for .xlsx/.xlsm workbooks",
            file=file,
            expected=".xlsx or .xlsm",
            found=suffix or "(no extension)",
        )
    if dst.suffix.lower() != suffix:
        raise WriteError(
            "the annotated copy must keep the input's file type (Excel refuses a macro "
            "workbook named .xlsx and the reverse)",
            file=str(dst),
            expected=suffix,
            found=dst.suffix or "(no extension)",
        )


def _check_sheet_name(name: str, taken: set[str], file: str) -> None:
    if (
        not name
        or len(name) > 31
        or _BAD_SHEET_CHARS.search(name)
        or name[0] == "'"
        or name[-1] == "'"
        or name.lower() == "history"
    ):
        raise WriteError(
            "not a valid sheet name",
            file=file,
            sheet=name,
            expected="1 to 31 characters, none of []:*?/\\, not starting or ending with '",
        )
    if name.lower() in taken:
        raise WriteError(
            "a sheet of this name already exists in the workbook",
            file=file,
            sheet=name,
            expected="a new sheet name",
        )
    taken.add(name.lower())


# --- the plan ---------------------------------------------------------------------------


@dataclass
class _Plan:
    replaced: dict[str, bytes] = field(default_factory=dict)  # changed small parts
    # new parts, written last; a big one as a function that makes it then (its bytes, or
    # its chunks), so that it is not held in memory while the worksheets stream
    added: dict[str, bytes | Callable[[], bytes | Iterable[bytes]]] = field(
        default_factory=dict)
    jobs: dict[str, SheetJob] = field(default_factory=dict)  # streamed worksheet parts
    dropped: set[str] = field(default_factory=set)
    styles_part: str = "xl/styles.xml"
    styles: StyleBook | None = None


class _Package:
    def __init__(self, src: Path, zin: zipfile.ZipFile) -> None:
        self.file = str(src)
        self.zin = zin
        self.limits = Limits()
        self.names = set(zin.namelist())

    def read(self, part: str) -> bytes | None:
        if part not in self.names:
            return None
        return read_member(self.zin, part, self.limits, file=self.file)

    def need(self, part: str) -> bytes:
        data = self.read(part)
        if data is None:
            raise ReadError(f"the package has no part {part!r}", file=self.file)
        return data


def _free_part(names: set[str], pattern: str) -> str:
    k = 1
    while pattern.format(k) in names:
        k += 1
    name = pattern.format(k)
    names.add(name)
    return name


def _content_types(
    data: bytes,
    overrides: list[tuple[str, str]],
    drop: list[str],
    need_vml_default: bool,
    defaults: Sequence[tuple[str, str]] = (),
) -> bytes:
    data = open_empty(data, b"Types")
    for part in drop:
        data = re.sub(
            rb"<Override\b[^>]*?PartName\s*=\s*[\"']/"
            + re.escape(part.encode())
            + rb"[\"'][^>]*?/>",
            b"",
            data,
        )
    add = "".join(
        f'<Override PartName="/{esc_attr(p)}" ContentType="{esc_attr(t)}"/>' for p, t in overrides
    )
    if need_vml_default and not re.search(rb"Extension\s*=\s*[\"']vml[\"']", data, re.I):
        add = f'<Default Extension="vml" ContentType="{_CT_VML}"/>' + add
    for ext, ctype in defaults:
        if not re.search(
            rb"Extension\s*=\s*[\"']" + re.escape(ext.encode()) + rb"[\"']", data, re.I
        ):
            add = f'<Default Extension="{esc_attr(ext)}" ContentType="{esc_attr(ctype)}"/>' + add
    end = data.rfind(b"</Types>")
    return data[:end] + add.encode() + data[end:]


def _plan(
    pkg: _Package,
    additions: Sequence[SheetAddition],
    notes: Sequence[CellNote],
    new_sheets: Sequence[NewSheet],
    cell_values: Sequence[CellValue] = (),
) -> _Plan:
    file = pkg.file
    plan = _Plan()
    root_rels = parse_rels(pkg.read("_rels/.rels"), "_rels/.rels", file)
    office = [r for r in root_rels if r.type in (_T_OFFICE, _STRICT_OFFICE)]
    if any(r.type == _STRICT_OFFICE for r in office):
        raise _strict(file)
    wb_part = resolve_target("", office[0].target) if office else "xl/workbook.xml"
    wb = pkg.need(wb_part)
    if STRICT_NS in wb[:4096]:
        raise _strict(file)
    wb_rels_part = rels_path(wb_part)
    wb_rels_data = pkg.read(wb_rels_part)
    wb_rels = parse_rels(wb_rels_data, wb_rels_part, file)
    by_id = {r.id: r for r in wb_rels}
    root = parse_xml(wb, wb_part, file)
    ns_main = root.tag.partition("}")[0].lstrip("{")
    ns_r = "http://schemas.openxmlformats.org/officeDocument/2006/relationships"
    sheets: dict[str, str] = {}
    sheet_ids: list[int] = []
    for el in root.iter(f"{{{ns_main}}}sheet"):
        name = el.get("name", "")
        rel = by_id.get(el.get(f"{{{ns_r}}}id", ""))
        sheet_ids.append(int(el.get("sheetId", "0") or 0))
        if rel is not None and rel.type == _T_SHEET:
            sheets[name] = resolve_target(wb_part, rel.target)

    def sheet_part(name: str) -> str:
        if name not in sheets:
            raise WriteError(
                "the workbook has no worksheet of this name",
                file=file,
                sheet=name,
                expected="one of " + ", ".join(map(repr, sheets)),
            )
        if sheets[name] not in pkg.names:
            raise ReadError(
                "the worksheet's part is missing from the package",
                file=file,
                sheet=name,
                found=sheets[name],
            )
        return sheets[name]

    # styles
    styles_rel = next((r for r in wb_rels if r.type == _T_STYLES), None)
    new_wb_rels: list[tuple[str, str, str]] = []
    overrides: list[tuple[str, str]] = []
    wb_rel_ids = free_rel_ids(wb_rels, len(new_sheets) + 1)
    if styles_rel is not None and resolve_target(wb_part, styles_rel.target) in pkg.names:
        plan.styles_part = resolve_target(wb_part, styles_rel.target)
        styles = StyleBook(pkg.need(plan.styles_part))
    else:
        plan.styles_part = _free_part(pkg.names, "xl/styles{}.xml")
        styles = StyleBook(MINIMAL_STYLES)
        new_wb_rels.append(
            (wb_rel_ids.pop(), _T_STYLES, relative_target(wb_part, plan.styles_part))
        )
        overrides.append((plan.styles_part, _CT_STYLES))
    plan.styles = styles
    styler = CellStyler(styles, FILLS)
    any_formula = False

    # columns
    for add in additions:
        part = sheet_part(add.sheet)
        job = plan.jobs.setdefault(part, SheetJob(sheet=add.sheet, part=part))
        _check_addition(add, file)
        header_xf = styler.header()
        if add.header_style_cell:
            ref = _cell_ref(add.header_style_cell, "header_style_cell", file, add.sheet)
            with pkg.zin.open(part) as fh:
                found = find_cell_styles(fh, {ref})
            if ref in found:
                header_xf = found[ref]
        cols: list[ColumnJob] = []
        for k, col in enumerate(add.columns):
            number_xf = (
                styles.xf(numfmt=styles.number_format(col.number_format))
                if col.number_format and col.number_format != "General"
                else 0
            )
            width = (
                col.width
                if col.width is not None
                else min(max(len(col.header) * 1.1 + 2, 10.0), 60.0)
            )
            cols.append(
                ColumnJob(
                    col=add.start_col + k,
                    header=col.header,
                    cells=col.cells,
                    width=width,
                    number_xf=number_xf,
                    header_xf=header_xf,
                )
            )
            any_formula = any_formula or any(c.formula is not None for c in col.cells)
        taken = {c.col for c in job.columns()}
        if taken & {c.col for c in cols}:
            raise WriteError(
                "two additions put columns in the same place",
                file=file,
                sheet=add.sheet,
                found=sorted(taken & {c.col for c in cols}),
            )
        job.header_rows.setdefault(add.header_row, []).extend(cols)
        n = len(add.columns[0].cells) if add.columns else 0
        job.blocks.append((add.first_row, n, cols))

    # new values of existing formula cells
    for cv in cell_values:
        part = sheet_part(cv.sheet)
        row, col = _cell_ref(cv.cell, "cell value's cell", file, cv.sheet)
        problem = check_value(cv.value)
        if problem is not None:
            raise WriteError(problem, file=file, sheet=cv.sheet, cell=cv.cell)
        job = plan.jobs.setdefault(part, SheetJob(sheet=cv.sheet, part=part))
        row_updates = job.updates.setdefault(row, {})
        if col in row_updates:
            raise WriteError(
                "two new values for one cell",
                file=file,
                sheet=cv.sheet,
                cell=cv.cell,
                expected="one CellValue per cell",
            )
        row_updates[col] = (cv.value, bool(cv.replace_formula))
        any_formula = any_formula or bool(cv.replace_formula)

    # notes
    merged: dict[tuple[str, int, int], tuple[str, list[str]]] = {}
    for note in notes:
        if note.severity not in FILLS:
            raise WriteError(
                "unknown note severity",
                file=file,
                sheet=note.sheet,
                cell=note.cell,
                expected="error, warning or note",
                found=note.severity,
            )
        sheet_part(note.sheet)
        row, col = _cell_ref(note.cell, "note cell", file, note.sheet)
        key = (note.sheet, row, col)
        sev, texts = merged.get(key, (note.severity, []))
        if _RANK[note.severity] > _RANK[sev]:
            sev = note.severity
        texts.append(note.text)
        merged[key] = (sev, texts)
    by_sheet: dict[str, list[NoteText]] = {}
    for (sheet, row, col), (sev, texts) in merged.items():
        part = sheet_part(sheet)
        job = plan.jobs.setdefault(part, SheetJob(sheet=sheet, part=part))
        job.notes.setdefault(row, {})[col] = FILLS[sev]
        by_sheet.setdefault(part, []).append(NoteText(row, col, "\n".join(texts)))
    if by_sheet:
        vml_names = [n for n in pkg.names if n.lower().endswith(".vml")]
        block = used_vml_blocks(pkg.read(n) or b"" for n in vml_names) + 1
        for part, items in by_sheet.items():
            block = _plan_notes(pkg, plan, part, items, block, overrides)

    # new sheets
    taken_names = {n.lower() for n in sheets}
    new_sheet_els: list[str] = []
    next_id = max(sheet_ids, default=0) + 1
    for ns in new_sheets:
        _check_sheet_name(ns.name, taken_names, file)
        part = _free_part(pkg.names, "xl/worksheets/sheet{}.xml")
        rid = wb_rel_ids.pop(0)
        new_wb_rels.append((rid, _T_SHEET, relative_target(wb_part, part)))
        overrides.append((part, _CT_SHEET))
        drawing_rid = _plan_images(pkg, plan, ns, part, overrides) if ns.images else None
        # its cell formats now, while the styles part can still take them
        register_new_sheet_styles(ns.rows, ns.links, styler, _cell_attrs)
        plan.added[part] = partial(
            new_sheet_chunks, ns.rows, ns.col_widths, ns.links, styler, _cell_attrs, drawing_rid
        )
        any_formula = any_formula or any(
            c is not None and c.formula is not None for row in ns.rows for c in row
        )
        new_sheet_els.append(
            f'<sheet name="{esc_attr(ns.name)}" sheetId="{next_id}" r:id="{rid}"/>'
        )
        next_id += 1

    # workbook, its relationships, content types
    drop: list[str] = []
    rels_data = wb_rels_data
    if any_formula:
        for r in wb_rels:
            if r.type == _T_CALC:
                drop.append(resolve_target(wb_part, r.target))
                assert rels_data is not None
                rels_data = remove_rel(rels_data, r.id)
        plan.dropped.update(d for d in drop if d in pkg.names)
    if new_wb_rels:
        rels_data = add_rels(rels_data, new_wb_rels)
    if rels_data != wb_rels_data and rels_data is not None:
        plan.replaced[wb_rels_part] = rels_data
    if new_sheet_els:
        plan.replaced[wb_part] = _add_sheets(wb, new_sheet_els, file)
    vml_new = any(p.lower().endswith(".vml") for p in plan.added)
    png_new = [("png", CT_PNG)] if any(p.lower().endswith(".png") for p in plan.added) else []
    if overrides or drop or vml_new or png_new:
        plan.replaced["[Content_Types].xml"] = _content_types(
            pkg.need("[Content_Types].xml"), overrides, drop, vml_new, png_new
        )
    return plan


def _plan_images(
    pkg: _Package, plan: _Plan, ns: NewSheet, part: str, overrides: list[tuple[str, str]]
) -> str:
    """Media parts, one drawing part and the relationships for a new sheet's pictures.

    Returns the id of the sheet's relationship to the drawing.
    """
    pictures: list[Picture] = []
    image_rels: list[tuple[str, str, str]] = []
    drawing = _free_part(pkg.names, "xl/drawings/drawing{}.xml")
    for k, item in enumerate(ns.images, start=1):
        if len(item) != 3:
            raise WriteError(
                "an image must be (row0, col0, PNG bytes)",
                file=pkg.file,
                sheet=ns.name,
                found=f"{len(item)} items",
            )
        row0, col0, data = item
        check_anchor(row0, col0, sheet=ns.name, file=pkg.file)
        cx, cy = png_extent(data, sheet=ns.name, file=pkg.file)
        media = _free_part(pkg.names, "xl/media/image{}.png")
        plan.added[media] = bytes(data)
        rid = f"rId{k}"
        image_rels.append((rid, T_IMAGE, relative_target(drawing, media)))
        pictures.append(Picture(row0, col0, cx, cy, rid))
    plan.added[drawing] = drawing_xml(pictures)
    plan.added[rels_path(drawing)] = add_rels(None, image_rels)
    overrides.append((drawing, CT_DRAWING))
    plan.added[rels_path(part)] = add_rels(
        None, [("rId1", T_DRAWING, relative_target(part, drawing))]
    )
    return "rId1"


def _strict(file: str) -> WriteError:
    return WriteError(
        "the workbook is saved as Strict Open XML, which cannot be annotated safely; "
        "save it as an ordinary Excel workbook (.xlsx) first",
        file=file,
        expected="transitional Office Open XML",
        found="Strict Open XML",
    )


def _check_addition(add: SheetAddition, file: str) -> None:
    n_set = {len(c.cells) for c in add.columns}
    if len(n_set) > 1:
        raise WriteError(
            "added columns of one addition differ in length",
            file=file,
            sheet=add.sheet,
            found=sorted(n_set),
        )
    n = n_set.pop() if n_set else 0
    if not (1 <= add.header_row <= MAX_ROW) or not (1 <= add.first_row <= MAX_ROW):
        raise WriteError(
            "header_row and first_row must be sheet rows (1-based)",
            file=file,
            sheet=add.sheet,
            found=(add.header_row, add.first_row),
        )
    if add.first_row <= add.header_row:
        raise WriteError(
            "the first data row must come after the header row",
            file=file,
            sheet=add.sheet,
            found=(add.header_row, add.first_row),
        )
    if add.first_row + n - 1 > MAX_ROW:
        raise WriteError(
            "added cells would run past the last sheet row",
            file=file,
            sheet=add.sheet,
            expected=f"at most {MAX_ROW:,} rows",
        )
    if add.start_col < 0 or add.start_col + len(add.columns) > MAX_COL:
        raise WriteError(
            "added columns would run past the last sheet column (XFD)",
            file=file,
            sheet=add.sheet,
            found=add.start_col,
        )


def _add_sheets(wb: bytes, elements: list[str], file: str) -> bytes:
    from sheetcycle.io.package_xml import MAIN_NS, REL_NS, ns_prefix

    p = (ns_prefix(wb, MAIN_NS) or b"").decode()
    rp = ns_prefix(wb, REL_NS)
    text = "".join(elements)
    if p:
        text = text.replace("<sheet ", f"<{p}sheet ")
    if rp is None:
        text = text.replace(' r:id="', f' xmlns:r="{REL_NS.decode()}" r:id="')
    elif rp != b"r:":
        text = text.replace(' r:id="', f' {rp.decode()}id="')
    end = wb.rfind(f"</{p}sheets>".encode())
    if end < 0:
        raise ReadError("workbook part has no <sheets> list", file=file)
    return wb[:end] + text.encode() + wb[end:]


def _plan_notes(
    pkg: _Package,
    plan: _Plan,
    part: str,
    items: list[NoteText],
    block: int,
    overrides: list[tuple[str, str]],
) -> int:
    rp = rels_path(part)
    rels_data = plan.replaced.get(rp) or pkg.read(rp)
    rels: list[Rel] = parse_rels(rels_data, rp, pkg.file)
    new_rels: list[tuple[str, str, str]] = []
    ids = free_rel_ids(rels, 2)
    comments_rel = next((r for r in rels if r.type == _T_COMMENTS and not r.external), None)
    comments_part = resolve_target(part, comments_rel.target) if comments_rel else None
    old_comments = pkg.read(comments_part) if comments_part else None
    if comments_part is None or old_comments is None:
        comments_part = _free_part(pkg.names, "xl/comments{}.xml")
        new_rels.append((ids.pop(0), _T_COMMENTS, relative_target(part, comments_part)))
        overrides.append((comments_part, _CT_COMMENTS))
        old_comments = None
    have = existing_refs(old_comments)
    if old_comments is not None:
        plan.replaced[comments_part] = add_comments(old_comments, items)
    else:
        plan.added[comments_part] = partial(comments_chunks, None, items)
    vml_part: str | None = None
    if any(r.type == _T_VML for r in rels):
        with pkg.zin.open(part) as fh:
            rid = legacy_drawing_id(scan_tail(fh))
        rel = next((r for r in rels if r.id == rid), None)
        if rel is not None:
            vml_part = resolve_target(part, rel.target)
    shapes = [n for n in items if n.ref not in have]
    next_block = block
    if vml_part is not None and vml_part in pkg.names:
        if shapes:
            vml, last = add_vml(pkg.need(vml_part), shapes, block)
            plan.replaced[vml_part] = vml
            next_block = last + 1
    else:
        vml_part = _free_part(pkg.names, "xl/drawings/vmlDrawing{}.vml")
        next_block = vml_blocks(len(shapes), block)[-1] + 1
        rid = ids.pop(0)
        new_rels.append((rid, _T_VML, relative_target(part, vml_part)))
        plan.added[vml_part] = partial(new_vml_chunks, shapes, block)
        plan.jobs[part].legacy_rid = rid
    if new_rels:
        target = plan.replaced if rels_data is not None else plan.added
        target[rp] = add_rels(rels_data, new_rels)
    return next_block


# --- writing ----------------------------------------------------------------------------


class _Out:
    def __init__(self, zin: zipfile.ZipFile, zout: zipfile.ZipFile) -> None:
        self.zin = zin
        self.zout = zout

    def put(self, name: str, data: bytes | Callable[[], bytes | Iterable[bytes]],
            like: zipfile.ZipInfo | None) -> None:
        stamp = like.date_time if like else time.localtime()[:6]
        info = zipfile.ZipInfo(name, date_time=stamp)
        info.compress_type = like.compress_type if like else zipfile.ZIP_DEFLATED
        if like is not None:
            info.external_attr = like.external_attr
        if callable(data):  # a part made now
            data = data()
        if not isinstance(data, bytes):  # its chunks, streamed
            info._compresslevel = 1  # type: ignore[attr-defined]
            # no Zip64 records unless needed: some spreadsheet applications want to repair
            # a workbook whose small parts carry them; a new part beyond 2 GiB stops here
            try:
                with self.zout.open(info, "w", force_zip64=False) as dst:
                    for chunk in data:
                        dst.write(chunk)
            except RuntimeError as exc:
                raise WriteError(f"the new part {name} would exceed 2 GiB; nothing was "
                                 "written") from exc
            return
        if len(data) > 1024 * 1024:  # big parts (flags sheet, notes): fast deflate (level 1)
            info._compresslevel = 1  # type: ignore[attr-defined]
        self.zout.writestr(info, data)

    def stream(self, job: SheetJob, like: zipfile.ZipInfo, styler: CellStyler, file: str) -> None:
        info = zipfile.ZipInfo(like.filename, date_time=like.date_time)
        info.compress_type = like.compress_type
        info.external_attr = like.external_attr
        n_new = sum(n * len(cols) for _, n, cols in job.blocks)
        if like.file_size > 8 * 1024 * 1024:  # big sheets: fast deflate (level 1)
            info._compresslevel = 1  # type: ignore[attr-defined]
        big = like.file_size + 120 * n_new > 2 * 1024**3
        rewriter = SheetRewriter(job, styler, file)
        with self.zin.open(like) as src, self.zout.open(info, "w", force_zip64=big) as dst:
            with _Deflating(dst.write) as write:
                rewriter.run(src, write)


class _Deflating:
    """Hand the rewritten sheet's chunks to a thread that compresses and writes them, so
    that deflating one chunk (zlib lets go of the interpreter lock) overlaps making the
    next. The chunks keep their order; an error in the thread is raised here."""

    def __init__(self, write: Callable[[bytes], object]) -> None:
        import queue
        import threading

        self._write = write
        self._queue: queue.Queue[bytes | None] = queue.Queue(maxsize=2)
        self._error: BaseException | None = None
        self._thread = threading.Thread(target=self._drain, daemon=True)

    def _drain(self) -> None:
        while (chunk := self._queue.get()) is not None:
            if self._error is None:
                try:
                    self._write(chunk)
                except BaseException as exc:  # handed to the writing thread
                    self._error = exc

    def put(self, chunk: bytes) -> None:
        if self._error is not None:
            raise self._error
        self._queue.put(chunk)

    def __enter__(self) -> Callable[[bytes], None]:
        self._thread.start()
        return self.put

    def __exit__(self, *exc: object) -> None:
        self._queue.put(None)
        self._thread.join()
        if self._error is not None and exc[0] is None:
            raise self._error


def _n_formats(styles: StyleBook) -> int:
    return sum(len(sec.added) for sec in styles.sections.values())


def _write(pkg: _Package, plan: _Plan, tmp: Path) -> None:
    assert plan.styles is not None
    styler = CellStyler(plan.styles, FILLS)
    infos = pkg.zin.infolist()
    order = [i.filename for i in infos]
    last_job = max((order.index(p) for p in plan.jobs), default=-1)
    styles_info: zipfile.ZipInfo | None = None
    with zipfile.ZipFile(tmp, "w", compression=zipfile.ZIP_DEFLATED, allowZip64=True) as zout:
        out = _Out(pkg.zin, zout)
        for k, info in enumerate(infos):
            name = info.filename
            if name in plan.dropped:
                continue
            if name in plan.jobs:
                out.stream(plan.jobs[name], info, styler, pkg.file)
            elif name == plan.styles_part:
                if k > last_job:
                    out.put(name, plan.styles.render(), info)
                else:
                    styles_info = info
                    continue
            elif name in plan.replaced:
                out.put(name, plan.replaced[name], info)
            else:
                copy_raw(pkg.zin, zout, info)
            if k == last_job and styles_info is not None:
                out.put(styles_info.filename, plan.styles.render(), styles_info)
                styles_info = None
        if plan.styles_part not in pkg.names:
            out.put(plan.styles_part, plan.styles.render(), None)
        formats = _n_formats(plan.styles)
        for name, data in plan.added.items():
            out.put(name, data, None)
        if _n_formats(plan.styles) != formats:  # a part made late asked for a new cell format
            raise WriteError("internal: a new part needed a cell format after the styles part "
                             "was written; nothing was written", file=pkg.file)


def write_annotated(
    src: Path,
    dst: Path,
    *,
    additions: Sequence[SheetAddition] = (),
    notes: Sequence[CellNote] = (),
    new_sheets: Sequence[NewSheet] = (),
    cell_values: Sequence[CellValue] = (),
    force: bool = False,
) -> None:
    """Write ``dst``: the workbook ``src`` with the additions, notes and new sheets, and
    the new values of existing formula cells (``cell_values``, see :class:`CellValue`).

    Raises :class:`WriteError` (nothing written) for inputs that cannot be annotated:
    other file types, encrypted or Strict Open XML workbooks, unknown sheets, taken sheet
    names, added cells landing on occupied or merged cells, a cell value for a cell that
    holds no formula (or for the master of a multi-cell array formula, when replaced),
    an existing ``dst`` without ``force``; :class:`ReadError` for a damaged package.
    """
    src, dst = Path(src), Path(dst)
    _check_kind(src, dst)
    try:
        zin = zipfile.ZipFile(src)
    except (zipfile.BadZipFile, OSError) as exc:
        raise ReadError(f"cannot open the workbook package ({exc})", file=str(src)) from exc
    with zin:
        if any(i.flag_bits & 0x1 for i in zin.infolist()):
            raise WriteError("the package has encrypted zip entries", file=str(src))
        check_zip(src, zin, Limits())
        pkg = _Package(src, zin)
        plan = _plan(pkg, additions, notes, new_sheets, cell_values)
        with atomic_output(dst, force=force, inputs=[src]) as tmp:
            try:
                _write(pkg, plan, tmp)
            except zipfile.BadZipFile as exc:
                raise ReadError(f"damaged workbook package ({exc})", file=str(src)) from exc
