"""Guards for reading untrusted workbook packages (zip files of XML parts).

No spreadsheet library limits zip expansion, so a small file can unpack to gigabytes.
:func:`check_zip` looks at the central directory before anything is parsed, and
:func:`open_member` counts the bytes actually inflated, because zip headers can lie.
XML parts are refused when they carry a document type declaration (the door to entity
expansion and external entities), and lxml parsers are built without entity resolution
or network access.

Default limits, measured here on sheet XML as xlsxwriter and Excel write it:

* ``max_total_uncompressed`` = 2 GiB. A 100,000 × 8 sheet of numbers is 36.9 MB of XML
  (46 bytes a cell); a full 1,048,576-row × 8-column sheet is about 402 MB, so the
  default passes it with five-fold margin (about 40 numeric columns at 1,048,576 rows).
* ``max_ratio`` = 100:1, checked only for members above 1 MiB uncompressed. Real sheet
  XML compresses 3.5:1 (random numbers) to about 15:1 (styled blanks, zeros, shared
  formulas: the row numbers in every cell keep it from compressing further); a zip bomb
  runs at 1000:1 and more.
* ``max_entries`` = 10,000 parts (a workbook with a few hundred sheets and their
  drawings has well under 2,000).
* The package as a whole is ratio-checked too, once it unpacks to more than 1 MiB: many
  members each just under the per-member threshold still add up to a bomb.
* ``max_cells`` = 50,000,000 grid cells per workbook (a 1,048,576 × 47 sheet), counting the
  blank cells and rows the reader fills in to reach a far cell: one cell at XFD1048576 in
  a few bytes of XML would otherwise cost a grid of 17 billion slots.

Each limit names the option that raises it (see docs/limits.md).
"""

from __future__ import annotations

import io
import os
import zipfile
from dataclasses import dataclass
from typing import IO

from sheetcycle.errors import ReadError, UsageError

__all__ = [
    "OPTIONS",
    "RATIO_CHECK_ABOVE",
    "CountingReader",
    "Limits",
    "check_xml_head",
    "check_zip",
    "open_member",
    "read_member",
    "safe_parser",
]

RATIO_CHECK_ABOVE = 1024 * 1024  # members smaller than this are not ratio-checked

#: The command-line option that raises each limit (cli.py maps them onto :class:`Limits`).
OPTIONS = {
    "max_entries": "--max-zip-entries",
    "max_total_uncompressed": "--max-unzipped-size",
    "max_ratio": "--max-zip-ratio",
    "max_cells": "--max-cells",
}


def _hint(limit: str) -> str:
    if limit == "max_ratio":  # a file that expands that much usually needs both raised
        return (f"raise it with {OPTIONS[limit]} (and {OPTIONS['max_total_uncompressed']}) "
                "if the file is trusted")
    return f"raise it with {OPTIONS[limit]} if the file is trusted"


_RAISE_HINT = _hint("max_total_uncompressed")


@dataclass(frozen=True)
class Limits:
    """How much a workbook may expand before it is refused as unsafe.

    ``max_entries``: zip members; ``max_total_uncompressed``: bytes of all members
    together (and of a CSV file); ``max_ratio``: uncompressed/compressed size of any
    member above 1 MiB and of the whole package; ``max_cells``: grid cells of all sheets
    together, blanks filled in between cells included.
    """

    max_entries: int = 10_000
    max_total_uncompressed: int = 2 * 1024**3
    max_ratio: float = 100.0
    max_cells: int = 50_000_000

    def __post_init__(self) -> None:
        for name in ("max_entries", "max_total_uncompressed", "max_ratio", "max_cells"):
            value = getattr(self, name)
            if isinstance(value, bool) or not isinstance(value, int | float) or not value > 0:
                raise UsageError(
                    f"{OPTIONS[name]} must be a positive number", found=value
                )


def _mib(n: int) -> str:
    return f"{n / 1024**2:,.1f} MiB"


def check_zip(path: str | os.PathLike[str], zf: zipfile.ZipFile, limits: Limits) -> None:
    """Refuse a package whose directory breaks the limits, before parsing anything."""
    file = os.fspath(path)
    infos = zf.infolist()
    if len(infos) > limits.max_entries:
        raise ReadError(
            f"has too many zip entries to be read safely ({_hint('max_entries')})",
            file=file,
            expected=f"at most {limits.max_entries:,} entries",
            found=len(infos),
        )
    total = 0
    packed = 0
    for info in infos:
        total += info.file_size
        packed += info.compress_size
        if info.file_size > RATIO_CHECK_ABOVE:
            ratio = info.file_size / max(info.compress_size, 1)
            if ratio > limits.max_ratio:
                raise ReadError(
                    f"zip entry {info.filename!r} expands {ratio:,.0f}:1 "
                    f"({_mib(info.compress_size)} to {_mib(info.file_size)}); "
                    f"refused as a possible zip bomb ({_hint('max_ratio')})",
                    file=file,
                    expected=f"at most {limits.max_ratio:g}:1",
                )
    if total > limits.max_total_uncompressed:
        raise ReadError(
            f"unpacks to {_mib(total)}, more than the limit of "
            f"{_mib(limits.max_total_uncompressed)} ({_RAISE_HINT})",
            file=file,
        )
    if total > RATIO_CHECK_ABOVE and total / max(packed, 1) > limits.max_ratio:
        raise ReadError(
            f"expands {total / max(packed, 1):,.0f}:1 as a whole ({_mib(packed)} to "
            f"{_mib(total)} in {len(infos):,} entries); refused as a possible zip bomb "
            f"({_hint('max_ratio')})",
            file=file,
            expected=f"at most {limits.max_ratio:g}:1",
        )


