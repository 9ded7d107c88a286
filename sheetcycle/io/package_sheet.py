"""Streaming edit of one worksheet part: new cells to the right, fills on noted cells,
new values of named formula cells.

The sheet XML is read in chunks and written row by row; no DOM is ever built, so a full
1,048,576-row sheet passes in bounded memory. Existing cells are copied byte for byte;
the only changes to existing cells are the ``s`` (format) attribute of a noted cell and
the cells a cell update names (see package_update: a new cached value under an unchanged
``<f>``, or the formula replaced by its value).
New cells are inserted in column order within their ``<row>``; rows that do not exist are
created in row order. ``spans``, ``<dimension>`` and ``<cols>`` are updated, and a
``<legacyDrawing>`` element is added when the notes need a new VML part.
"""

from __future__ import annotations

import bisect
import re
from collections.abc import Callable, Iterator
from dataclasses import dataclass, field
from typing import IO

from sheetcycle.errors import ReadError, WriteError
from sheetcycle.io.package_cells import CellStyler, ColumnCells, cell_xml
from sheetcycle.io.package_update import RewriteError, SharedPromotion, rewrite_cell
from sheetcycle.io.package_xml import (
    _NEEDS_ESCAPE,
    MAIN_NS,
    REL_NS,
    attr,
    col_index,
    col_letters,
    ns_prefix,
    parse_range,
    set_attr,
)

__all__ = ["ColumnJob", "SheetJob", "SheetRewriter", "find_cell_styles", "scan_tail"]

CHUNK = 1024 * 1024
_FAST_ROWS = 4096  # block rows whose added cells are made at once, a column at a time
_HUGE = 1.7976931348623157e308  # largest finite double
_INF = 1 << 62

# Children of <worksheet> that come after <legacyDrawing> (CT_Worksheet order).
_AFTER_LEGACY = {
    b"legacyDrawingHF",
    b"drawingHF",
    b"picture",
    b"oleObjects",
    b"controls",
    b"webPublishItems",
    b"tableParts",
    b"extLst",
}


@dataclass
class ColumnJob:
    """One added column, with its formats resolved."""

    col: int  # 0-based
    header: str
    cells: object  # Sequence[AddedCell]
    width: float
    number_xf: int
    header_xf: int


@dataclass
class SheetJob:
    """Everything to do to one existing worksheet part."""

    sheet: str
    part: str
    header_rows: dict[int, list[ColumnJob]] = field(default_factory=dict)
    blocks: list[tuple[int, int, list[ColumnJob]]] = field(default_factory=list)  # first, n, cols
    notes: dict[int, dict[int, str]] = field(default_factory=dict)  # row -> col -> fill rgb
    legacy_rid: str | None = None  # add <legacyDrawing r:id=...> with this id
    # row -> col -> (value, replace_formula): existing formula cells that get a new value
    updates: dict[int, dict[int, tuple[object, bool]]] = field(default_factory=dict)

    def columns(self) -> list[ColumnJob]:
        out = [c for cols in self.header_rows.values() for c in cols]
        return sorted({c.col: c for c in out}.values(), key=lambda c: c.col)

    def note_rows(self) -> list[int]:
        return sorted(self.notes)

    def rects(self, *, notes: bool = True) -> list[tuple[int, int, int, int]]:
        """Rectangles (row1, col1, row2, col2) that get new cells (or fills)."""
        out = []
        for row, cols in self.header_rows.items():
            out.append((row, min(c.col for c in cols), row, max(c.col for c in cols)))
        for first, n, cols in self.blocks:
            if n:
                out.append(
                    (first, min(c.col for c in cols), first + n - 1, max(c.col for c in cols))
                )
        for row, cols in (self.notes if notes else {}).items():
            for col in cols:
                out.append((row, col, row, col))
        return out


def _chunks(stream: IO[bytes]) -> Iterator[bytes]:
    while True:
        data = stream.read(CHUNK)
        if not data:
            return
        yield data


def _prefix(head: bytes) -> bytes:
    p = ns_prefix(head, MAIN_NS)
    return b"" if p is None else p


