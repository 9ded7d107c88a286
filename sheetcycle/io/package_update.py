"""Rewriting one existing formula cell of a streamed worksheet: its cached value, or the
formula replaced by its value.

Kept cells are never touched here; only the cells a :class:`~sheetcycle.io.package.CellValue`
names. A cell that keeps its formula keeps its ``<f>`` element byte for byte and gets a
new ``<v>`` (with the ``t`` type its value needs: none for a number, ``str`` for text,
``b`` for a logical value, ``e`` for an error). A cell whose formula is replaced becomes a
plain value with the same ``s`` format: a number, an inline string for text (the shared
string table stays as it was), a logical value or an error value.

Replacing the master cell of a shared formula group (``<f t="shared" ref=... si=...>``,
the one cell that holds the group's text) would leave the other cells of the group with
no formula: :class:`SharedPromotion` makes the group's next remaining cell its master,
with the text shifted to that cell and the group's range starting at its row.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass

from sheetcycle.io.package_xml import attr, col_letters, esc_text, parse_range, set_attr

__all__ = ["ERROR_VALUES", "SharedGroup", "SharedPromotion", "rewrite_cell"]

#: Error values a cell may hold (ECMA-376 Part 1, 18.18.28 ST_CellType "e").
ERROR_VALUES = ("#NULL!", "#DIV/0!", "#VALUE!", "#REF!", "#NAME?", "#NUM!", "#N/A")

_ENTITY = re.compile(rb"&(#x[0-9A-Fa-f]+|#[0-9]+|amp|lt|gt|quot|apos);")
_NAMED = {b"amp": "&", b"lt": "<", b"gt": ">", b"quot": '"', b"apos": "'"}


def unescape(raw: bytes) -> str:
    """Text content of an XML element (the five entities and character references)."""

    def sub(m: re.Match[bytes]) -> bytes:
        e = m.group(1)
        if e.startswith(b"#x"):
            ch = chr(int(e[2:], 16))
        elif e.startswith(b"#"):
            ch = chr(int(e[1:]))
        else:
            ch = _NAMED[e]
        return ch.encode("utf-8")

    return _ENTITY.sub(sub, raw).decode("utf-8")


def _drop_attr(tag: bytes, name: bytes) -> bytes:
    return re.sub(rb"\s" + re.escape(name) + rb"\s*=\s*(?:\"[^\"]*\"|'[^']*')", b"", tag, count=1)


def _error_code(value: object) -> str | None:
    """The error code of a CellError-like value (anything with a ``code``), else None."""
    code = getattr(value, "code", None)
    if not isinstance(code, str):
        return None
    return code if code in ERROR_VALUES else "#N/A"  # e.g. sheetcycle's own #CIRC!


def check_value(value: object) -> str | None:
    """Why ``value`` cannot be written into a cell (None when it can)."""
    if value is None or isinstance(value, bool | int | float | str):
        return None
    if _error_code(value) is not None:
        return None
    return f"a cell value must be a number, text, a logical value or an error, found {value!r}"


def _typed(value: object, *, keep_formula: bool) -> tuple[bytes | None, str | None]:
    """(t attribute or None, text of <v>) for a value; text with t=inlineStr is the <t>."""
    code = _error_code(value)
    if code is not None:
        return b"e", code
    if value is None:
        return None, None
    if isinstance(value, bool):
        return b"b", "1" if value else "0"
    if isinstance(value, int | float):
        x = float(value)
        if not math.isfinite(x):
            return b"e", "#NUM!"
        return None, repr(x)
    text = str(value)
    return (b"str" if keep_formula else b"inlineStr"), text


@dataclass
class SharedGroup:
    """A shared formula group whose master was replaced by a value."""

    si: bytes
    text: str  # the master's formula text (unescaped)
    row: int  # master row (1-based) and column (0-based)
    col: int
    top: int  # the group's range, rows 1-based, columns 0-based
    left: int
    bottom: int
    right: int


class RewriteError(ValueError):
    """The cell cannot take the update (the caller adds the sheet and cell)."""


def _element(p: bytes, name: bytes) -> re.Pattern[bytes]:
    q = re.escape(p)
    return re.compile(rb"<" + q + name + rb"(?=[\s>/])[^>]*?(?:/>|>.*?</" + q + name + rb">)", re.S)


_PATTERNS: dict[bytes, tuple[re.Pattern[bytes], ...]] = {}


def _patterns(p: bytes) -> tuple[re.Pattern[bytes], ...]:
    got = _PATTERNS.get(p)
    if got is None:
        got = _PATTERNS[p] = (_element(p, b"f"), _element(p, b"v"), _element(p, b"is"))
    return got


def rewrite_cell(
    p: bytes,
    cell: bytes,
    tag_len: int,
    value: object,
    *,
    replace_formula: bool,
    s: int | None,
    row: int,
    col: int,
) -> tuple[bytes, SharedGroup | None]:
    """The new bytes of one existing ``<c>`` element, and the shared group it leaves.

    ``cell`` is the whole element, ``tag_len`` the length of its start tag; ``s`` a new
    format index (a note's fill) or None to keep the cell's own.
    """
    tag = cell[:tag_len]
    if tag.endswith(b"/>"):
        raise RewriteError("the cell holds no formula (it is empty)")
    close = b"</" + p + b"c>"
    content = cell[tag_len : len(cell) - len(close)]
    f_re, v_re, is_re = _patterns(p)
    fm = f_re.search(content)
    if fm is None:
        raise RewriteError("the cell holds no formula")
    f_el = fm.group()
    f_tag = f_el[: f_el.index(b">") + 1]
    rest = f_re.sub(b"", v_re.sub(b"", is_re.sub(b"", content, count=1), count=1), count=1)
    t, text = _typed(value, keep_formula=not replace_formula)
    new_tag = tag
    if s is not None:
        new_tag = set_attr(new_tag, b"s", str(s).encode()) if s else _drop_attr(new_tag, b"s")
    new_tag = set_attr(new_tag, b"t", t) if t is not None else _drop_attr(new_tag, b"t")
    ps = p.decode()
    if not replace_formula:
        v = b"" if text is None else f"<{ps}v>{esc_text(text)}</{ps}v>".encode()
        return new_tag + f_el + v + rest + close, None
    group = _shared_master(f_tag, f_el, row, col)
    if attr(f_tag, b"t") == b"array":
        ref = attr(f_tag, b"ref")
        if ref is not None and b":" in ref:
            a = parse_range(ref.decode())
            if a[:2] != a[2:]:
                raise RewriteError(
                    f"the cell is the master of the array formula over {ref.decode()}; "
                    "replacing it would empty the other cells of the array"
                )
    new_tag = _drop_attr(new_tag, b"cm")  # dynamic-array metadata belongs to the formula
    if text is None:
        body = b""
    elif t == b"inlineStr":
        space = ' xml:space="preserve"' if text != text.strip() or "\n" in text else ""
        body = f"<{ps}is><{ps}t{space}>{esc_text(text)}</{ps}t></{ps}is>".encode()
    else:
        body = f"<{ps}v>{esc_text(text)}</{ps}v>".encode()
    if not body and not rest.strip():
        return new_tag[:-1].rstrip() + b"/>", group
    return new_tag + body + rest + close, group


def _shared_master(f_tag: bytes, f_el: bytes, row: int, col: int) -> SharedGroup | None:
    if attr(f_tag, b"t") != b"shared" or f_el.endswith(b"/>"):
        return None
    ref, si = attr(f_tag, b"ref"), attr(f_tag, b"si")
    if ref is None or si is None:
        return None
    try:
        top, left, bottom, right = parse_range(ref.decode())
    except ValueError:
        return None
    if (top, left) == (bottom, right):
        return None
    end = f_el.rindex(b"</")
    text = unescape(f_el[len(f_tag) : end])
    return SharedGroup(si, text, row, col, top, left, bottom, right)


class SharedPromotion:
    """Shared groups waiting for a new master, and the rewrite of that cell."""

    def __init__(self, p: bytes) -> None:
        self.p = p
        self.pending: dict[bytes, SharedGroup] = {}
        self._f = _patterns(p)[0]

    def add(self, group: SharedGroup) -> None:
        self.pending[group.si] = group

    def active(self, r: int) -> bool:
        """Whether row ``r`` may hold a waiting group's cell (drops groups above it)."""
        if not self.pending:
            return False
        for si in [si for si, g in self.pending.items() if g.bottom < r]:
            del self.pending[si]
        return bool(self.pending)

    def promote(self, cell: bytes, tag_len: int, row: int, col: int) -> bytes | None:
        """The cell made master of its waiting group, or None when it is not in one."""
        content = cell[tag_len:]
        fm = self._f.search(content)
        if fm is None:
            return None
        f_el = fm.group()
        f_tag = f_el[: f_el.index(b">") + 1]
        if attr(f_tag, b"t") != b"shared" or attr(f_tag, b"ref") is not None:
            return None
        si = attr(f_tag, b"si")
        group = self.pending.get(si) if si is not None else None
        if group is None or not (group.left <= col <= group.right and row <= group.bottom):
            return None
        from sheetcycle.io.evaluate import shift_formula

        del self.pending[group.si]
        text = shift_formula(group.text, row - group.row, col - group.col)
        ref = f"{col_letters(group.left)}{row}:{col_letters(group.right)}{group.bottom}"
        open_tag = set_attr(f_tag, b"ref", ref.encode())
        if open_tag.endswith(b"/>"):
            open_tag = open_tag[:-2].rstrip() + b">"
        ps = self.p.decode()
        new_f = open_tag + esc_text(text).encode() + f"</{ps}f>".encode()
        start = tag_len + fm.start()
        return cell[:start] + new_f + cell[tag_len + fm.end() :]