class CountingReader(io.RawIOBase):
    """A read-only stream that refuses to deliver more than ``allowed`` bytes."""

    def __init__(self, raw: IO[bytes], name: str, allowed: int, file: str | None) -> None:
        super().__init__()
        self._raw = raw
        self._name = name
        self._allowed = allowed
        self._file = file
        self.count = 0

    def readable(self) -> bool:
        return True

    def _tally(self, n: int) -> None:
        self.count += n
        if self.count > self._allowed:
            raise ReadError(
                f"zip entry {self._name!r} inflates to more than the {self._allowed:,} "
                f"bytes its header declares or the limits allow; refused as unsafe "
                f"({_RAISE_HINT})",
                file=self._file,
            )

    def read(self, size: int = -1) -> bytes:
        data = self._raw.read(size)
        self._tally(len(data))
        return data

    def readinto(self, buffer: memoryview | bytearray) -> int:  # type: ignore[override]
        data = self.read(len(buffer))
        buffer[: len(data)] = data
        return len(data)

    def close(self) -> None:
        self._raw.close()
        super().close()


def open_member(
    zf: zipfile.ZipFile, name: str, limits: Limits, *, file: str | None = None
) -> CountingReader:
    """Open one zip member as a byte stream bounded by its declared size and the limits."""
    info = zf.getinfo(name)
    allowed = min(info.file_size, limits.max_total_uncompressed)
    return CountingReader(zf.open(info), name, allowed, file)


def read_member(
    zf: zipfile.ZipFile, name: str, limits: Limits, *, file: str | None = None
) -> bytes:
    """The whole of one (small) zip member, counted, with its XML prolog checked."""
    with open_member(zf, name, limits, file=file) as stream:
        data = stream.read()
    check_xml_head(data, name, file=file, whole=True)
    return data


def _unsafe(part: str, why: str, file: str | None) -> ReadError:
    return ReadError(f"part {part!r} {why}; refused as unsafe", file=file)


def check_xml_head(data: bytes, part: str, *, file: str | None = None, whole: bool = False) -> None:
    """Refuse an XML part that declares a document type (DTD) or entities.

    A declaration can only come before the root element, so the prolog is enough: the
    XML declaration, comments and processing instructions are skipped up to the first
    other markup. ``data`` is the start of the part; unless it is the ``whole`` part, a
    prolog that does not end inside it is refused too (a long comment would otherwise hide
    a declaration from this check).
    """
    pos = 0
    n = len(data)
    while True:
        lt = data.find(b"<", pos)
        if lt < 0:
            if whole or not data[pos:].strip():
                # nothing but blanks so far: fine for a whole part (the parser reports an
                # empty one); for a head, only if the part really ends here
                if whole or n < 4096:
                    break
            raise _unsafe(part, f"has no root element in its first {n:,} bytes", file)
        if data.startswith(b"<?", lt):
            end = data.find(b"?>", lt + 2)
        elif data.startswith(b"<!--", lt):
            end = data.find(b"-->", lt + 4)
        elif data.startswith(b"<!", lt):
            raise _unsafe(part, "contains an XML document type declaration", file)
        elif lt + 1 >= n and not whole:
            raise _unsafe(part, f"has no root element in its first {n:,} bytes", file)
        else:
            break  # the root element
        if end < 0:
            if whole:
                break  # an unterminated comment: the parser reports it
            raise _unsafe(part, f"has no root element in its first {n:,} bytes", file)
        pos = end + 2
    head = data[:4096]
    if b"<!ENTITY" in head or b"<!DOCTYPE" in head:
        raise _unsafe(part, "contains an XML document type declaration", file)


def safe_parser(*, huge: bool = False):
    """An lxml parser that resolves no entities, loads no DTD and never uses the network."""
    from lxml import etree

    return etree.XMLParser(
        resolve_entities=False,
        no_network=True,
        load_dtd=False,
        dtd_validation=False,
        huge_tree=huge,
    )
