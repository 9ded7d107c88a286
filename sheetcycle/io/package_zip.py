"""Copying zip entries from one package to another without re-compressing them.

An unchanged part is copied as its compressed bytes: the output entry has the same
content, the same compression method and the same CRC as the input entry, and copying a
large part costs no more than reading it. This uses the write machinery of
:mod:`zipfile` (local header from ``ZipInfo.FileHeader``, central directory from
``ZipFile.filelist``), as ``ZipFile.write`` does.
"""

from __future__ import annotations

import copy
import struct
import zipfile

__all__ = ["copy_raw"]

_LOCAL_HEADER = struct.Struct("<4s2B4HL2L2H")
_DATA_DESCRIPTOR = 0x08
_ZIP64_EXTRA = 0x0001
_PIECE = 4 * 1024 * 1024


def _strip_zip64(extra: bytes) -> bytes:
    out = b""
    i = 0
    while i + 4 <= len(extra):
        xid, size = struct.unpack("<HH", extra[i : i + 4])
        if xid != _ZIP64_EXTRA:
            out += extra[i : i + 4 + size]
        i += 4 + size
    return out


def copy_raw(zin: zipfile.ZipFile, zout: zipfile.ZipFile, info: zipfile.ZipInfo) -> None:
    """Append entry ``info`` of ``zin`` to ``zout`` as its stored (compressed) bytes."""
    fp = zin.fp
    assert fp is not None and zout.fp is not None
    fp.seek(info.header_offset)
    header = fp.read(_LOCAL_HEADER.size)
    fields = _LOCAL_HEADER.unpack(header)
    if fields[0] != b"PK\x03\x04":
        raise zipfile.BadZipFile(f"bad local header for {info.filename!r}")
    fp.seek(fields[10] + fields[11], 1)  # file name and extra field
    new = copy.copy(info)
    new.flag_bits &= ~_DATA_DESCRIPTOR
    new.extra = _strip_zip64(info.extra)
    zip64 = info.file_size > zipfile.ZIP64_LIMIT or info.compress_size > zipfile.ZIP64_LIMIT
    with zout._lock:  # type: ignore[attr-defined]
        if zout._writing:  # type: ignore[attr-defined]
            raise ValueError("another entry is being written")
        zout.fp.seek(zout.start_dir)  # type: ignore[attr-defined]
        new.header_offset = zout.fp.tell()
        zout._writecheck(new)  # type: ignore[attr-defined]
        zout._didModify = True  # type: ignore[attr-defined]
        zout.fp.write(new.FileHeader(zip64))
        left = info.compress_size
        while left:
            piece = fp.read(min(left, _PIECE))
            if not piece:
                raise zipfile.BadZipFile(f"entry {info.filename!r} is truncated")
            zout.fp.write(piece)
            left -= len(piece)
        zout.filelist.append(new)
        zout.NameToInfo[new.filename] = new
        zout.start_dir = zout.fp.tell()  # type: ignore[attr-defined]
