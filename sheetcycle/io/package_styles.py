"""Appending cell formats to a workbook's xl/styles.xml without touching existing entries.

Every existing font, fill, border, number format and cell format keeps its index and its
bytes; new entries go at the end of their list and every ``count`` is set to the real
number of entries. New number formats take ids from 164 up (below are built-in formats).
Formats are handed out lazily (a noted cell's own format is only seen while its sheet is
streamed), so the part is rendered after the sheets.
"""

from __future__ import annotations

import re

from sheetcycle.io.package_xml import MAIN_NS, esc_attr, ns_prefix, set_attr

__all__ = ["BUILTIN_FORMATS", "MINIMAL_STYLES", "StyleBook"]

#: Built-in number format ids (ECMA-376 Part 1, 18.8.30) for the codes we might ask for.
BUILTIN_FORMATS = {
    "General": 0,
    "0": 1,
    "0.00": 2,
    "#,##0": 3,
    "#,##0.00": 4,
    "0%": 9,
    "0.00%": 10,
    "0.00E+00": 11,
    "@": 49,
}

MINIMAL_STYLES = (
    b'<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
    b'<styleSheet xmlns="http://schemas.openxmlformats.org/spreadsheetml/2006/main">'
    b'<fonts count="1"><font><sz val="11"/><name val="Calibri"/><family val="2"/></font></fonts>'
    b'<fills count="2"><fill><patternFill patternType="none"/></fill>'
    b'<fill><patternFill patternType="gray125"/></fill></fills>'
    b'<borders count="1"><border><left/><right/><top/><bottom/><diagonal/></border></borders>'
    b'<cellStyleXfs count="1"><xf numFmtId="0" fontId="0" fillId="0" borderId="0"/></cellStyleXfs>'
    b'<cellXfs count="1"><xf numFmtId="0" fontId="0" fillId="0" borderId="0" xfId="0"/></cellXfs>'
    b'<cellStyles count="1"><cellStyle name="Normal" xfId="0" builtinId="0"/></cellStyles>'
    b"</styleSheet>"
)

# Order of the first children of <styleSheet> (CT_Stylesheet).
_ORDER = (
    b"numFmts",
    b"fonts",
    b"fills",
    b"borders",
    b"cellStyleXfs",
    b"cellXfs",
    b"cellStyles",
    b"dxfs",
    b"tableStyles",
    b"colors",
    b"extLst",
)
_CHILD = {b"numFmts": b"numFmt", b"fonts": b"font", b"fills": b"fill", b"cellXfs": b"xf"}


class _Section:
    def __init__(self, existing: list[bytes]) -> None:
        self.existing = existing
        self.added: list[bytes] = []

    def __len__(self) -> int:
        return len(self.existing) + len(self.added)

    def add(self, element: bytes) -> int:
        self.added.append(element)
        return len(self) - 1