def scan_tail(stream: IO[bytes]) -> bytes:
    """The part of a sheet after </sheetData> (read through without keeping the rows)."""
    carry = b""
    tail: bytes | None = None
    p: bytes | None = None
    for chunk in _chunks(stream):
        if tail is not None:
            tail += chunk
            continue
        buf = carry + chunk
        if p is None:
            p = _prefix(buf[:65536])
        m = re.search(
            rb"</" + re.escape(p) + rb"sheetData>|<" + re.escape(p) + rb"sheetData\b[^>]*/>", buf
        )
        if m:
            tail = buf[m.end() :]
        else:
            carry = buf[-64:]
    return tail or b""


def legacy_drawing_id(tail: bytes) -> str | None:
    m = re.search(rb"<(?:[\w.-]+:)?legacyDrawing\b([^>]*)>", tail)
    if not m:
        return None
    rid = re.search(rb":id\s*=\s*[\"']([^\"']*)", m.group(1))
    return rid.group(1).decode() if rid else None


def find_cell_styles(stream: IO[bytes], refs: set[tuple[int, int]]) -> dict[tuple[int, int], int]:
    """The ``s`` of cells (row, col) in the first rows of a sheet; stops past the last."""
    found: dict[tuple[int, int], int] = {}
    if not refs:
        return found
    last_row = max(r for r, _ in refs)
    buf = b""
    p: bytes | None = None
    prev = 0
    for chunk in _chunks(stream):
        buf += chunk
        if p is None:
            p = _prefix(buf[:65536])
            row_re = _row_re(p)
        pos = 0
        for m in row_re.finditer(buf):
            pos = m.end()
            r_raw = attr(m.group(1), b"r")
            r = int(r_raw) if r_raw else prev + 1
            prev = r
            if r > last_row:
                return found
            if any(rr == r for rr, _ in refs) and m.group(2):
                for col, ts, te, _start, _end, _has in _scan_cells(m.group(2), p):
                    if (r, col) in refs:
                        s = attr(m.group(2)[ts:te], b"s")
                        found[(r, col)] = int(s) if s else 0
        buf = buf[pos:]
    return found


def _row_re(p: bytes) -> re.Pattern[bytes]:
    q = re.escape(p)
    return re.compile(rb"<" + q + rb"row(?=[\s>/])([^>]*?)(?:/>|>(.*?)</" + q + rb"row>)", re.S)


def _cell_re(p: bytes) -> re.Pattern[bytes]:
    return re.compile(rb"<" + re.escape(p) + rb"c(?=[\s>/])[^>]*?(/?)>")


_CELL_RES: dict[bytes, re.Pattern[bytes]] = {}
_CONTENT_RES: dict[bytes, re.Pattern[bytes]] = {}


def _scan_cells(body: bytes, p: bytes) -> list[tuple[int, int, int, int, int, bool]]:
    """(col, tag_start, tag_end, start, end, has_content) for each <c> in a row body."""
    cre = _CELL_RES.get(p) or _CELL_RES.setdefault(p, _cell_re(p))
    content = _CONTENT_RES.get(p) or _CONTENT_RES.setdefault(
        p, re.compile(rb"<" + re.escape(p) + rb"(?:v|f|is)\b")
    )
    close = b"</" + p + b"c>"
    out = []
    pos = 0
    col = -1
    while True:
        m = cre.search(body, pos)
        if not m:
            return out
        tag = m.group()
        r = attr(tag, b"r")
        col = col_index(re.sub(rb"[0-9$]", b"", r).decode()) if r else col + 1
        if m.group(1):
            end = m.end()
            has = False
        else:
            k = body.find(close, m.end())
            if k < 0:
                raise ReadError("a worksheet cell element is not closed", found=tag[:60].decode())
            end = k + len(close)
            has = content.search(body, m.end(), k) is not None
        out.append((col, m.start(), m.end(), m.start(), end, has))
        pos = end


