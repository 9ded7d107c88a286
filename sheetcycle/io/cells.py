"""The low-level workbook reader: every cell value of every sheet, and formula cells.

``.xlsx``/``.xlsm`` worksheets are stream-scanned here (zip member → regular expressions
over chunks of the sheet XML): values, shared and inline strings, booleans, errors and
formulas, with shared formulas expanded to each cell's own text. This is about as fast as
python-calamine and, unlike it, sees the formulas (see tests/bench/bench_read.py).

Cached formula values are used only when they can be trusted (see :func:`_cache_policy`);
otherwise the formulas are evaluated (:mod:`sheetcycle.io.evaluate`). ``.xls`` and
``.ods`` files are read through python-calamine (cached values only); ``.csv`` files with
the csv module (values stay text).
"""

from __future__ import annotations

import csv
import datetime as dt
import io
import os
import posixpath
import re
import zipfile
import zlib
from collections.abc import Iterator
from dataclasses import dataclass, field
from pathlib import Path

from sheetcycle.errors import ReadError
from sheetcycle.io.evaluate import CIRCULAR, CellError, col_index, evaluate_cells
from sheetcycle.io.evaluate import _Shifter as Shifter
from sheetcycle.io.safety import (
    OPTIONS,
    Limits,
    check_xml_head,
    check_zip,
    open_member,
    read_member,
    safe_parser,
)

__all__ = [
    "CIRCULAR",
    "CellError",
    "FormulaCell",
    "Limits",
    "SheetCells",
    "WorkbookCells",
    "read_cells",
]


@dataclass(frozen=True)
class FormulaCell:
    """One formula cell: its text, its cached value and the value used downstream."""

    row: int  # 0-based
    col: int  # 0-based
    formula: str  # with leading '='; shared formulas expanded to this cell's own text
    cached: object  # the cached <v> value as read, None when absent or empty
    value: object  # cached when trusted, else evaluated (may be a CellError)
    evaluated: bool  # True when `value` came from evaluation


@dataclass
class SheetCells:
    """All values of one sheet as a ragged row-major grid (0-based)."""

    name: str
    rows: list[list[object]]
    formulas: dict[tuple[int, int], FormulaCell] = field(default_factory=dict)
    merged: list[str] = field(default_factory=list)

    def value(self, row: int, col: int) -> object:
        """The value at a 0-based position, None outside the grid."""
        if row < len(self.rows):
            r = self.rows[row]
            if col < len(r):
                return r[col]
        return None


@dataclass
class WorkbookCells:
    """Every sheet of one workbook file."""

    path: str
    format: str  # 'xlsx', 'xlsm', 'xls', 'ods', 'csv'
    sheets: list[SheetCells]
    cache_trusted: bool
    cache_reason: str
    defined_names: dict[str, str] = field(default_factory=dict)

    def sheet(self, name: str) -> SheetCells:
        for s in self.sheets:
            if s.name == name:
                return s
        raise KeyError(name)


_EXTENSIONS = {
    ".xlsx": "xlsx",
    ".xltx": "xlsx",
    ".xlsm": "xlsm",
    ".xltm": "xlsm",
    ".xls": "xls",
    ".ods": "ods",
    ".csv": "csv",
    ".tsv": "csv",
    ".txt": "csv",
}
_OLE_MAGIC = b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1"
_STRICT_NS = "http://purl.oclc.org/ooxml/"
_REL_NS = "http://schemas.openxmlformats.org/package/2006/relationships"
_R_NS = "http://schemas.openxmlformats.org/officeDocument/2006/relationships"
_ERRORS = {
    code: CellError(code)
    for code in (
        "#NULL!",
        "#DIV/0!",
        "#VALUE!",
        "#REF!",
        "#NAME?",
        "#NUM!",
        "#N/A",
        "#GETTING_DATA",
        "#SPILL!",
        "#CALC!",
    )
}
_EPOCH = dt.datetime(1899, 12, 30)
#: The size of a worksheet (ECMA-376 allows rows 1..1,048,576 and columns A..XFD).
MAX_ROWS = 1_048_576
MAX_COLS = 16_384

# Applications that calculate a workbook before saving it, so their cached values match
# the formulas (docProps/app.xml <Application>). Compared case-insensitively by prefix.
_CALCULATING_APPS = (
    "microsoft excel",
    "microsoft macintosh excel",
    "libreoffice",
    "openoffice",
)


