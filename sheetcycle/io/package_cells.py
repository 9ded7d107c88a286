"""The new cells, rows and sheets the package writer adds, as worksheet XML bytes.

Text goes in as inline strings (``t="inlineStr"``) so the shared-string table stays as it
was, and text is always text: a message that starts with ``=`` is never a formula. A
formula cell carries its cached value (``<v>``): a number, or ``t="str"`` for text.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterator, Mapping, Sequence
from dataclasses import dataclass

from sheetcycle.io.package_styles import StyleBook
from sheetcycle.io.package_xml import col_letters, esc_attr, esc_text

__all__ = [
    "AddedCell",
    "CellStyler",
    "ColumnCells",
    "RowFormulas",
    "cell_xml",
    "new_sheet_chunks",
    "register_new_sheet_styles",
]

#: Severity -> fill colour '#RRGGBB'.
FillMap = Mapping[str, str]


@dataclass(frozen=True, slots=True, init=False)
class AddedCell:
    """One new cell. ``formula`` is A1 text without '='; ``value`` is its cached value."""

    value: float | str | None
    formula: str | None
    style: str | None  # header, number, text, error, warning, note

    def __init__(
        self, value: float | str | None, formula: str | None = None, style: str | None = None
    ) -> None:
        # Callers build hundreds of thousands of these: set the slots directly (2.4x
        # faster than the generated frozen __init__); the instance stays immutable.
        _SET_VALUE(self, value)
        _SET_FORMULA(self, formula)
        _SET_STYLE(self, style)


_SET_VALUE = AddedCell.__dict__["value"].__set__
_SET_FORMULA = AddedCell.__dict__["formula"].__set__
_SET_STYLE = AddedCell.__dict__["style"].__set__


class RowFormulas(Sequence[str | None]):
    """A column's formulas kept as a few templates and, per row, which one it uses.

    ``which[i]`` indexes ``templates`` (-1: no formula); the template's ``mark`` stands
    for the row's own sheet row, ``first_row + i``. The formula text of a row is made when
    it is read, so a 100,000-row column holds a small integer per row, not a string.
    """

    __slots__ = ("first_row", "mark", "templates", "which")

    def __init__(self, templates: Sequence[str], which: Sequence[int], first_row: int,
                 mark: str) -> None:
        import numpy as np

        self.templates = list(templates)
        self.which = np.asarray(which, dtype=np.int32)
        if self.which.size and int(self.which.max()) >= len(self.templates):
            raise ValueError("a row points at a template that is not there")
        self.first_row = first_row
        self.mark = mark

    def __len__(self) -> int:
        return int(self.which.size)

    def __getitem__(self, i):  # type: ignore[no-untyped-def,override]
        if isinstance(i, slice):
            lo, hi, step = i.indices(len(self))
            texts, mark = self.templates, self.mark
            return [None if k < 0 else texts[k].replace(mark, str(self.first_row + j))
                    for j, k in zip(range(lo, hi, step), self.which[lo:hi:step].tolist(),
                                    strict=True)]
        k = int(self.which[i])
        if k < 0:
            return None
        return self.templates[k].replace(self.mark, str(self.first_row + range(len(self))[i]))


def _none_for_nan(values: object) -> list[object]:
    """A column of values as cells take them: a float array's NaN is a blank (None)."""
    import numpy as np

    if isinstance(values, np.ndarray):
        return [None if v != v else v for v in values.tolist()]
    return list(values)  # type: ignore[call-overload]


