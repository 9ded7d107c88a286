"""Pictures on a new sheet: PNG parts and the DrawingML part that anchors them.

Each picture is one ``xdr:oneCellAnchor`` (ECMA-376 Part 1, §20.5.2.24): its top-left
corner sits on a cell and its size is fixed in EMU (914 400 per inch), so it keeps its size
when columns are resized. The size comes from the PNG itself: pixels from the IHDR chunk,
resolution from the pHYs chunk when it gives one in pixels per metre (PNG specification,
W3C Recommendation, 2nd ed., §11.2.2 and §11.3.5.3), otherwise 96 pixels per inch, the
resolution spreadsheet applications assume for a picture without one (common practice, no
source).
"""

from __future__ import annotations

import struct
from collections.abc import Sequence
from dataclasses import dataclass

from sheetcycle.errors import WriteError
from sheetcycle.io.package_xml import MAX_COL, MAX_ROW

__all__ = ["PNG_SIGNATURE", "Picture", "drawing_xml", "png_extent"]

PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"
EMU_PER_INCH = 914_400
_DEFAULT_DPI = 96.0
_INCH_PER_METRE = 0.0254

T_DRAWING = "http://schemas.openxmlformats.org/officeDocument/2006/relationships/drawing"
T_IMAGE = "http://schemas.openxmlformats.org/officeDocument/2006/relationships/image"
CT_DRAWING = "application/vnd.openxmlformats-officedocument.drawing+xml"
CT_PNG = "image/png"


@dataclass(frozen=True, slots=True)
class Picture:
    """One picture of a drawing part: anchor cell (0-based), size in EMU, image rel id."""

    row0: int
    col0: int
    cx: int
    cy: int
    rid: str


def png_extent(data: bytes, *, sheet: str, file: str) -> tuple[int, int]:
    """Display width and height of a PNG in EMU; WriteError if it is not a PNG."""
    if not isinstance(data, (bytes, bytearray)) or data[:8] != PNG_SIGNATURE or len(data) < 33:
        raise WriteError(
            "an image for a new sheet is not a PNG",
            file=file,
            sheet=sheet,
            expected="PNG bytes (signature 89 50 4E 47 0D 0A 1A 0A)",
            found=bytes(data[:8]).hex(" ") if isinstance(data, (bytes, bytearray)) else data,
        )
    length, kind = struct.unpack(">I4s", data[8:16])
    if kind != b"IHDR" or length != 13:
        raise WriteError("the PNG has no IHDR header chunk first", file=file, sheet=sheet)
    width, height = struct.unpack(">II", data[16:24])
    if width == 0 or height == 0:
        raise WriteError("the PNG is empty", file=file, sheet=sheet, found=(width, height))
    dpi_x = dpi_y = _DEFAULT_DPI
    pos = 8
    while pos + 8 <= len(data):
        length, kind = struct.unpack(">I4s", data[pos : pos + 8])
        if kind == b"pHYs" and length == 9 and pos + 17 <= len(data):
            ppx, ppy, unit = struct.unpack(">IIB", data[pos + 8 : pos + 17])
            if unit == 1 and ppx > 0 and ppy > 0:
                dpi_x, dpi_y = ppx * _INCH_PER_METRE, ppy * _INCH_PER_METRE
            break
        if kind in (b"IDAT", b"IEND"):
            break  # pHYs must come before the image data
        pos += 12 + length
    return round(width / dpi_x * EMU_PER_INCH), round(height / dpi_y * EMU_PER_INCH)


def check_anchor(row0: int, col0: int, *, sheet: str, file: str) -> None:
    if not (0 <= row0 < MAX_ROW and 0 <= col0 < MAX_COL):
        raise WriteError(
            "an image anchor lies outside the sheet",
            file=file,
            sheet=sheet,
            expected=f"0 <= row < {MAX_ROW}, 0 <= column < {MAX_COL} (0-based)",
            found=(row0, col0),
        )


def drawing_xml(pictures: Sequence[Picture]) -> bytes:
    """A complete drawing part (xl/drawings/drawingN.xml) with one anchor per picture."""
    out = [
        '<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
        '<xdr:wsDr xmlns:xdr="http://schemas.openxmlformats.org/drawingml/2006/'
        'spreadsheetDrawing" xmlns:a="http://schemas.openxmlformats.org/drawingml/2006/main" '
        'xmlns:r="http://schemas.openxmlformats.org/officeDocument/2006/relationships">'
    ]
    for k, p in enumerate(pictures, start=1):
        out.append(
            "<xdr:oneCellAnchor>"
            f"<xdr:from><xdr:col>{p.col0}</xdr:col><xdr:colOff>0</xdr:colOff>"
            f"<xdr:row>{p.row0}</xdr:row><xdr:rowOff>0</xdr:rowOff></xdr:from>"
            f'<xdr:ext cx="{p.cx}" cy="{p.cy}"/>'
            "<xdr:pic><xdr:nvPicPr>"
            f'<xdr:cNvPr id="{k + 1}" name="Picture {k}" descr="sheetcycle picture {k}"/>'
            '<xdr:cNvPicPr><a:picLocks noChangeAspect="1"/></xdr:cNvPicPr></xdr:nvPicPr>'
            f'<xdr:blipFill><a:blip r:embed="{p.rid}"/><a:stretch><a:fillRect/></a:stretch>'
            "</xdr:blipFill>"
            f'<xdr:spPr><a:xfrm><a:off x="0" y="0"/><a:ext cx="{p.cx}" cy="{p.cy}"/></a:xfrm>'
            '<a:prstGeom prst="rect"><a:avLst/></a:prstGeom></xdr:spPr></xdr:pic>'
            "<xdr:clientData/></xdr:oneCellAnchor>"
        )
    out.append("</xdr:wsDr>")
    return "".join(out).encode("utf-8")