def read_cells(
    path: str | os.PathLike[str],
    *,
    limits: Limits | None = None,
    evaluate: bool = True,
    verify: bool = False,
) -> WorkbookCells:
    """Read every cell of every sheet of a workbook file.

    ``evaluate=False`` skips evaluation: formula cells whose cache is not trusted get
    ``value=None``. ``verify=True`` evaluates every formula cell even where the cached
    value is trusted; ``value`` is then the evaluated value (``cached`` keeps the cached
    one, so callers can flag differences), except where evaluation is not supported.
    Raises :class:`ReadError` with one plain message when the file cannot be read.
    """
    limits = limits or Limits()
    file = os.fspath(path)
    p = Path(file)
    fmt = _EXTENSIONS.get(p.suffix.lower())
    if fmt is None:
        raise ReadError(
            "has an unsupported file type",
            file=file,
            expected="one of .xlsx, .xlsm, .xls, .ods, .csv",
            found=p.suffix or "(no extension)",
        )
    if not p.is_file():
        raise ReadError("file not found" if not p.exists() else "is not a file", file=file)
    with open(p, "rb") as fh:
        head = fh.read(8)
    if head == _OLE_MAGIC:
        if _ole_is_encrypted(p):
            raise ReadError(
                "is encrypted (password-protected); save an unprotected copy", file=file
            )
        if fmt in ("xlsx", "xlsm"):
            fmt = "xls"  # a legacy binary workbook with a new-style name
    if fmt == "csv":
        return _read_csv(p, limits)
    if fmt == "ods" and head.startswith(b"PK"):
        try:
            with zipfile.ZipFile(p) as zf:
                check_zip(file, zf, limits)
        except zipfile.BadZipFile as exc:
            raise ReadError(
                "is damaged or truncated (its zip structure is broken)", file=file
            ) from exc
    if fmt in ("xls", "ods"):
        return _read_calamine(p, fmt)
    try:
        with zipfile.ZipFile(p) as zf:
            check_zip(file, zf, limits)
            return _XlsxReader(file, fmt, zf, limits, evaluate, verify).read()
    except ReadError:
        raise
    except zipfile.BadZipFile as exc:
        if "for file" in str(exc):  # a member that does not unpack to what its headers say
            raise ReadError(
                f"is damaged or truncated ({exc}: the entry does not unpack to what its "
                "zip headers declare)",
                file=file,
            ) from exc
        if head.startswith(b"PK"):
            raise ReadError(
                "is damaged or truncated (its zip structure is broken)", file=file
            ) from exc
        raise ReadError("is not an xlsx workbook (not a zip package)", file=file) from exc
    except (EOFError, zlib.error, zipfile.LargeZipFile) as exc:
        raise ReadError(
            "is damaged or truncated (a zip entry cannot be unpacked)", file=file
        ) from exc
    except KeyError as exc:
        raise ReadError(f"is missing a required workbook part ({exc.args[0]})", file=file) from exc
    except (ValueError, UnicodeDecodeError) as exc:
        raise ReadError(f"has a part that is not well-formed: {exc}", file=file) from exc


def _ole_is_encrypted(p: Path) -> bool:
    """An OLE compound file holding an OOXML package encrypted with a password.

    Its directory names a stream "EncryptionInfo" (names are stored as UTF-16LE).
    """
    marker = "EncryptionInfo".encode("utf-16-le")
    tail = b""
    with open(p, "rb") as fh:
        while chunk := fh.read(1 << 20):
            if marker in tail + chunk:
                return True
            tail = chunk[-len(marker) :]
    return False


# --------------------------------------------------------------------------- xlsx

_XML_ENT = re.compile(r"&(#x[0-9A-Fa-f]+|#\d+|lt|gt|amp|quot|apos);")
_ENT_MAP = {"lt": "<", "gt": ">", "amp": "&", "quot": '"', "apos": "'"}
_XSTR = re.compile(r"_x([0-9A-Fa-f]{4})_")


def _ent(m: re.Match[str]) -> str:
    e = m.group(1)
    if e[0] == "#":
        return chr(int(e[2:], 16) if e[1] in "xX" else int(e[1:]))
    return _ENT_MAP[e]


def _unescape(s: str) -> str:
    return _XML_ENT.sub(_ent, s) if "&" in s else s


def _unx(s: str) -> str:
    """Decode OOXML's ``_xHHHH_`` escapes in string values."""
    return _XSTR.sub(lambda m: chr(int(m.group(1), 16)), s) if "_x" in s else s


def _attr(attrs: str, name: str) -> str | None:
    i = attrs.find(f" {name}=")
    if i < 0:
        m = re.search(rf"\s{name}\s*=\s*[\"']([^\"']*)", attrs)
        return m.group(1) if m else None
    j = i + len(name) + 2
    q = attrs[j : j + 1]
    k = attrs.find(q, j + 1)
    return attrs[j + 1 : k]


