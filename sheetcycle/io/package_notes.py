"""Cell notes (legacy comments): the comments part and its VML drawing.

A note needs two parts beside its sheet: ``commentsN.xml`` (the text) and a VML drawing
(the box shown on hover). When the sheet already has them, the new notes are added to
those parts; nothing already in them changes. A note on a cell that already carries a
comment is appended to that comment's text as a new run, so the original text stays.
VML shape ids come from 1024-wide blocks (``o:idmap``) that no other drawing uses.
"""

from __future__ import annotations

import math
import re
from collections.abc import Iterable, Iterator
from dataclasses import dataclass

from sheetcycle.io.package_xml import MAIN_NS, col_letters, esc_text, ns_prefix, open_empty

__all__ = [
    "NoteText",
    "add_comments",
    "add_vml",
    "comments_chunks",
    "new_vml_chunks",
    "used_vml_blocks",
    "vml_blocks",
]

AUTHOR = "sheetcycle"
_V = "urn:schemas-microsoft-com:vml"
_O = "urn:schemas-microsoft-com:office:office"
_X = "urn:schemas-microsoft-com:office:excel"
_RPR = '<{p}rPr><{p}sz val="9"/><{p}rFont val="Tahoma"/><{p}family val="2"/></{p}rPr>'


@dataclass(frozen=True, slots=True)
class NoteText:
    row: int  # 1-based
    col: int  # 0-based
    text: str

    @property
    def ref(self) -> str:
        return f"{col_letters(self.col)}{self.row}"


def _t(p: str, text: str) -> str:
    return f'<{p}t xml:space="preserve">{esc_text(text)}</{p}t>'


_EMPTY_COMMENTS = (
    b'<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
    b'<comments xmlns="http://schemas.openxmlformats.org/spreadsheetml/2006/main">'
    b"<authors></authors><commentList></commentList></comments>"
)


def existing_refs(comments: bytes | None) -> set[str]:
    if comments is None:
        return set()
    p = re.escape(ns_prefix(comments, MAIN_NS) or b"")
    return {
        m.group(1).decode().replace("$", "").upper()
        for m in re.finditer(rb"<" + p + rb"comment\b[^>]*?\sref\s*=\s*[\"']([^\"']+)", comments)
    }


def add_comments(comments: bytes | None, notes: Iterable[NoteText]) -> bytes:
    """The comments part with ``notes`` added (a new part when ``comments`` is None)."""
    return b"".join(comments_chunks(comments, notes))


def comments_chunks(comments: bytes | None, notes: Iterable[NoteText]) -> list[bytes]:
    """:func:`add_comments` as pieces, for streaming a large part into the zip."""
    data = _EMPTY_COMMENTS if comments is None else comments
    pb = ns_prefix(data, MAIN_NS) or b""
    p = pb.decode()
    q = re.escape(pb)
    data = open_empty(data, pb + b"authors")
    data = open_empty(data, pb + b"commentList")
    authors = re.search(rb"<" + q + rb"authors\b[^>]*>(.*?)</" + q + rb"authors>", data, re.S)
    if authors is None:  # no <authors>: it is the first child of <comments>
        m = re.search(rb"<" + q + rb"comments\b[^>]*>", data)
        assert m is not None
        data = data[: m.end()] + f"<{p}authors></{p}authors>".encode() + data[m.end() :]
        authors = re.search(rb"<" + q + rb"authors\b[^>]*>(.*?)</" + q + rb"authors>", data, re.S)
        assert authors is not None
    names = re.findall(
        rb"<" + q + rb"author\b[^>]*>(.*?)</" + q + rb"author>", authors.group(1), re.S
    )
    names += [b""] * len(re.findall(rb"<" + q + rb"author\b[^>]*/>", authors.group(1)))
    if AUTHOR.encode() in names:
        author_id = names.index(AUTHOR.encode())
    else:
        author_id = len(names)
        end = authors.end() - len(b"</" + pb + b"authors>")
        data = data[:end] + f"<{p}author>{AUTHOR}</{p}author>".encode() + data[end:]
    have = existing_refs(comments)
    new: list[bytes] = []
    for note in notes:
        run = f"<{p}r>{_RPR.format(p=p)}"
        if note.ref in have:
            data = _append_run(data, pb, note.ref, (run + _t(p, "\n" + note.text) + f"</{p}r>"))
            continue
        new.append(
            f'<{p}comment ref="{note.ref}" authorId="{author_id}"><{p}text>'
            f"{run}{_t(p, note.text)}</{p}r></{p}text></{p}comment>".encode()
        )
    end = data.rfind(b"</" + pb + b"commentList>")
    return [data[:end], *new, data[end:]]


def _append_run(data: bytes, pb: bytes, ref: str, run: str) -> bytes:
    q = re.escape(pb)
    m = re.search(
        rb"<"
        + q
        + rb"comment\b[^>]*?\sref\s*=\s*[\"']\$?"
        + ref.encode()
        + rb"[\"'][^>]*>(.*?)</"
        + q
        + rb"comment>",
        data,
        re.S | re.I,
    )
    if m is None:
        return data
    body_start = m.start(1)
    body = m.group(1)
    stop = re.search(rb"<" + q + rb"(?:rPh|phoneticPr)\b|</" + q + rb"text>", body)
    at = body_start + (stop.start() if stop else len(body))
    return data[:at] + run.encode() + data[at:]


