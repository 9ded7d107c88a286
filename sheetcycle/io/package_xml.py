"""Byte-level helpers for editing the XML parts of a workbook package in place.

Parts are edited by splicing bytes, never by parsing and re-serialising them: a round trip
through an XML library renames namespace prefixes (which breaks ``mc:Ignorable``) and
rewrites every element. lxml is used only to *read* small parts (relationships, the
workbook's sheet list); every change is a splice at a position found by a regular
expression on the original bytes, with the part's own namespace prefix.
"""

from __future__ import annotations

import posixpath
import re
from dataclasses import dataclass
from functools import lru_cache

from lxml import etree

from sheetcycle.errors import ReadError
from sheetcycle.io.safety import check_xml_head, safe_parser

__all__ = [
    "MAIN_NS",
    "REL_NS",
    "STRICT_NS",
    "Rel",
    "add_rels",
    "attr",
    "col_letters",
    "esc_attr",
    "esc_text",
    "ns_prefix",
    "parse_a1",
    "parse_rels",
    "rels_path",
    "remove_rel",
    "resolve_target",
    "set_attr",
]

MAIN_NS = b"http://schemas.openxmlformats.org/spreadsheetml/2006/main"
STRICT_NS = b"http://purl.oclc.org/ooxml/spreadsheetml/main"
REL_NS = b"http://schemas.openxmlformats.org/officeDocument/2006/relationships"
PKG_REL_NS = "http://schemas.openxmlformats.org/package/2006/relationships"
MAX_ROW = 1_048_576
MAX_COL = 16_384

_A1 = re.compile(r"^\$?([A-Za-z]{1,3})\$?([0-9]{1,7})$")


def col_letters(col0: int) -> str:
    """0-based column index -> letters (0 -> 'A', 26 -> 'AA')."""
    n = col0 + 1
    out = ""
    while n:
        n, rem = divmod(n - 1, 26)
        out = chr(65 + rem) + out
    return out


def col_index(letters: str) -> int:
    """Column letters -> 0-based index ('A' -> 0)."""
    n = 0
    for ch in letters.upper():
        n = n * 26 + ord(ch) - 64
    return n - 1


def parse_a1(ref: str) -> tuple[int, int]:
    """'C7' or '$C$7' -> (row 1-based, column 0-based); ValueError when it is not a cell."""
    m = _A1.match(ref.strip())
    if not m:
        raise ValueError(f"not an A1 cell reference: {ref!r}")
    row, col = int(m.group(2)), col_index(m.group(1))
    if not (1 <= row <= MAX_ROW and 0 <= col < MAX_COL):
        raise ValueError(f"cell reference outside the sheet: {ref!r}")
    return row, col


def parse_range(ref: str) -> tuple[int, int, int, int]:
    """'A1:C4' (or a single cell) -> (row1, col1, row2, col2), rows 1-based, cols 0-based."""
    a, _, b = ref.partition(":")
    r1, c1 = parse_a1(a)
    r2, c2 = parse_a1(b) if b else (r1, c1)
    return min(r1, r2), min(c1, c2), max(r1, r2), max(c1, c2)


# Characters XML 1.0 cannot carry; OOXML writes them as _xHHHH_.
_BAD_XML = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f\ufffe\uffff]")
_ESCAPE_LOOKALIKE = re.compile("_(x[0-9A-Fa-f]{4}_)")


def _ooxml_escape(text: str) -> str:
    text = _ESCAPE_LOOKALIKE.sub(r"_x005F_\1", text)
    return _BAD_XML.sub(lambda m: f"_x{ord(m.group()):04X}_", text)


_NEEDS_ESCAPE = re.compile("[&<>_\x00-\x08\x0b\x0c\x0e-\x1f\ufffe\uffff]")


@lru_cache(maxsize=4096)  # the same flag words go in a note, a flags cell and a sheet row
def esc_text(text: str) -> str:
    """Text content for a <t> or <v> element."""
    if _NEEDS_ESCAPE.search(text) is None:
        return text
    text = _ooxml_escape(text)
    return text.replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;")


def esc_attr(text: str) -> str:
    """Text for a double-quoted attribute value."""
    return (
        esc_text(text)
        .replace('"', "&quot;")
        .replace("\n", "&#10;")
        .replace("\r", "&#13;")
        .replace("\t", "&#9;")
    )


_ATTR_RES: dict[bytes, re.Pattern[bytes]] = {}


def attr(tag: bytes, name: bytes) -> bytes | None:
    """The raw value of attribute ``name`` in a start tag (None when absent)."""
    pat = _ATTR_RES.get(name)
    if pat is None:
        pat = re.compile(rb"\s" + re.escape(name) + rb"\s*=\s*(\"([^\"]*)\"|'([^']*)')")
        _ATTR_RES[name] = pat
    m = pat.search(tag)
    if not m:
        return None
    return m.group(2) if m.group(2) is not None else m.group(3)


def set_attr(tag: bytes, name: bytes, value: bytes) -> bytes:
    """Start tag with attribute ``name`` set to ``value`` (replaced in place or added last)."""
    pat = re.compile(rb"(\s" + re.escape(name) + rb"\s*=\s*)(\"[^\"]*\"|'[^']*')")
    if pat.search(tag):
        return pat.sub(lambda m: m.group(1) + b'"' + value + b'"', tag, count=1)
    end = len(tag) - 2 if tag.endswith(b"/>") else len(tag) - 1
    return tag[:end].rstrip() + b" " + name + b'="' + value + b'"' + tag[end:]