class _XlsxReader:
    def __init__(
        self,
        file: str,
        fmt: str,
        zf: zipfile.ZipFile,
        limits: Limits,
        evaluate: bool,
        verify: bool,
    ) -> None:
        self.file = file
        self.fmt = fmt
        self.zf = zf
        self.limits = limits
        self.evaluate = evaluate
        self.verify = verify
        self.names = set(zf.namelist())
        self.cells_left = limits.max_cells  # grid cells all sheets may still take

    # -- package structure ------------------------------------------------------------
    def _xml(self, part: str):
        from lxml import etree

        data = read_member(self.zf, part, self.limits, file=self.file)
        try:
            return etree.fromstring(data, safe_parser(huge=len(data) > 8_000_000))
        except etree.XMLSyntaxError as exc:
            raise ReadError(f"part {part!r} is not well-formed XML: {exc}", file=self.file) from exc

    def _rels(self, part: str) -> dict[str, tuple[str, str]]:
        """{rId: (type, target part path)} of one part's relationships."""
        folder, base = posixpath.split(part)
        rels_part = posixpath.join(folder, "_rels", base + ".rels")
        if rels_part not in self.names:
            return {}
        out = {}
        for rel in self._xml(rels_part):
            if rel.get("TargetMode") == "External":
                continue
            target = rel.get("Target", "")
            if target.startswith("/"):
                resolved = target.lstrip("/")
            else:
                resolved = posixpath.normpath(posixpath.join(folder, target))
            out[rel.get("Id", "")] = (rel.get("Type", ""), resolved)
        return out

    def read(self) -> WorkbookCells:
        if "_rels/.rels" not in self.names:
            raise ReadError(
                "is a zip file but not an xlsx workbook (no package relationships)", file=self.file
            )
        root_rels = self._rels("")
        wb_part = None
        app_part = None
        for rtype, target in root_rels.values():
            if rtype.startswith(_STRICT_NS):
                raise ReadError(
                    "is saved as Strict Open XML, which is not supported; "
                    "save it as an ordinary Excel workbook (.xlsx)",
                    file=self.file,
                )
            if rtype.endswith("/officeDocument"):
                wb_part = target
            elif rtype.endswith("/extended-properties"):
                app_part = target
        if wb_part is None or wb_part not in self.names:
            raise ReadError(
                "is a zip file but not an xlsx workbook (no workbook part)", file=self.file
            )
        wb = self._xml(wb_part)
        ns = wb.nsmap.get(wb.prefix) if wb.tag.startswith("{") else ""
        if ns and ns.startswith(_STRICT_NS):
            raise ReadError(
                "is saved as Strict Open XML, which is not supported; "
                "save it as an ordinary Excel workbook (.xlsx)",
                file=self.file,
            )
        q = f"{{{ns}}}" if ns else ""
        rels = self._rels(wb_part)
        sheets_el = wb.find(q + "sheets")
        entries: list[tuple[str, str]] = []
        for s in sheets_el if sheets_el is not None else []:
            rid = s.get(f"{{{_R_NS}}}id") or ""
            rtype, target = rels.get(rid, ("", ""))
            if rtype.endswith("/worksheet") and target in self.names:
                entries.append((s.get("name", ""), target))
        if not entries:
            raise ReadError("has no worksheets (an empty workbook)", file=self.file)
        sheet_names = [n for n, _ in entries]

        defined: dict[str, str] = {}
        dn_el = wb.find(q + "definedNames")
        for d in dn_el if dn_el is not None else []:
            name = d.get("name")
            if not name or d.text is None:
                continue
            local = d.get("localSheetId")
            if local is not None and local.isdigit() and int(local) < len(sheet_names):
                name = f"{sheet_names[int(local)]}!{name}"
            defined[name] = d.text
        calc = wb.find(q + "calcPr")
        full_calc = calc is not None and calc.get("fullCalcOnLoad") in ("1", "true")
        app = self._application(app_part)
        trusted, reason = _cache_policy(app, full_calc)

        sst: list[str] = []
        for rtype, target in rels.values():
            if rtype.endswith("/sharedStrings") and target in self.names:
                sst = self._shared_strings(target)

        out: list[SheetCells] = []
        pending: list[tuple[SheetCells, _Raw]] = []
        for name, part in entries:
            sheet, raw = self._sheet(name, part, sst)
            out.append(sheet)
            pending.append((sheet, raw))
        self._settle(out, pending, trusted, defined)
        return WorkbookCells(self.file, self.fmt, out, trusted, reason, defined)

    def _application(self, part: str | None) -> str | None:
        part = part or "docProps/app.xml"
        if part not in self.names:
            return None
        data = read_member(self.zf, part, self.limits, file=self.file).decode("utf-8", "replace")
        m = re.search(r"<(?:\w+:)?Application>([^<]*)</", data)
        return _unescape(m.group(1)).strip() if m else None

    def _shared_strings(self, part: str) -> list[str]:
        from lxml import etree

        with open_member(self.zf, part, self.limits, file=self.file) as stream:
            head = stream.read(4096)
            check_xml_head(head, part, file=self.file)
            data = io.BufferedReader(_Prepend(head, stream), 1 << 16)
            strings: list[str] = []
            append = strings.append
            ctx = etree.iterparse(
                data,
                events=("end",),
                resolve_entities=False,
                no_network=True,
                load_dtd=False,
                huge_tree=True,
            )
            try:
                for _, el in ctx:
                    tag = el.tag
                    if not isinstance(tag, str) or (not tag.endswith("}si") and tag != "si"):
                        continue
                    parts = []
                    for t in el.iter():
                        if isinstance(t.tag, str) and (t.tag.endswith("}t") or t.tag == "t"):
                            parent = t.getparent()
                            if parent is not None and parent.tag.endswith("rPh"):
                                continue
                            if t.text:
                                parts.append(t.text)
                    append(_unx("".join(parts)))
                    el.clear()
            except etree.XMLSyntaxError as exc:
                raise ReadError(
                    f"part {part!r} is not well-formed XML: {exc}", file=self.file
                ) from exc
        return strings

    # -- worksheets ------------------------------------------------------------------
    def _sheet(self, name: str, part: str, sst: list[str]) -> tuple[SheetCells, _Raw]:
        rows: list[list[object]] = []
        raw = _Raw()
        merged: list[str] = []
        with open_member(self.zf, part, self.limits, file=self.file) as stream:
            head = stream.read(1 << 16)
            check_xml_head(head, part, file=self.file)
            m = re.search(rb"<(\w+:)?worksheet\b", head)
            prefix = (m.group(1) or b"").decode("ascii") if m else ""
            scanner = _Scanner(rows, raw, sst, prefix, self.file, name)
            scanner.cells_left, scanner.max_cells = self.cells_left, self.limits.max_cells
            for text in _chunks(stream, head, f"</{prefix}row>".encode("ascii")):
                scanner.feed(text, merged)
            self.cells_left = scanner.cells_left
        while rows and not rows[-1]:
            rows.pop()
        return SheetCells(name, rows, {}, merged), raw

    def _settle(
        self,
        sheets: list[SheetCells],
        pending: list[tuple[SheetCells, _Raw]],
        trusted: bool,
        defined: dict[str, str],
    ) -> None:
        """Decide each formula cell's value: its trusted cache, or evaluation."""
        targets: list[tuple[str, int, int, str]] = []
        for sheet, raw in pending:
            for r, c, formula, cached in raw.formulas:
                use_cache = trusted and cached is not None
                if use_cache and not self.verify:
                    continue
                if self.evaluate and formula:
                    targets.append((sheet.name, r, c, formula))
                elif not use_cache:
                    _set(sheet.rows, r, c, None)
        results: dict[tuple[str, int, int], object] = {}
        if targets:
            grids = {s.name: s.rows for s in sheets}
            results = evaluate_cells(grids, targets, names=defined)
        for sheet, raw in pending:
            cells = sheet.formulas
            for r, c, formula, cached in raw.formulas:
                key = (sheet.name, r, c)
                if key in results:
                    value = results[key]
                    unsupported = (
                        isinstance(value, CellError) and value.code == "#NAME?" and value.reason
                    )
                    if unsupported and trusted and cached is not None:
                        _set(sheet.rows, r, c, cached)
                        cells[(r, c)] = FormulaCell(r, c, formula, cached, cached, False)
                    else:
                        cells[(r, c)] = FormulaCell(r, c, formula, cached, value, True)
                elif trusted and cached is not None:
                    cells[(r, c)] = FormulaCell(r, c, formula, cached, cached, False)
                else:
                    cells[(r, c)] = FormulaCell(r, c, formula, cached, None, False)