class ColumnCells(Sequence[AddedCell]):
    """An added column's cells held column-wise: a value and a formula per row, and a style
    for every cell that holds something (one for all, or one per row).

    The plan of a large table makes one of these per column instead of an
    :class:`AddedCell` per cell; the sheet writer reads the lists directly. Indexing still
    gives :class:`AddedCell` objects, equal to those the column stands for.
    """

    __slots__ = ("formulas", "style", "values")

    def __init__(
        self,
        values: Sequence[float | str | None],  # or a float array, NaN for a blank
        formulas: Sequence[str | None] | None = None,
        style: str | Sequence[str | None] | None = None,
    ) -> None:
        if formulas is not None and len(formulas) != len(values):
            raise ValueError("one formula (or None) per value")
        if style is not None and not isinstance(style, str) and len(style) != len(values):
            raise ValueError("one style (or None) per value")
        self.values = values
        self.formulas = formulas
        self.style = style

    def __len__(self) -> int:
        return len(self.values)

    def value_list(self, lo: int = 0, hi: int | None = None) -> list[float | str | None]:
        """The values of rows lo..hi-1, None for a blank (a float array's NaN)."""
        return _none_for_nan(self.values[lo:hi])  # type: ignore[return-value]

    def at(self, i: int) -> tuple[float | str | None, str | None, str | None]:
        """(value, formula, style) of row ``i``."""
        value = self.values[i]
        if type(value) is not float and not isinstance(value, str | None):
            value = float(value)  # type: ignore[arg-type]  # a float array's number
            if value != value:
                value = None
        formula = self.formulas[i] if self.formulas is not None else None
        if value is None and formula is None:
            return None, None, None
        style = self.style if self.style is None or isinstance(self.style, str) else self.style[i]
        return value, formula, style

    def __getitem__(self, i):  # type: ignore[no-untyped-def,override]
        if isinstance(i, slice):
            return [self[k] for k in range(*i.indices(len(self)))]
        return AddedCell(*self.at(i))


def _num(v: float) -> str:
    return repr(float(v))


def _t(p: str, text: str) -> str:
    space = ' xml:space="preserve"' if text != text.strip() or "\n" in text else ""
    return f"<{p}t{space}>{esc_text(text)}</{p}t>"


def cell_xml(p: str, ref: str, s: int | None, value: object, formula: str | None) -> str:
    """One <c> element ('' for a blank cell without a format)."""
    sa = f' s="{s}"' if s else ""
    if formula is not None:
        f = f"<{p}f>{esc_text(formula)}</{p}f>"
        if type(value) is float and math.isfinite(value):  # the common case first
            return f'<{p}c r="{ref}"{sa}>{f}<{p}v>{value!r}</{p}v></{p}c>'
        if value is None:
            return f'<{p}c r="{ref}"{sa}>{f}</{p}c>'
        if isinstance(value, bool):
            return f'<{p}c r="{ref}"{sa} t="b">{f}<{p}v>{int(value)}</{p}v></{p}c>'
        if isinstance(value, str):
            return f'<{p}c r="{ref}"{sa} t="str">{f}<{p}v>{esc_text(value)}</{p}v></{p}c>'
        x = float(value)  # type: ignore[arg-type]
        if math.isfinite(x):
            return f'<{p}c r="{ref}"{sa}>{f}<{p}v>{_num(x)}</{p}v></{p}c>'
        return f'<{p}c r="{ref}"{sa} t="e">{f}<{p}v>#NUM!</{p}v></{p}c>'
    if value is None or (isinstance(value, float) and not math.isfinite(value)):
        return f'<{p}c r="{ref}"{sa}/>' if sa else ""
    if isinstance(value, str):
        return f'<{p}c r="{ref}"{sa} t="inlineStr"><{p}is>{_t(p, value)}</{p}is></{p}c>'
    if isinstance(value, bool):
        return f'<{p}c r="{ref}"{sa} t="b"><{p}v>{int(value)}</{p}v></{p}c>'
    x = float(value)  # type: ignore[arg-type]
    if not math.isfinite(x):
        return f'<{p}c r="{ref}"{sa}/>' if sa else ""
    return f'<{p}c r="{ref}"{sa}><{p}v>{_num(x)}</{p}v></{p}c>'


@dataclass
class CellStyler:
    """Turns a cell's style name into a cell format index, appending formats on demand."""

    styles: StyleBook
    fills: FillMap

    def header(self) -> int:
        return self.styles.xf(font=self.styles.font("bold"), fill=self.styles.fill("#EEEEEE"))

    def named(self, style: str | None, *, numeric: bool, number_xf: int, link: bool = False) -> int:
        """Format for style name ``style``; ``number_xf`` is the format numbers get."""
        st = self.styles
        if style is None:
            if link:
                return st.xf(font=st.font("link"))
            return number_xf if numeric else 0
        if style == "header":
            return self.header()
        if style == "number":
            return number_xf
        if style == "text":
            return st.xf(wrap=True)
        if style in self.fills:
            return st.with_fill(number_xf if numeric else None, self.fills[style])
        raise ValueError(f"unknown cell style {style!r}")