class SheetRewriter:
    """Stream one worksheet part through, adding cells."""

    def __init__(self, job: SheetJob, styler: CellStyler, file: str) -> None:
        self.job = job
        self.styler = styler
        self.file = file
        self.p = b""
        self._ps = ""
        self._root = b""
        self.cols = job.columns()
        self.add_cols = {c.col for c in self.cols}
        self._letters = {c.col: col_letters(c.col) for c in self.cols}
        self._style_memo: dict[tuple[int, str | None, bool], int] = {}
        self._spans_memo: dict[bytes, bytes] = {}
        self._plain_s: dict[int, str] = {}
        self._shared = SharedPromotion(b"")  # set again once the prefix is known
        # target rows as sorted, merged half-open intervals [start, end)
        spans = [(r, r + 1) for r in job.header_rows]
        spans += [(first, first + n) for first, n, _ in job.blocks if n]
        spans += [(r, r + 1) for r in job.notes]
        spans += [(r, r + 1) for r in job.updates]
        spans.sort()
        merged: list[list[int]] = []
        for a, b in spans:
            if merged and a <= merged[-1][1]:
                merged[-1][1] = max(merged[-1][1], b)
            else:
                merged.append([a, b])
        self._starts = [a for a, _ in merged]
        self._ends = [b for _, b in merged]
        # Rows of a block that no other block or header row shares get their added cells
        # made a column at a time, a chunk of rows at once (_fast_adds); others cell by cell.
        blocks = sorted((first, first + n, k) for k, (first, n, _) in enumerate(job.blocks) if n)
        disjoint = all(a[1] <= b[0] for a, b in zip(blocks, blocks[1:]))
        clear = not any(a <= r < b for r in job.header_rows for a, b, _ in blocks)
        self._fast = blocks if disjoint and clear else []
        self._fast_starts = [a for a, _, _ in self._fast]
        self._chunk_key: tuple[int, int] | None = None
        self._chunk: list[tuple[str, int, int]] = []

    def _set_patterns(self) -> None:
        p = self.p
        self._ext = b"<" + p + b"extLst"
        self._c_open = b"<" + p + b"c "
        self._c_bare = b"<" + p + b"c>"
        self._c_empty = b"<" + p + b"c/>"
        self._r_letters = re.compile(rb"<" + re.escape(p) + rb"c\s[^>]*?\br=\"\$?([A-Za-z]+)")
        self._col_memo: dict[bytes, int] = {}
        self._ref_letters: dict[int, bytes] = {}

    # --- which rows get something ---------------------------------------------------

    def next_target(self, x: int) -> int:
        """The first row >= x that gets something (a huge number when none)."""
        k = bisect.bisect_right(self._starts, x) - 1
        if k >= 0 and x < self._ends[k]:
            return x
        k += 1
        return self._starts[k] if k < len(self._starts) else _INF

    def _style(self, col: ColumnJob, style: str | None, numeric: bool) -> int:
        key = (col.col, style, numeric)
        s = self._style_memo.get(key)
        if s is None:
            s = self.styler.named(style, numeric=numeric, number_xf=col.number_xf)
            self._style_memo[key] = s
        return s

    def adds_for(self, r: int) -> list[tuple[int, str]]:
        out: list[tuple[int, str]] = []
        p = self._ps
        notes = self.job.notes.get(r)
        letters = self._letters
        for col in self.job.header_rows.get(r, ()):
            s = col.header_xf
            if notes and col.col in notes:
                s = self.styler.styles.with_fill(s, notes[col.col])
            out.append((col.col, cell_xml(p, f"{letters[col.col]}{r}", s, col.header, None)))
        for first, n, cols in self.job.blocks:
            if first <= r < first + n:
                i = r - first
                for col in cols:
                    if not (notes and col.col in notes):  # made as the column-wise path does
                        out.append((col.col, self._column_xml(col, first, i, i + 1)[0]))
                        continue
                    cells = col.cells
                    if type(cells) is ColumnCells:
                        value, formula, style = cells.at(i)
                    else:
                        cell = cells[i]  # type: ignore[index]
                        value, formula, style = cell.value, cell.formula, cell.style
                    numeric = formula is not None or (
                        value is not None and not isinstance(value, str)
                    )
                    s = self.styler.styles.with_fill(self._style(col, style, numeric),
                                                     notes[col.col])
                    out.append((col.col, cell_xml(p, f"{letters[col.col]}{r}", s, value, formula)))
        if len(out) > 1 and any(out[k][0] > out[k + 1][0] for k in range(len(out) - 1)):
            out.sort(key=lambda t: t[0])
        return out

    def _fast_adds(self, r: int) -> tuple[str, int, int] | None:
        """(the added cells' XML, first col, last col) of row ``r`` made column-wise ('', -1,
        -1 when it gets none); None when the row needs :meth:`adds_for` (a header row, rows
        two blocks share, a note on an added cell)."""
        k = bisect.bisect_right(self._fast_starts, r) - 1
        if k < 0:
            return None
        first, end, b = self._fast[k]
        if r >= end:
            return None
        notes = self.job.notes.get(r)
        if notes and any(c in self.add_cols for c in notes):
            return None
        lo = (r - first) // _FAST_ROWS * _FAST_ROWS
        if self._chunk_key != (b, lo):
            self._chunk = self._make_chunk(b, first, lo, min(lo + _FAST_ROWS, end - first))
            self._chunk_key = (b, lo)
        return self._chunk[r - first - lo]

    def _make_chunk(self, b: int, first: int, lo: int, hi: int) -> list[tuple[str, int, int]]:
        cols = sorted(self.job.blocks[b][2], key=lambda c: c.col)
        lists = [self._column_xml(col, first, lo, hi) for col in cols]
        idx = [c.col for c in cols]
        out: list[tuple[str, int, int]] = []
        for parts in zip(*lists, strict=True):
            j0 = 0
            while j0 < len(parts) and not parts[j0]:
                j0 += 1
            if j0 == len(parts):
                out.append(("", -1, -1))
                continue
            j1 = len(parts) - 1
            while not parts[j1]:
                j1 -= 1
            out.append(("".join(parts), idx[j0], idx[j1]))
        return out

    def _column_xml(self, col: ColumnJob, first: int, lo: int, hi: int) -> list[str]:
        """The XML of one added column's cells for block rows lo..hi-1 ('' for none)."""
        p = self._ps
        letters = self._letters[col.col]
        cells = col.cells
        if type(cells) is ColumnCells:
            values = cells.value_list(lo, hi)
            formulas = cells.formulas[lo:hi] if cells.formulas is not None else [None] * (hi - lo)
            style = cells.style
            styles = ([style] * (hi - lo) if style is None or isinstance(style, str)
                      else style[lo:hi])
        else:
            got = [cells[i] for i in range(lo, hi)]  # type: ignore[index]
            values = [c.value for c in got]
            formulas = [c.formula for c in got]
            styles = [c.style for c in got]
        sa = self._plain_s.get(col.col)
        if sa is None:
            s = self._style(col, None, True)
            sa = self._plain_s[col.col] = f' s="{s}"' if s else ""
        head = f'<{p}c r="{letters}'
        # a blank of a column-wise column is left out; one in a list of AddedCells keeps
        # its format (cell_xml writes a styled empty cell)
        skip_blank = type(cells) is ColumnCells
        out: list[str] = []
        for r, value, formula, style in zip(range(first + lo, first + hi), values, formulas,
                                            styles, strict=True):
            if value is None and formula is None and skip_blank:
                out.append("")
            elif (type(value) is float and (style is None or style == "number")
                  and -_HUGE < value < _HUGE):
                if formula is None:
                    out.append(f'{head}{r}"{sa}><{p}v>{value!r}</{p}v></{p}c>')
                elif _NEEDS_ESCAPE.search(formula) is None:
                    out.append(f'{head}{r}"{sa}><{p}f>{formula}</{p}f>'
                               f"<{p}v>{value!r}</{p}v></{p}c>")
                else:
                    out.append(cell_xml(p, f"{letters}{r}", self._style(col, style, True),
                                        value, formula))
            else:
                numeric = formula is not None or (value is not None and not isinstance(value, str))
                out.append(cell_xml(p, f"{letters}{r}", self._style(col, style, numeric),
                                    value, formula))
        return out

    def _fill_notes(self, body: bytes, tail_pos: int, notes: dict[int, str],
                    r: int) -> bytes | None:
        """The row body with the noted cells' fills, found by their references; None when a
        noted cell is not there (or has no reference), so that the full merge must run."""
        p = self.p
        found: list[tuple[int, int, bytes]] = []
        for col in sorted(notes):
            k = body.find(b' r="' + self._ref(col, r) + b'"', 0, tail_pos)
            if k < 0:
                return None
            ts = body.rfind(b"<", 0, k)
            if ts < 0 or body.find(b">", ts, k) >= 0 or not body.startswith(b"<" + p + b"c", ts):
                return None
            te = body.find(b">", k) + 1
            if te <= 0:
                return None
            tag = body[ts:te]
            if not (tag[len(p) + 2:len(p) + 3].isspace()):
                return None
            old = attr(tag, b"s")
            s = self.styler.styles.with_fill(int(old) if old else None, notes[col])
            found.append((ts, te, set_attr(tag, b"s", str(s).encode())))
        found.sort()
        out: list[bytes] = []
        pos = 0
        for ts, te, tag in found:
            out.append(body[pos:ts])
            out.append(tag)
            pos = te
        out.append(body[pos:])
        return b"".join(out)

    def _ref(self, col: int, r: int) -> bytes:
        letters = self._ref_letters.get(col)
        if letters is None:
            letters = self._ref_letters[col] = col_letters(col).encode()
        return letters + str(r).encode()

    # --- rows ---------------------------------------------------------------------

    def new_row(self, r: int) -> bytes:
        if r in self.job.updates:
            self._no_cell(r, min(self.job.updates[r]), "the row does not exist")
        adds = self.adds_for(r)
        p = self.p.decode()
        notes = self.job.notes.get(r, {})
        have = {c for c, _ in adds}
        for col, rgb in notes.items():
            if col not in have:
                s = self.styler.styles.with_fill(None, rgb)
                adds.append((col, cell_xml(p, f"{col_letters(col)}{r}", s, None, None)))
        adds.sort(key=lambda t: t[0])
        body = "".join(x for _, x in adds)
        return f'<{p}row r="{r}">{body}</{p}row>'.encode()

    def edit_row(self, attrs: bytes, body: bytes | None, r: int) -> bytes:
        p = self.p
        notes = self.job.notes.get(r)
        if body is None:
            body = b""
        tail_pos = body.find(self._ext)
        if tail_pos < 0:
            tail_pos = len(body)
        updates = self.job.updates.get(r)
        fast = None if updates else self._fast_adds(r)
        if fast is not None:  # the added cells made column-wise; existing cells left of them
            xml, lo, hi = fast
            last = self._last_col(body)
            new_body: bytes | None = None
            if last is not None and (not xml or last < lo):
                new_body = body if not notes else self._fill_notes(body, tail_pos, notes, r)
            if new_body is not None:
                if xml:
                    added = xml.encode()
                    if tail_pos == len(body):
                        new_body += added
                    else:  # before the row's extLst (the fills may have moved it)
                        at = new_body.find(self._ext)
                        new_body = new_body[:at] + added + new_body[at:]
                if self._shared.active(r) and b"si=" in new_body:
                    new_body = self._promote(new_body, r)
                if xml:
                    attrs = self._spans(attrs, lo, hi)
                return b"<" + p + b"row" + attrs + b">" + new_body + b"</" + p + b"row>"
        found = [t for t in self.adds_for(r) if t[1]]
        cells_needed = bool(notes) or bool(updates)
        if found and not cells_needed:
            last = self._last_col(body)
            cells_needed = last is None or last >= found[0][0]
        if not cells_needed:
            added = "".join(x for _, x in found).encode()
            new_body = (
                body + added
                if tail_pos == len(body)
                else (body[:tail_pos] + added + body[tail_pos:])
            )
        else:
            adds = [(c, x.encode()) for c, x in found]
            new_body = self._merge(body, tail_pos, adds, notes or {}, r, updates or {})
        if self._shared.active(r) and b"si=" in new_body:
            new_body = self._promote(new_body, r)
        if found:
            attrs = self._spans(attrs, found[0][0], found[-1][0])
        return b"<" + p + b"row" + attrs + b">" + new_body + b"</" + p + b"row>"

    def _last_col(self, body: bytes) -> int | None:
        """Column of the row's last cell; None when that needs a full scan."""
        k = body.rfind(self._c_open)
        if body.find(self._c_bare, max(k, 0)) >= 0 or body.find(self._c_empty, max(k, 0)) >= 0:
            return None
        if k < 0:
            return -1
        m = self._r_letters.match(body, k)
        if m is None:
            return None
        letters = m.group(1)
        col = self._col_memo.get(letters)
        if col is None:
            col = col_index(letters.decode())
            self._col_memo[letters] = col
        return col

    def _merge(
        self,
        body: bytes,
        tail_pos: int,
        adds: list[tuple[int, bytes]],
        notes: dict[int, str],
        r: int,
        updates: dict[int, tuple[object, bool]],
    ) -> bytes:
        p = self.p
        cells = _scan_cells(body[:tail_pos], p)
        existing = {c[0] for c in cells}
        add_cols = {c for c, _ in adds}
        for col, rgb in notes.items():
            if col not in existing and col not in add_cols:
                s = self.styler.styles.with_fill(None, rgb)
                adds.append(
                    (col, cell_xml(p.decode(), f"{col_letters(col)}{r}", s, None, None).encode())
                )
        adds.sort(key=lambda t: t[0])
        out: list[bytes] = []
        pos = 0
        ai = 0
        for col, ts, te, start, end, has in cells:
            out.append(body[pos:start])
            pos = start
            while ai < len(adds) and adds[ai][0] < col:
                out.append(adds[ai][1])
                ai += 1
            if col in add_cols:
                if has:
                    ref = f"{col_letters(col)}{r}"
                    raise WriteError(
                        f"an added column would overwrite the occupied cell {ref}",
                        file=self.file,
                        sheet=self.job.sheet,
                        cell=ref,
                        expected="an empty column to the right of the table",
                    )
                out.append(adds[ai][1])  # replaces the blank (format-only) cell
                ai += 1
                pos = end
                continue
            if col in updates:
                out.append(self._update(body[start:end], te - ts, r, col, updates[col], notes))
                pos = end
                continue
            if col in notes:
                tag = body[ts:te]
                old = attr(tag, b"s")
                s = self.styler.styles.with_fill(int(old) if old else None, notes[col])
                out.append(set_attr(tag, b"s", str(s).encode()))
                pos = te
        missing = set(updates) - existing
        if missing:
            self._no_cell(r, min(missing), "the row has no such cell")
        out.append(body[pos:tail_pos])
        out.extend(x for _, x in adds[ai:])
        out.append(body[tail_pos:])
        return b"".join(out)

    def _update(
        self,
        cell: bytes,
        tag_len: int,
        r: int,
        col: int,
        update: tuple[object, bool],
        notes: dict[int, str],
    ) -> bytes:
        """One existing formula cell with its new value (and a note's fill)."""
        value, replace = update
        s = None
        if col in notes:
            old = attr(cell[:tag_len], b"s")
            s = self.styler.styles.with_fill(int(old) if old else None, notes[col])
        try:
            new, group = rewrite_cell(
                self.p, cell, tag_len, value, replace_formula=replace, s=s, row=r, col=col
            )
        except RewriteError as exc:
            ref = f"{col_letters(col)}{r}"
            raise WriteError(
                f"cannot give {ref} a new value: {exc}",
                file=self.file,
                sheet=self.job.sheet,
                cell=ref,
                expected="an existing formula cell",
            ) from exc
        if group is not None:
            self._shared.add(group)
        return new

    def _no_cell(self, r: int, col: int, why: str) -> None:
        ref = f"{col_letters(col)}{r}"
        raise WriteError(
            f"cannot give {ref} a new value: {why}",
            file=self.file,
            sheet=self.job.sheet,
            cell=ref,
            expected="an existing formula cell",
        )

    def _promote(self, body: bytes, r: int) -> bytes:
        """A row body whose first cells of waiting shared groups become their masters."""
        tail_pos = body.find(self._ext)
        if tail_pos < 0:
            tail_pos = len(body)
        out: list[bytes] = []
        pos = 0
        for col, ts, te, start, end, has in _scan_cells(body[:tail_pos], self.p):
            if not has or not self._shared.pending:
                continue
            new = self._shared.promote(body[start:end], te - ts, r, col)
            if new is not None:
                out.append(body[pos:start])
                out.append(new)
                pos = end
        if not out:
            return body
        out.append(body[pos:])
        return b"".join(out)

    def _spans(self, attrs: bytes, lo_col: int, hi_col: int) -> bytes:
        spans = attr(attrs, b"spans")
        if spans is None:
            return attrs
        key = b"%d:%d:" % (lo_col, hi_col) + spans
        new = self._spans_memo.get(key)
        if new is None:
            new = self._new_spans(spans, lo_col, hi_col)
            self._spans_memo[key] = new
        if new == spans:
            return attrs
        return attrs.replace(b'spans="' + spans + b'"', b'spans="' + new + b'"', 1)

    @staticmethod
    def _new_spans(spans: bytes, lo_col: int, hi_col: int) -> bytes:
        try:
            bounds = [int(x) for part in spans.split() for x in part.split(b":")]
        except ValueError:
            return spans
        lo = min([*bounds, lo_col + 1])
        hi = max([*bounds, hi_col + 1])
        return f"{lo}:{hi}".encode()

    # --- the whole part -----------------------------------------------------------

    def run(self, stream: IO[bytes], write: Callable[[bytes], object]) -> None:
        chunks = _chunks(stream)
        buf = b""
        for chunk in chunks:
            buf += chunk
            self.p = _prefix(buf[:65536])
            self._ps = self.p.decode()
            self._root = buf[:65536]
            self._set_patterns()
            self._shared = SharedPromotion(self.p)
            m = re.search(rb"<" + re.escape(self.p) + rb"sheetData(?=[\s>/])[^>]*?(/?)>", buf)
            if m:
                break
        else:
            raise ReadError(
                "worksheet part has no <sheetData>", file=self.file, sheet=self.job.sheet
            )
        p = self.p
        write(self._head(buf[: m.start()]))
        end_tag = b"</" + p + b"sheetData>"
        if m.group(1):  # <sheetData/>
            write(b"<" + p + b"sheetData>")
            self._missing(0, _INF, write)
            write(end_tag)
            rest = buf[m.end() :] + b"".join(chunks)
            write(self._tail(rest))
            return
        write(m.group())
        buf = buf[m.end() :]
        row_re = _row_re(p)
        prev = 0
        out: list[bytes] = []
        size = 0
        while True:
            end_idx = buf.find(end_tag)
            limit = end_idx if end_idx >= 0 else len(buf)
            last = 0
            for rm in row_re.finditer(buf, 0, limit):
                attrs = rm.group(1)
                r_raw = attr(attrs, b"r")
                r = int(r_raw) if r_raw else prev + 1
                gap = buf[last : rm.start()]
                if gap:
                    out.append(gap)
                if self.next_target(prev + 1) < r:
                    self._missing(prev, r, out.append)
                if self.next_target(r) == r:
                    piece = self.edit_row(attrs, rm.group(2), r)
                elif self._shared.active(r) and rm.group(2) and b"si=" in rm.group(2):
                    body = self._promote(rm.group(2), r)
                    piece = b"<" + p + b"row" + attrs + b">" + body + b"</" + p + b"row>"
                else:
                    piece = rm.group()
                out.append(piece)
                size += len(piece)
                prev = r
                last = rm.end()
            if size > CHUNK:
                write(b"".join(out))
                out.clear()
                size = 0
            if end_idx >= 0:
                out.append(buf[last:end_idx])
                self._missing(prev, _INF, out.append)
                out.append(end_tag)
                write(b"".join(out))
                rest = buf[end_idx + len(end_tag) :] + b"".join(chunks)
                write(self._tail(rest))
                return
            buf = buf[last:]
            more = next(chunks, None)
            if more is None:
                raise ReadError(
                    "worksheet part ends inside <sheetData>", file=self.file, sheet=self.job.sheet
                )
            buf += more

    def _missing(self, after: int, before: int, write: Callable[[bytes], object]) -> None:
        t = self.next_target(after + 1)
        while t < before:
            write(self.new_row(t))
            t = self.next_target(t + 1)

    def _head(self, head: bytes) -> bytes:
        p = self.p
        q = re.escape(p)
        rects = self.job.rects()
        if rects:
            m = re.search(rb"<" + q + rb"dimension\b[^>]*?/>", head)
            if m:
                ref = attr(m.group(), b"ref")
                r1 = min(r[0] for r in rects)
                c1 = min(r[1] for r in rects)
                r2 = max(r[2] for r in rects)
                c2 = max(r[3] for r in rects)
                if ref:
                    try:
                        a = parse_range(ref.decode())
                        r1, c1, r2, c2 = min(r1, a[0]), min(c1, a[1]), max(r2, a[2]), max(c2, a[3])
                    except ValueError:
                        pass
                new_ref = f"{col_letters(c1)}{r1}:{col_letters(c2)}{r2}".encode()
                tag = set_attr(m.group(), b"ref", new_ref)
                head = head[: m.start()] + tag + head[m.end() :]
        if self.cols:
            head = self._cols(head)
        return head

    def _cols(self, head: bytes) -> bytes:
        p = self.p
        q = re.escape(p)
        m = re.search(rb"<" + q + rb"cols\b[^>]*?(?:/>|>(.*?)</" + q + rb"cols>)", head, re.S)
        elems: list[tuple[int, int, bytes]] = []
        if m and m.group(1):
            for em in re.finditer(rb"<" + q + rb"col\b[^>]*?/>", m.group(1)):
                lo = int(attr(em.group(), b"min") or 1)
                hi = int(attr(em.group(), b"max") or lo)
                elems.append((lo, hi, em.group()))
        for cj in self.cols:
            c = cj.col + 1
            new = f'<{p.decode()}col min="{c}" max="{c}" width="{cj.width:g}" customWidth="1"/>'
            new_b = new.encode()
            for k, (lo, hi, el) in enumerate(elems):
                if lo <= c <= hi:
                    style = attr(el, b"style")
                    if style is not None:
                        new_b = set_attr(new_b, b"style", style)
                    pieces = []
                    if lo < c:
                        pieces.append((lo, c - 1, _minmax(el, lo, c - 1)))
                    pieces.append((c, c, new_b))
                    if c < hi:
                        pieces.append((c + 1, hi, _minmax(el, c + 1, hi)))
                    elems[k : k + 1] = pieces
                    break
            else:
                elems.append((c, c, new_b))
        elems.sort(key=lambda e: e[0])
        block = b"<" + p + b"cols>" + b"".join(e[2] for e in elems) + b"</" + p + b"cols>"
        if m:
            return head[: m.start()] + block + head[m.end() :]
        return head + block  # head ends right before <sheetData>

    def _tail(self, tail: bytes) -> bytes:
        rects = self.job.rects(notes=False)
        for mm in re.finditer(rb"<(?:[\w.-]+:)?mergeCell\b[^>]*?/?>", tail):
            ref = attr(mm.group(), b"ref")
            if not ref:
                continue
            try:
                a = parse_range(ref.decode())
            except ValueError:
                continue
            for rr in rects:
                if rr[0] <= a[2] and a[0] <= rr[2] and rr[1] <= a[3] and a[1] <= rr[3]:
                    if a[:2] == a[2:]:
                        continue
                    row, col = max(rr[0], a[0]), max(rr[1], a[1])
                    ref_txt = f"{col_letters(col)}{row}"
                    raise WriteError(
                        f"an added cell would land inside the merged range {ref.decode()}",
                        file=self.file,
                        sheet=self.job.sheet,
                        cell=ref_txt,
                        expected="an empty, unmerged area to the right of the table",
                    )
        if self.job.legacy_rid is None:
            return tail
        pos = _top_level_pos(tail, _AFTER_LEGACY)
        rp = ns_prefix(self._root, REL_NS)
        rid = self.job.legacy_rid
        if rp is None:
            el = (
                f'<{self.p.decode()}legacyDrawing xmlns:r="{REL_NS.decode()}" r:id="{rid}"/>'
            ).encode()
        else:
            el = f'<{self.p.decode()}legacyDrawing {rp.decode()}id="{rid}"/>'.encode()
        return tail[:pos] + el + tail[pos:]


def _minmax(el: bytes, lo: int, hi: int) -> bytes:
    return set_attr(set_attr(el, b"min", str(lo).encode()), b"max", str(hi).encode())


def _top_level_pos(tail: bytes, names: set[bytes]) -> int:
    """Offset of the first top-level element named in ``names`` (else of </worksheet>)."""
    depth = 0
    for m in re.finditer(rb"<(/?)([\w.:-]+)[^>]*?(/?)>", tail):
        closing, name, empty = m.group(1), m.group(2), m.group(3)
        local = name.split(b":")[-1]
        if closing:
            if depth == 0:  # </worksheet>
                return m.start()
            depth -= 1
            continue
        if depth == 0 and local in names:
            return m.start()
        if not empty:
            depth += 1
    return len(tail)