def _cache_policy(app: str | None, full_calc: bool) -> tuple[bool, str]:
    if full_calc:
        return False, (
            "the workbook asks to be recalculated on opening (fullCalcOnLoad), so its "
            "cached formula values may be placeholders; formulas are evaluated"
        )
    if app is None:
        return False, (
            "the workbook does not say which application saved it, so its cached formula "
            "values may never have been calculated; formulas are evaluated"
        )
    if app.lower().startswith(_CALCULATING_APPS):
        return True, f"last saved by {app}, which calculates formulas before saving"
    return False, (
        f"last saved by {app!r}, which is not known to calculate formulas before saving; "
        "formulas are evaluated"
    )


class _Raw:
    """Formula cells found while scanning a sheet: (row, col, formula, cached)."""

    __slots__ = ("formulas",)

    def __init__(self) -> None:
        self.formulas: list[tuple[int, int, str, object]] = []


class _Prepend(io.RawIOBase):
    def __init__(self, head: bytes, rest: io.RawIOBase) -> None:
        super().__init__()
        self._head = head
        self._rest = rest

    def readable(self) -> bool:
        return True

    def readinto(self, buffer: memoryview | bytearray) -> int:  # type: ignore[override]
        if self._head:
            n = min(len(buffer), len(self._head))
            buffer[:n] = self._head[:n]
            self._head = self._head[n:]
            return n
        data = self._rest.read(len(buffer))
        buffer[: len(data)] = data
        return len(data)


def _chunks(
    stream: io.RawIOBase, head: bytes, marker: bytes, size: int = 4 << 20
) -> Iterator[bytes]:
    """The bytes of a sheet part in pieces that each end just after a ``</row>``.

    A ``</row>`` cannot occur inside text (a '<' there is always escaped), so no cell is
    ever split between two pieces; the last piece is whatever follows the last row.
    """
    carry = head
    while True:
        data = stream.read(size)
        if not data:
            if carry:
                yield carry
            return
        buf = carry + data
        cut = buf.rfind(marker)
        if cut < 0:
            carry = buf
            continue
        cut += len(marker)
        carry = buf[cut:]
        yield buf[:cut]


def _set(rows: list[list[object]], r: int, c: int, v: object) -> None:
    while len(rows) <= r:
        rows.append([])
    row = rows[r]
    n = len(row)
    if c == n:
        row.append(v)
    elif c > n:
        row.extend([None] * (c - n))
        row.append(v)
    else:
        row[c] = v