def used_vml_blocks(vml_parts: Iterable[bytes]) -> int:
    """The highest shape-id block (o:idmap number) any VML drawing of the package uses."""
    top = 0
    for data in vml_parts:
        for m in re.finditer(rb"idmap\b[^>]*?data\s*=\s*[\"']([^\"']*)", data):
            for n in re.findall(rb"\d+", m.group(1)):
                top = max(top, int(n))
        for m in re.finditer(rb"_x0000_s(\d+)", data):
            top = max(top, int(m.group(1)) // 1024)
    return top


def _shape(sid: int, note: NoteText, ns: str) -> str:
    lines = sum(max(1, math.ceil(len(line) / 32)) for line in note.text.split("\n"))
    height = min(max(lines + 1, 4), 24)
    top = max(note.row - 2, 0)
    return (
        f'<v:shape{ns} id="_x0000_s{sid}" type="#_x0000_t202" '
        'style="position:absolute;margin-left:59.25pt;margin-top:1.5pt;width:180pt;'
        f'height:{height * 12 + 6}pt;z-index:{sid % 1024};visibility:hidden" '
        'fillcolor="#ffffe1" o:insetmode="auto">'
        '<v:fill color2="#ffffe1"/><v:shadow on="t" color="black" obscured="t"/>'
        '<v:path o:connecttype="none"/>'
        '<v:textbox style="mso-direction-alt:auto"><div style="text-align:left"></div>'
        "</v:textbox>"
        '<x:ClientData ObjectType="Note"><x:MoveWithCells/><x:SizeWithCells/>'
        f"<x:Anchor>{note.col + 1}, 15, {top}, 10, {note.col + 4}, 15, {top + height}, 4"
        "</x:Anchor><x:AutoFill>False</x:AutoFill>"
        f"<x:Row>{note.row - 1}</x:Row><x:Column>{note.col}</x:Column></x:ClientData>"
        "</v:shape>"
    )


_SHAPETYPE = (
    '<v:shapetype{ns} id="_x0000_t202" coordsize="21600,21600" o:spt="202" '
    'path="m,l,21600r21600,l21600,xe"><v:stroke joinstyle="miter"/>'
    '<v:path gradientshapeok="t" o:connecttype="rect"/></v:shapetype>'
)


def vml_blocks(n_notes: int, first_block: int) -> list[int]:
    """The shape-id blocks (1023 shapes each) that ``n_notes`` new note boxes take."""
    return list(range(first_block, first_block + max(1, math.ceil(n_notes / 1023))))


def _shape_ids(blocks: list[int], n_notes: int) -> list[int]:
    """The note boxes' shape ids: ids 1..1023 of each block of 1024, in order."""
    return [b * 1024 + k for b in blocks for k in range(1, 1024)][:n_notes]


def new_vml_chunks(notes: list[NoteText], first_block: int,
                   per_chunk: int = 4096) -> Iterator[bytes]:
    """A new VML drawing part (see :func:`add_vml`), a few thousand note boxes at a time."""
    blocks = vml_blocks(len(notes), first_block)
    ids = _shape_ids(blocks, len(notes))
    yield (
        f'<xml xmlns:v="{_V}" xmlns:o="{_O}" xmlns:x="{_X}">'
        f'<o:shapelayout v:ext="edit"><o:idmap v:ext="edit" data="'
        f'{",".join(map(str, blocks))}"/></o:shapelayout>' + _SHAPETYPE.format(ns="")
    ).encode()
    for lo in range(0, len(notes), per_chunk):
        yield "".join(_shape(i, n, "") for i, n in zip(ids[lo:lo + per_chunk],
                                                        notes[lo:lo + per_chunk],
                                                        strict=True)).encode()
    yield b"</xml>"


def add_vml(vml: bytes | None, notes: list[NoteText], first_block: int) -> tuple[bytes, int]:
    """The VML drawing with a hidden note box per note; returns (part, last block used)."""
    blocks = vml_blocks(len(notes), first_block)
    if vml is None:
        return b"".join(new_vml_chunks(notes, first_block)), blocks[-1]
    ids = _shape_ids(blocks, len(notes))
    declared = all(
        re.search(rb"xmlns:" + pfx + rb"\s*=\s*[\"']" + re.escape(uri.encode()), vml)
        for pfx, uri in ((b"v", _V), (b"o", _O), (b"x", _X))
    )
    ns = "" if declared else f' xmlns:v="{_V}" xmlns:o="{_O}" xmlns:x="{_X}"'
    add = ""
    if b"_x0000_t202" not in vml:
        add += _SHAPETYPE.format(ns=ns)
    add += "".join(_shape(i, n, ns) for i, n in zip(ids, notes, strict=True))
    m = re.search(rb"(idmap\b[^>]*?data\s*=\s*[\"'])([^\"']*)", vml)
    if m:
        listed = m.group(2) + b"," + ",".join(map(str, blocks)).encode()
        vml = vml[: m.start(2)] + listed.lstrip(b",") + vml[m.end(2) :]
    end = vml.rfind(b"</xml>")
    if end < 0:
        end = len(vml)
    return vml[:end] + add.encode() + vml[end:], blocks[-1]