def _is_numeric(value: object, formula: str | None) -> bool:
    return formula is not None or (value is not None and not isinstance(value, str))


def register_new_sheet_styles(
    rows: Sequence[Sequence[object | None]],
    links: Mapping[tuple[int, int], str],
    styler: CellStyler,
    cell_attrs: Callable[[object], tuple[object, str | None, str | None]],
) -> None:
    """Add every cell format a new sheet's cells will ask for, so that the sheet can be
    made later (after the styles part is written) without adding one."""
    seen: set[tuple[object, bool, bool]] = set()
    for r0, row in enumerate(rows):
        for c0, cell in enumerate(row):
            if cell is None:
                continue
            value, formula, style = cell_attrs(cell)
            key = (style, _is_numeric(value, formula), (r0, c0) in links)
            if key not in seen:
                seen.add(key)
                styler.named(key[0], numeric=key[1], number_xf=0, link=key[2])  # type: ignore[arg-type]


def new_sheet_chunks(
    rows: Sequence[Sequence[object | None]],
    col_widths: Sequence[float],
    links: Mapping[tuple[int, int], str],
    styler: CellStyler,
    cell_attrs: Callable[[object], tuple[object, str | None, str | None]],
    drawing_rid: str | None = None,
    rows_per_chunk: int = 4096,
) -> Iterator[bytes]:
    """A complete worksheet part for a new sheet (no prefix, inline strings), a few
    thousand rows at a time, for streaming into the zip.

    ``drawing_rid`` is the id of the sheet's relationship to its drawing part (pictures),
    written as ``<drawing>`` after the page margins, where the schema puts it.
    """
    number_xf = 0
    out: list[str] = [
        '<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
        '<worksheet xmlns="http://schemas.openxmlformats.org/spreadsheetml/2006/main" '
        'xmlns:r="http://schemas.openxmlformats.org/officeDocument/2006/relationships">'
    ]
    width = max((len(r) for r in rows), default=0)
    height = len(rows)
    last = f"{col_letters(max(width, 1) - 1)}{max(height, 1)}"
    out.append(
        f'<dimension ref="A1:{last}"/>' if (width > 1 or height > 1) else '<dimension ref="A1"/>'
    )
    out.append('<sheetViews><sheetView workbookViewId="0"/></sheetViews>')
    out.append('<sheetFormatPr defaultRowHeight="15"/>')
    if col_widths:
        out.append("<cols>")
        for i, w in enumerate(col_widths):
            out.append(f'<col min="{i + 1}" max="{i + 1}" width="{float(w):g}" customWidth="1"/>')
        out.append("</cols>")
    out.append("<sheetData>")
    for r0, row in enumerate(rows):
        cells: list[str] = []
        for c0, cell in enumerate(row):
            if cell is None:
                continue
            value, formula, style = cell_attrs(cell)
            link = (r0, c0) in links
            s = styler.named(
                style, numeric=_is_numeric(value, formula), number_xf=number_xf, link=link
            )
            cells.append(cell_xml("", f"{col_letters(c0)}{r0 + 1}", s, value, formula))
        if cells:
            out.append(f'<row r="{r0 + 1}">{"".join(cells)}</row>')
        if r0 % rows_per_chunk == rows_per_chunk - 1:
            yield "".join(out).encode("utf-8")
            out.clear()
    out.append("</sheetData>")
    if links:
        out.append("<hyperlinks>")
        for (r0, c0), target in sorted(links.items()):
            out.append(
                f'<hyperlink ref="{col_letters(c0)}{r0 + 1}" location="{esc_attr(target)}"/>'
            )
        out.append("</hyperlinks>")
    out.append(
        '<pageMargins left="0.7" right="0.7" top="0.75" bottom="0.75" header="0.3" footer="0.3"/>'
    )
    if drawing_rid is not None:
        out.append(f'<drawing r:id="{esc_attr(drawing_rid)}"/>')
    out.append("</worksheet>")
    yield "".join(out).encode("utf-8")