class _Scanner:
    """Regular-expression scan of <row>/<c> elements over bytes, chunk by chunk.

    The common cells (``<c r="B2" s="1"><v>1.5</v></c>``) are handled inline in
    :meth:`feed`; anything else (formulas, inline strings, odd layouts) goes through
    :meth:`_slow`.
    """

    def __init__(
        self,
        rows: list[list[object]],
        raw: _Raw,
        sst: list[str],
        prefix: str,
        file: str,
        sheet: str,
    ) -> None:
        p = re.escape(prefix)
        self.cell_re = re.compile(
            (
                rf'<{p}(?:c r="([A-Z]{{1,3}})(\d+)"([^>/]*)(?:/>|>'
                rf"(?:<{p}v>([^<]*)</{p}v>|<{p}is><{p}t>([^<]*)</{p}t></{p}is>|(.*?))</{p}c>)"
                rf"|(row)\b([^>]*?)/?>"
                rf"|c\b([^>/]*)>(.*?)</{p}c>"
                rf"|c\b[^>]*/>)"
            ).encode(),
            re.S,
        )
        self.fast_re = re.compile(
            (
                rf'<{p}c r="([A-Z]{{1,3}})(\d+)"([^>/]*)(?:/>|>'
                rf"(?:<{p}v>([^<]*)</{p}v>|<{p}is><{p}t>([^<]*)</{p}t></{p}is>|(.*?))</{p}c>)"
            ).encode(),
            re.S,
        )
        self.c_space = f"<{prefix}c ".encode()
        self.c_bare = f"<{prefix}c>".encode()
        self.f_re = re.compile(rf"<{p}f\b([^>]*?)(?:/>|>(.*?)</{p}f>)", re.S)
        self.v_re = re.compile(rf"<{p}v(?:\s[^>]*)?(?:/>|>(.*?)</{p}v>)", re.S)
        self.t_re = re.compile(rf"<{p}t(?:\s[^>]*)?(?:/>|>(.*?)</{p}t>)", re.S)
        self.rph_re = re.compile(rf"<{p}rPh\b.*?</{p}rPh>", re.S)
        self.merge_re = re.compile(rf'<{p}mergeCell\b[^>]*?ref="([^"]+)"'.encode())
        self.f_tag = f"<{prefix}f"
        self.row_end = f"</{prefix}row>".encode()
        self.row_open = f"<{prefix}row".encode()
        self.rows = rows
        self.raw = raw
        self.sst = sst
        self.file = file
        self.sheet = sheet
        self.shared: dict[str, tuple[int, int, Shifter]] = {}
        self.cols: dict[bytes, int] = _COLS
        self.row = -1  # current 0-based row
        self.col = -1  # last 0-based column
        self.digits = b""
        self.row_attrs: bytes | None = None  # attributes of a <row> not yet applied
        self.cells_left = Limits().max_cells  # grid cells (blanks filled in included)
        self.max_cells = self.cells_left
        self.inline: dict[bytes, str] = {}  # inline string XML -> its text

    def _grow(self, row: int, col: int) -> None:
        """Add blank rows up to 0-based ``row`` (which must be on a worksheet)."""
        rows = self.rows
        if not 0 <= row < MAX_ROWS:
            raise self._beyond(row, col)
        self._spend(row + 1 - len(rows))
        rows.extend([] for _ in range(row + 1 - len(rows)))

    def _beyond(self, row: int, col: int) -> ReadError:
        where = f"{_letters(col)}{row + 1}" if 0 <= col < MAX_COLS and row >= 0 else None
        return ReadError(
            "has a cell outside the worksheet grid",
            file=self.file,
            sheet=self.sheet,
            cell=where,
            expected=f"rows 1 to {MAX_ROWS:,} and columns A to XFD ({MAX_COLS:,})",
            found=f"row {row + 1:,}, column {col + 1:,}",
        )

    def _spend(self, n: int) -> None:
        self.cells_left -= n
        if self.cells_left < 0:
            raise ReadError(
                f"has more than {self.max_cells:,} cells (blank cells between filled ones "
                "included), more than can be read safely "
                f"(raise it with {OPTIONS['max_cells']} if the file is trusted)",
                file=self.file,
                sheet=self.sheet,
            )

    def _bad_value(self, exc: Exception, row: int, col: int) -> ReadError:
        where = f"{_letters(col)}{row + 1}" if 0 <= col < MAX_COLS and row >= 0 else None
        what = "a shared string that does not exist" if isinstance(exc, IndexError) else exc
        return ReadError(
            f"has a cell that cannot be read ({what})",
            file=self.file,
            sheet=self.sheet,
            cell=where,
        )

    def feed(self, text: bytes, merged: list[str]) -> None:
        """Scan one piece of sheet XML (ending at a row end) into the grid.

        Row by row: the piece is split at each ``</row>``; a row whose cells all carry
        their reference goes through list comprehensions, one value per cell.
        """
        rows = self.rows
        cols = self.cols
        findall = self.fast_re.findall
        c_space, c_bare = self.c_space, self.c_bare
        row_open = self.row_open
        value_of = self._cell
        for piece in text.split(self.row_end):
            i = piece.rfind(row_open)
            if i < 0:
                continue  # what follows the last row (or a piece with no rows)
            j = piece.find(b">", i)
            if piece[j - 1 : j] == b"/":
                continue  # empty rows after the last row
            cells = findall(piece, j + 1)
            if not cells:
                # cells without a reference, or none at all (keep count of rows)
                self._general(piece)
                continue
            first = cells[0]
            if len(cells) != piece.count(c_space, j) or c_bare in piece:
                self._general(piece)  # some cell carries no reference
                continue
            row = int(first[1]) - 1
            try:
                values = [
                    float(v) if v and b't="' not in a else value_of(a, v, istr, inner, ll, d)
                    for ll, d, a, v, istr, inner in cells
                ]
            except (ValueError, IndexError) as exc:
                self._general(piece)  # finds the cell and names it in the error
                raise self._bad_value(exc, row, -1) from exc
            try:
                dense = first[0] == b"A" and cols[cells[-1][0]] == len(cells) - 1
            except KeyError:
                dense = False
            if not 0 <= row < MAX_ROWS:
                raise self._beyond(row, 0)  # row 0 or negative would index from the end
            if len(rows) <= row:
                self._grow(row, 0)
            self.cells_left -= len(cells)
            if self.cells_left < 0:
                self._spend(0)
            if dense and not rows[row]:
                while values and values[-1] is None:
                    values.pop()
                rows[row] = values
            elif not rows[row] and (where := self._gapped(cells)) is not None:
                # a new row with blank columns between its cells, in order: one list
                rowlist = [None] * (where[-1] + 1)
                self._spend(len(rowlist) - len(cells))
                for c, value in zip(where, values, strict=True):
                    rowlist[c] = value
                while rowlist and rowlist[-1] is None:
                    rowlist.pop()
                rows[row] = rowlist
            else:
                rowlist = rows[row]
                for c, value in zip([self._colnum(x[0]) for x in cells], values, strict=True):
                    if value is None:
                        continue
                    n = len(rowlist)
                    if c == n:
                        rowlist.append(value)
                    elif c > n:
                        self._spend(c - n)
                        rowlist.extend([None] * (c - n))
                        rowlist.append(value)
                    else:
                        rowlist[c] = value
            self.row, self.col, self.digits, self.row_attrs = row, -1, first[1], None
        if b"mergeCell" in text:
            merged.extend(m.decode() for m in self.merge_re.findall(text))

    def _gapped(self, cells: list[tuple[bytes, ...]]) -> list[int] | None:
        """The 0-based columns of a row's cells when they rise strictly (else None)."""
        cols = self.cols
        try:
            where = [cols[x[0]] for x in cells]
        except KeyError:
            where = [self._colnum(x[0]) for x in cells]
        last = -1
        for c in where:
            if c <= last:
                return None
            last = c
        return where

    def _colnum(self, letters: bytes) -> int:
        c = self.cols.get(letters)
        if c is None:
            c = col_index(letters.decode())
            if c >= MAX_COLS:
                raise self._beyond(max(self.row, 0), c)
            self.cols[letters] = c
        return c

    def _cell(
        self, attrs: bytes, v: bytes, istr: bytes, inner: bytes, letters: bytes, digits: bytes
    ) -> object:
        """The value of one cell that is not a plain number."""
        if istr and not v:
            # an inline string: a column of them repeats a few texts, kept once each
            got = self.inline.get(istr)
            if got is None:
                value = istr.decode("utf-8")
                got = _unx(_unescape(value)) if "&" in value or "_x" in value else value
                if len(self.inline) < 65536:
                    self.inline[istr] = got
            return got
        row = int(digits) - 1
        col = self._colnum(letters)
        if v:
            i = attrs.index(b' t="') + 4
            t = attrs[i : attrs.index(b'"', i)]
            if t != b"s":
                return self._typed(t, v, row, col)
            try:
                return self.sst[int(v)]
            except (ValueError, IndexError) as exc:
                raise self._bad_value(exc, row, col) from exc
        if inner:
            return self._slow(row, col, attrs, inner)
        return None

    def _general(self, text: bytes) -> None:
        """Cell by cell, for rows with cells that carry no reference (and odd layouts)."""
        rows = self.rows
        cols = self.cols
        sst = self.sst
        row = self.row
        rowlist: list[object] = rows[row] if 0 <= row < len(rows) else []
        col = self.col
        last_digits = self.digits
        row_attrs = self.row_attrs
        try:
            self._general_cells(text, rows, cols, sst, row, rowlist, col, last_digits, row_attrs)
        except (ValueError, IndexError) as exc:
            raise self._bad_value(exc, self.row, self.col) from exc

    def _general_cells(
        self,
        text: bytes,
        rows: list[list[object]],
        cols: dict[bytes, int],
        sst: list[str],
        row: int,
        rowlist: list[object],
        col: int,
        last_digits: bytes,
        row_attrs: bytes | None,
    ) -> None:
        """The loop of :meth:`_general`; ``self.row``/``self.col`` follow each cell, so an
        error names it."""
        for (
            letters,
            digits,
            attrs,
            v,
            istr,
            inner,
            is_row,
            rattrs,
            attrs2,
            inner2,
        ) in self.cell_re.findall(text):
            if letters:
                if digits != last_digits:
                    last_digits = digits
                    row = int(digits) - 1
                    if len(rows) <= row or row < 0:
                        self._grow(row, 0)
                    rowlist = rows[row]
                    row_attrs = None
                try:
                    c = cols[letters]
                except KeyError:
                    c = self._colnum(letters)
                col = c
                self.row, self.col = row, col
                if v:
                    if attrs and b' t="' in attrs:
                        i = attrs.index(b' t="') + 4
                        t = attrs[i : attrs.index(b'"', i)]
                        value: object = sst[int(v)] if t == b"s" else self._typed(t, v, row, c)
                        if value is None:
                            continue
                    else:
                        value = float(v)
                elif istr:
                    value = istr.decode("utf-8")
                    if "&" in value or "_x" in value:
                        value = _unx(_unescape(value))
                elif inner:
                    value = self._slow(row, c, attrs, inner)
                    if value is None:
                        continue
                else:
                    continue
            elif is_row:
                row_attrs = rattrs
                col = -1
                continue
            elif inner2:
                ref = _attr(attrs2.decode(), "r")
                if ref:
                    m = re.fullmatch(r"\$?([A-Za-z]{1,3})\$?(\d+)", ref)
                    if m is None:
                        raise ReadError(
                            f"has a cell with a bad reference {ref!r}",
                            file=self.file,
                            sheet=self.sheet,
                        )
                    col = col_index(m.group(1))
                    row = int(m.group(2)) - 1
                    if col >= MAX_COLS:
                        raise self._beyond(row, col)
                else:
                    if row_attrs is not None:
                        r_attr = _attr(row_attrs.decode(), "r")
                        row = int(r_attr) - 1 if r_attr else row + 1
                        row_attrs = None
                    col += 1
                    if col >= MAX_COLS:
                        raise self._beyond(row, col)
                last_digits = b""
                if len(rows) <= row or row < 0:
                    self._grow(row, col)
                rowlist = rows[row]
                c = col
                self.row, self.col = row, col
                value = self._slow(row, c, attrs2, inner2)
                if value is None:
                    continue
            else:
                continue  # a styled blank <c .../>
            n = len(rowlist)
            self.cells_left -= 1
            if c == n:
                rowlist.append(value)
            elif c > n:
                self._spend(c - n)
                rowlist.extend([None] * (c - n))
                rowlist.append(value)
            else:
                rowlist[c] = value
            if self.cells_left < 0:
                self._spend(0)
        self.row, self.col, self.digits, self.row_attrs = row, col, last_digits, row_attrs

    def _typed(self, t: bytes, v: bytes, row: int, col: int) -> object:
        try:
            return self._value(t.decode(), v.decode("utf-8"))
        except (ValueError, IndexError) as exc:
            raise ReadError(
                f"has a cell that cannot be read ({exc})",
                file=self.file,
                sheet=self.sheet,
                cell=f"{_letters(col)}{row + 1}",
            ) from exc

    def _value(self, t: str | None, text: str | None) -> object:
        """A cell's value from its type attribute and <v> text."""
        if text is None or text == "":
            return None
        if t is None or t == "n":
            return float(text)
        if t == "s":
            return self.sst[int(text)]
        if t == "str":
            return _unx(_unescape(text))
        if t == "b":
            return text.strip() in ("1", "true")
        if t == "e":
            code = _unescape(text)
            return _ERRORS.get(code) or CellError(code)
        if t == "d":
            try:
                return (dt.datetime.fromisoformat(text) - _EPOCH).total_seconds() / 86400.0
            except ValueError:
                return text
        raise ReadError(f"has a cell of unknown type {t!r}", file=self.file, sheet=self.sheet)

    def _slow(self, row: int, col: int, attrs: bytes, inner: bytes) -> object:
        try:
            t = _attr(attrs.decode(), "t") if attrs else None
            return self._slow_inner(row, col, t, inner.decode("utf-8"))
        except (ValueError, IndexError) as exc:
            raise ReadError(
                f"has a cell that cannot be read ({exc})",
                file=self.file,
                sheet=self.sheet,
                cell=f"{_letters(col)}{row + 1}",
            ) from exc

    def _slow_inner(self, row: int, col: int, t: str | None, inner: str) -> object:
        if t == "inlineStr":
            body = self.rph_re.sub("", inner) if "rPh" in inner else inner
            texts = self.t_re.findall(body)
            if not texts:
                return None
            return _unx(_unescape("".join(texts)))
        mv = self.v_re.search(inner)
        vtext = mv.group(1) if mv else None
        if self.f_tag not in inner:
            return self._value(t, vtext)
        mf = self.f_re.search(inner)
        if mf is None:
            return self._value(t, vtext)
        fattrs, ftext = mf.group(1), mf.group(2)
        ftype = _attr(fattrs, "t") if fattrs else None
        cached = self._value(t, vtext)
        formula = _unescape(ftext) if ftext else ""
        if ftype == "shared":
            si = _attr(fattrs, "si") or ""
            if formula:
                self.shared[si] = (row, col, Shifter(formula))
            elif si in self.shared:
                mr, mc, shifter = self.shared[si]
                formula = shifter.shift(row - mr, col - mc)
        elif ftype == "dataTable":
            formula = ""  # what-if tables: keep the cached value
        if not formula:
            return cached
        self.raw.formulas.append((row, col, "=" + formula, cached))
        return cached