def ns_prefix(data: bytes, uri: bytes) -> bytes | None:
    """The prefix (with colon, b'' for the default namespace) bound to ``uri`` in the root
    start tag of ``data``; None when the root does not declare it."""
    root = _root_tag(data)
    for m in re.finditer(rb"\sxmlns(?::([\w.-]+))?\s*=\s*([\"'])(.*?)\2", root):
        if m.group(3) == uri:
            return (m.group(1) + b":") if m.group(1) else b""
    return None


def _root_tag(data: bytes) -> bytes:
    pos = 0
    while True:
        lt = data.find(b"<", pos)
        if lt < 0:
            return b""
        if data.startswith(b"<?", lt) or data.startswith(b"<!", lt):
            pos = lt + 2
            continue
        gt = data.find(b">", lt)
        return data[lt : gt + 1]


def root_name(data: bytes) -> bytes:
    """Local name of the root element."""
    tag = _root_tag(data)
    m = re.match(rb"<([\w.:-]+)", tag)
    return m.group(1).split(b":")[-1] if m else b""


def parse_xml(data: bytes, part: str, file: str) -> etree._Element:
    """Parse a small part for reading only (never re-serialised)."""
    check_xml_head(data, part, file=file)
    try:
        return etree.fromstring(data, safe_parser())
    except etree.XMLSyntaxError as exc:
        raise ReadError(f"part {part!r} is not well-formed XML ({exc})", file=file) from exc


# --- relationships ---------------------------------------------------------------------


@dataclass(frozen=True, slots=True)
class Rel:
    id: str
    type: str
    target: str
    external: bool


def rels_path(part: str) -> str:
    """'xl/worksheets/sheet1.xml' -> 'xl/worksheets/_rels/sheet1.xml.rels'."""
    folder, name = posixpath.split(part)
    return posixpath.join(folder, "_rels", name + ".rels")


def resolve_target(source_part: str, target: str) -> str:
    """A relationship target as a zip entry name."""
    if target.startswith("/"):
        return posixpath.normpath(target.lstrip("/"))
    return posixpath.normpath(posixpath.join(posixpath.dirname(source_part), target))


def relative_target(source_part: str, part: str) -> str:
    return posixpath.relpath(part, posixpath.dirname(source_part) or ".")


def parse_rels(data: bytes | None, part: str, file: str) -> list[Rel]:
    if data is None:
        return []
    root = parse_xml(data, part, file)
    rels = []
    for el in root.iter(f"{{{PKG_REL_NS}}}Relationship"):
        rels.append(
            Rel(
                id=el.get("Id", ""),
                type=el.get("Type", ""),
                target=el.get("Target", ""),
                external=el.get("TargetMode", "") == "External",
            )
        )
    return rels


def free_rel_ids(existing: list[Rel], n: int) -> list[str]:
    used = {r.id for r in existing}
    out: list[str] = []
    k = 1
    while len(out) < n:
        rid = f"rId{k}"
        if rid not in used:
            out.append(rid)
            used.add(rid)
        k += 1
    return out


_EMPTY_RELS = (
    b'<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
    b'<Relationships xmlns="http://schemas.openxmlformats.org/package/2006/relationships">'
    b"</Relationships>"
)


def add_rels(data: bytes | None, new: list[tuple[str, str, str]]) -> bytes:
    """Append relationships (id, type, target) to a .rels part (created when None)."""
    if data is None:
        data = _EMPTY_RELS
    data = _open_empty_root(data, b"Relationships")
    add = b"".join(
        f'<Relationship Id="{esc_attr(i)}" Type="{esc_attr(t)}" Target="{esc_attr(g)}"/>'.encode()
        for i, t, g in new
    )
    pos = data.rfind(b"</Relationships>")
    return data[:pos] + add + data[pos:]


def remove_rel(data: bytes, rel_id: str) -> bytes:
    pat = re.compile(
        rb"<Relationship\b[^>]*?\sId\s*=\s*[\"']" + re.escape(rel_id.encode()) + rb"[\"'][^>]*?/>"
    )
    return pat.sub(b"", data, count=1)


def _open_empty_root(data: bytes, local: bytes) -> bytes:
    """Turn a self-closing root (<Relationships .../>) into an open/close pair."""
    m = re.search(rb"<((?:[\w.-]+:)?" + local + rb")\b([^>]*?)/>", data)
    if m:
        data = (
            data[: m.start()]
            + b"<"
            + m.group(1)
            + m.group(2)
            + b"></"
            + m.group(1)
            + b">"
            + data[m.end() :]
        )
    return data


def open_empty(data: bytes, qname: bytes) -> bytes:
    """Turn the first self-closing <qname .../> into <qname ...></qname>."""
    m = re.search(rb"<" + re.escape(qname) + rb"(\s[^>]*?)?/>", data)
    if not m:
        return data
    inner = m.group(1) or b""
    return data[: m.start()] + b"<" + qname + inner + b"></" + qname + b">" + data[m.end() :]