class StyleBook:
    """The styles part with lazily appended formats."""

    def __init__(self, data: bytes) -> None:
        self.data = data
        self.p = ns_prefix(data, MAIN_NS) or b""
        self.sections: dict[bytes, _Section] = {}
        for name, child in _CHILD.items():
            self.sections[name] = _Section(self._children(name, child))
        self._memo: dict[tuple[object, ...], int] = {}
        self._numfmt_codes: dict[str, int] = {}
        for el in self.sections[b"numFmts"].existing:
            mid = re.search(rb'numFmtId\s*=\s*"(\d+)"', el)
            code = re.search(rb'formatCode\s*=\s*"([^"]*)"', el)
            if mid and code:
                self._numfmt_codes.setdefault(_unescape(code.group(1)), int(mid.group(1)))

    @property
    def changed(self) -> bool:
        return any(s.added for s in self.sections.values())

    def _section_span(self, name: bytes) -> re.Match[bytes] | None:
        p = re.escape(self.p)
        return re.search(
            rb"<" + p + name + rb"\b([^>]*?)(?:/>|>(.*?)</" + p + name + rb">)", self.data, re.S
        )

    def _children(self, name: bytes, child: bytes) -> list[bytes]:
        m = self._section_span(name)
        if not m or m.group(2) is None:
            return []
        p = re.escape(self.p)
        pat = rb"<" + p + child + rb"\b[^>]*?(?:/>|>.*?</" + p + child + rb">)"
        return re.findall(pat, m.group(2), re.S)

    # --- what callers ask for -----------------------------------------------------

    def number_format(self, code: str | None) -> int:
        if code is None or code == "General":
            return 0
        if code in BUILTIN_FORMATS:
            return BUILTIN_FORMATS[code]
        if code in self._numfmt_codes:
            return self._numfmt_codes[code]
        used = [164 - 1, *self._numfmt_codes.values()]
        fid = max(used) + 1
        self._numfmt_codes[code] = fid
        self.sections[b"numFmts"].add(
            f'<{self.p.decode()}numFmt numFmtId="{fid}" formatCode="{esc_attr(code)}"/>'.encode()
        )
        return fid

    def font(self, kind: str) -> int:
        """'bold' or 'link': font 0 with bold / blue underlined."""
        key = ("font", kind)
        if key in self._memo:
            return self._memo[key]
        fonts = self.sections[b"fonts"]
        base = fonts.existing[0] if fonts.existing else b'<font><sz val="11"/></font>'
        p = self.p
        inner = (
            re.sub(rb"^<[^>]*>|</[^>]*>$", b"", base.strip()) if not base.endswith(b"/>") else b""
        )
        inner = re.sub(rb"<" + re.escape(p) + rb"(b|u|color)\b[^>]*/>", b"", inner)
        if kind == "bold":
            inner = b"<" + p + b"b/>" + inner
        else:
            inner = b"<" + p + b"u/>" + inner + b"<" + p + b'color rgb="FF0563C1"/>'
        idx = fonts.add(b"<" + p + b"font>" + inner + b"</" + p + b"font>")
        self._memo[key] = idx
        return idx

    def fill(self, rgb: str) -> int:
        """A solid fill of colour '#RRGGBB'."""
        key = ("fill", rgb)
        if key not in self._memo:
            p = self.p.decode()
            argb = "FF" + rgb.lstrip("#").upper()
            el = (
                f'<{p}fill><{p}patternFill patternType="solid"><{p}fgColor rgb="{argb}"/>'
                f'<{p}bgColor indexed="64"/></{p}patternFill></{p}fill>'
            )
            self._memo[key] = self.sections[b"fills"].add(el.encode())
        return self._memo[key]

    def xf(self, *, numfmt: int = 0, font: int = 0, fill: int = 0, wrap: bool = False) -> int:
        key = ("xf", numfmt, font, fill, wrap)
        if key not in self._memo:
            a = [f'numFmtId="{numfmt}" fontId="{font}" fillId="{fill}" borderId="0" xfId="0"']
            if numfmt:
                a.append('applyNumberFormat="1"')
            if font:
                a.append('applyFont="1"')
            if fill:
                a.append('applyFill="1"')
            p = self.p.decode()
            if wrap:
                align = f'<{p}alignment vertical="top" wrapText="1"/>'
                el = f'<{p}xf {" ".join(a)} applyAlignment="1">{align}</{p}xf>'
            else:
                el = f"<{p}xf {' '.join(a)}/>"
            self._memo[key] = self.sections[b"cellXfs"].add(el.encode())
        return self._memo[key]

    def with_fill(self, base: int | None, rgb: str) -> int:
        """A copy of cell format ``base`` (None: the default) with its fill replaced."""
        base = base or 0
        key = ("with_fill", base, rgb)
        if key not in self._memo:
            xfs = self.sections[b"cellXfs"]
            fill = self.fill(rgb)
            if base < len(xfs.existing):
                el = xfs.existing[base]
            elif base < len(xfs):
                el = xfs.added[base - len(xfs.existing)]
            else:
                el = (
                    xfs.existing[0]
                    if xfs.existing
                    else b'<xf numFmtId="0" fontId="0" borderId="0"/>'
                )
            m = re.match(rb"<[^>]*>", el)
            assert m is not None
            tag = set_attr(set_attr(m.group(), b"fillId", str(fill).encode()), b"applyFill", b"1")
            self._memo[key] = xfs.add(tag + el[m.end() :])
        return self._memo[key]

    # --- the finished part ----------------------------------------------------------

    def render(self) -> bytes:
        data = self.data
        for name in _CHILD:
            sec = self.sections[name]
            if not sec.added:
                continue
            data = self._append(data, name, sec)
        return data

    def _append(self, data: bytes, name: bytes, sec: _Section) -> bytes:
        p = self.p
        self.data = data
        m = self._section_span(name)
        add = b"".join(sec.added)
        count = str(len(sec)).encode()
        if m is None:
            new = b"<" + p + name + b' count="' + count + b'">' + add + b"</" + p + name + b">"
            pos = self._insert_pos(data, name)
            return data[:pos] + new + data[pos:]
        start_tag = b"<" + p + name + m.group(1) + b">"
        start_tag = set_attr(start_tag, b"count", count)
        body = (m.group(2) or b"") + add
        return data[: m.start()] + start_tag + body + b"</" + p + name + b">" + data[m.end() :]

    def _insert_pos(self, data: bytes, name: bytes) -> int:
        later = _ORDER[_ORDER.index(name) + 1 :]
        for nxt in later:
            m = re.search(rb"<" + re.escape(self.p) + nxt + rb"\b", data)
            if m:
                return m.start()
        return data.rfind(b"</" + self.p + b"styleSheet>")


def _unescape(raw: bytes) -> str:
    text = raw.decode("utf-8")
    for a, b in (("&quot;", '"'), ("&apos;", "'"), ("&lt;", "<"), ("&gt;", ">"), ("&amp;", "&")):
        text = text.replace(a, b)
    return text