_COLS: dict[bytes, int] = {}  # column letters -> index, filled for A..ZZ below


def _fill_cols() -> None:
    from sheetcycle.io.evaluate import col_letters

    for i in range(702):
        _COLS[col_letters(i).encode()] = i


_fill_cols()


def _letters(col: int) -> str:
    from sheetcycle.io.evaluate import col_letters

    return col_letters(col)


# --------------------------------------------------------------------------- xls / ods


def _calamine_value(v: object) -> object:
    if isinstance(v, str):
        if v == "":
            return None
        return _ERRORS.get(v, v)
    if isinstance(v, bool):
        return v
    if isinstance(v, int | float):
        return float(v)
    if isinstance(v, dt.datetime):
        return (v - _EPOCH).total_seconds() / 86400.0
    if isinstance(v, dt.date):
        return float((v - _EPOCH.date()).days)
    if isinstance(v, dt.time):
        return (v.hour * 3600 + v.minute * 60 + v.second + v.microsecond / 1e6) / 86400.0
    if isinstance(v, dt.timedelta):
        return v.total_seconds() / 86400.0
    return v


def _read_calamine(p: Path, fmt: str) -> WorkbookCells:
    import python_calamine as pc

    file = str(p)
    try:
        wb = pc.CalamineWorkbook.from_path(file)
        metas = [m for m in wb.sheets_metadata if str(m.typ).endswith("WorkSheet")]
        sheets = []
        for m in metas:
            grid = wb.get_sheet_by_name(m.name).to_python(skip_empty_area=False)
            rows = []
            for r in grid:
                vals = [_calamine_value(v) for v in r]
                while vals and vals[-1] is None:
                    vals.pop()
                rows.append(vals)
            while rows and not rows[-1]:
                rows.pop()
            sheets.append(SheetCells(m.name, rows, {}, []))
    except pc.PasswordError as exc:
        raise ReadError(
            "is encrypted (password-protected); save an unprotected copy", file=file
        ) from exc
    except (pc.CalamineError, pc.XmlError, pc.ZipError, OSError, ValueError) as exc:
        raise ReadError(f"cannot be read as an .{fmt} workbook ({exc})", file=file) from exc
    if not sheets:
        raise ReadError("has no worksheets (an empty workbook)", file=file)
    reason = f"an .{fmt} file is read for its cached values only: formulas are not available"
    return WorkbookCells(file, fmt, sheets, True, reason, {})


# --------------------------------------------------------------------------- csv


def _read_csv(p: Path, limits: Limits) -> WorkbookCells:
    file = str(p)
    size = p.stat().st_size
    if size > limits.max_total_uncompressed:
        raise ReadError(
            f"is {size:,} bytes, more than the limit of {limits.max_total_uncompressed:,} "
            "(raise it with --max-unzipped-size if the file is trusted)",
            file=file,
        )
    data = p.read_bytes()
    if data.startswith((b"\xff\xfe", b"\xfe\xff")):
        text = data.decode("utf-16")
    else:
        try:
            text = data.decode("utf-8-sig")
        except UnicodeDecodeError:
            text = data.decode("cp1252", errors="replace")
    sample = text[:65536]
    try:
        delimiter = csv.Sniffer().sniff(sample, delimiters=",;\t").delimiter
    except csv.Error:
        delimiter = "\t" if p.suffix.lower() == ".tsv" else ","
    rows: list[list[object]] = []
    cells_left = limits.max_cells
    old_limit = csv.field_size_limit()
    csv.field_size_limit(max(old_limit, size + 1))  # one field may be the whole file
    try:
        for rec in csv.reader(io.StringIO(text, newline=""), delimiter=delimiter):
            vals: list[object] = [v if v != "" else None for v in rec]
            while vals and vals[-1] is None:
                vals.pop()
            rows.append(vals)
            cells_left -= len(vals) + 1
            if cells_left < 0 or len(rows) > MAX_ROWS:
                raise ReadError(
                    f"has more than {limits.max_cells:,} cells or {MAX_ROWS:,} rows, more "
                    f"than can be read safely (raise it with {OPTIONS['max_cells']} if the "
                    "file is trusted)",
                    file=file,
                )
    except csv.Error as exc:
        raise ReadError(
            f"cannot be read as CSV ({exc})", file=file, cell=f"line {len(rows) + 1}"
        ) from exc
    finally:
        csv.field_size_limit(old_limit)
    while rows and not rows[-1]:
        rows.pop()
    return WorkbookCells(
        file,
        "csv",
        [SheetCells(p.stem, rows, {}, [])],
        True,
        "a CSV file holds values only: there are no formulas",
        {},
    )
