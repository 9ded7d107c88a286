"""A fresh results workbook for a finished run, written with xlsxwriter.

Sheets, in order: "About" (what this is, settings, conventions, severity legend), one
results sheet per input table, "Flags" (every flag, linked to its results cell) and
"References" (every reference value used, with its source).

Output safety: every text goes through ``write_string`` and every number through
``write_number``; a missing number is a blank cell, never 0. So a message such as
'=HYPERLINK("x")' stays text, whatever it starts with. Output is byte-deterministic: the
document dates are fixed and nothing depends on the clock.
"""

from __future__ import annotations

import json
import math
import re
import tempfile
from collections.abc import Iterable
from dataclasses import dataclass, field
from datetime import datetime
from pathlib import Path
from typing import Any

import numpy as np
import xlsxwriter
from xlsxwriter.exceptions import XlsxWriterException
from xlsxwriter.format import Format
from xlsxwriter.utility import xl_rowcol_to_cell
from xlsxwriter.worksheet import Worksheet

from sheetcycle.io.atomic import atomic_output, write_error
from sheetcycle.io.report_json import to_json_value
from sheetcycle.model import Column, Flag, RowResult, RunResult, Severity, Table

__all__ = ["SEVERITY_FILLS", "results_sheet_name", "write_results_workbook"]

#: Our fills per severity: (background colour, its name in the legend).
SEVERITY_FILLS: dict[Severity, tuple[str, str]] = {
    Severity.ERROR: ("#F4CCCC", "soft red"),
    Severity.WARNING: ("#FCE8B2", "soft amber"),
    Severity.NOTE: ("#DCE8F5", "soft blue"),
}
_SEVERITY_MEANING = {
    Severity.ERROR: "the row's result is missing or wrong because of this",
    Severity.WARNING: "a result exists but should be looked at",
    Severity.NOTE: "information: a convention applied, a default used",
}
_RANK = {Severity.NOTE: 0, Severity.WARNING: 1, Severity.ERROR: 2}

# Fixed document date so the same run gives the same bytes (common practice, no source).
_FIXED_DATE = datetime(2000, 1, 1)
_MAX_ROWS = 1_048_576  # rows per worksheet in the xlsx format
_MAX_COLS = 16_384
_MAX_LINKS = 65_530  # hyperlinks per worksheet xlsxwriter (and Excel) accept
_HEADER_ROWS = 2  # results sheets: header as read, then our name [unit]
_RESERVED = {"about", "flags", "references", "history"}
_BAD_SHEET_CHARS = re.compile(r"[\[\]:*?/\\\x00-\x1f]")
_A1 = re.compile(r"^\$?([A-Za-z]{1,3})\$?([0-9]{1,7})$")

# Internal-basis unit of a numeric quantity, by a word in its registry key. The model's
# docstring fixes the basis; the first matching word wins.
_BASIS_UNITS = (
    ("heat_capacity", None),
    ("enthalpy", "kJ/mol"),
    ("energy", "kJ/mol"),
    ("affinity", "kJ/mol"),
    ("radius", "pm"),
    ("radii", "pm"),
    ("density", "g/cm3"),
    ("volume", "nm3"),
    ("temperature", "K"),
)

_CONVENTIONS = (
    "Lattice enthalpy is reported in the dissociation convention: "
    "MaXb(s) → a M^p+(g) + b X^q−(g), a positive number in kJ/mol.",
    "Electron-gain enthalpies are in the thermochemical convention: "
    "negative means exothermic (energy released when the electron is gained).",
    "Energies are per mol of formula unit (kJ/mol); temperatures in K; lengths in pm; "
    "densities in g/cm3; volumes in nm3 per formula unit.",
    "Input columns are shown converted to that basis; the first header row repeats "
    "the header as read.",
    "A missing value is a blank cell, never 0.",
    "Text is always stored as text, never as a formula.",
)


# ---------------------------------------------------------------------------- planning


@dataclass
class _Block:
    """One results sheet: a table (or the rows of a sheet outside any table) and its rows."""

    name: str
    sheet: str
    table: Table | None
    rows: list[RowResult] = field(default_factory=list)
    computed: list[tuple[str, str]] = field(default_factory=list)  # (name, unit)
    col_of: dict[int, int] = field(default_factory=dict)  # input column -> results column
    flags_col: int = 0
    top: list[str] = field(default_factory=list)  # header row 1: as read
    names: list[str] = field(default_factory=list)  # header row 2: our name [unit]

    @property
    def columns(self) -> tuple[Column, ...]:
        return self.table.columns if self.table is not None else ()


def _clean_sheet_text(text: str) -> str:
    text = _BAD_SHEET_CHARS.sub("_", text).strip().strip("'")
    return text or "Sheet"


def results_sheet_name(sheet: str, used: set[str]) -> str:
    """A unique (case-insensitive) sheet name ≤ 31 chars, e.g. 'Salts (results)'.

    A long input name is cut and marked with '…' so the ' (results)' tag always shows; a
    second table from the same sheet gets ' (results 2)'. ``used`` holds lower-cased names
    already taken and is updated.
    """
    base = _clean_sheet_text(sheet)
    n = 1
    while True:
        tag = " (results)" if n == 1 else f" (results {n})"
        room = 31 - len(tag)
        stem = base if len(base) <= room else base[: room - 1].rstrip() + "…"
        name = stem + tag
        if name.lower() not in used and name.lower() not in _RESERVED:
            used.add(name.lower())
            return name
        n += 1


def _computed_keys(rows: Iterable[RowResult]) -> list[tuple[str, str]]:
    seen: dict[tuple[str, str], None] = {}
    for r in rows:
        for name, v in r.values.items():
            seen.setdefault((name, v.unit), None)
    return list(seen)


def _plan_blocks(run: RunResult) -> list[_Block]:
    """Group rows by the table holding them, in table order; stray rows get their own block."""
    used: set[str] = set()
    blocks = [_Block(results_sheet_name(t.sheet, used), t.sheet, t) for t in run.tables]
    stray: dict[str, _Block] = {}
    for r in run.rows:
        home = next(
            (
                b
                for b in blocks
                if b.table is not None
                and b.sheet == r.sheet
                and b.table.first_row <= r.row <= b.table.last_row
            ),
            None,
        )
        if home is None:
            home = stray.get(r.sheet)
            if home is None:
                home = stray[r.sheet] = _Block("", r.sheet, None)
        home.rows.append(r)
    for b in stray.values():
        b.name = results_sheet_name(b.sheet, used)
    blocks.extend(stray.values())
    for b in blocks:
        b.computed = _computed_keys(b.rows)
        _lay_out(b)
    return blocks


def _check_limits(run: RunResult, blocks: list[_Block]) -> None:
    n_flags = sum(len(r.flags) for r in run.rows) + len(run.file_flags)
    counts = [(b.name, len(b.rows) + _HEADER_ROWS) for b in blocks]
    counts += [("Flags", n_flags + 1), ("References", len(run.references) + 1)]
    for name, n in counts:
        if n > _MAX_ROWS:
            raise write_error(
                f"too many rows for sheet '{name}' of the results workbook",
                expected=f"at most {_MAX_ROWS}",
                found=n,
            )
    for b in blocks:
        n_cols = len(b.names)
        if n_cols > _MAX_COLS:
            raise write_error(
                f"too many columns for sheet '{b.name}' of the results workbook",
                expected=f"at most {_MAX_COLS}",
                found=n_cols,
            )


# ------------------------------------------------------------------------------ cells


@dataclass(frozen=True)
class _Styles:
    title: Format
    bold: Format
    header: Format
    wrap: Format
    fill: dict[Severity, Format]
    fill_wrap: dict[Severity, Format]
    link: dict[Severity, Format]

    @classmethod
    def make(cls, wb: xlsxwriter.Workbook) -> _Styles:
        def fills(extra: dict[str, Any]) -> dict[Severity, Format]:
            return {
                s: wb.add_format({"bg_color": colour, "valign": "top", **extra})
                for s, (colour, _) in SEVERITY_FILLS.items()
            }

        return cls(
            title=wb.add_format({"bold": True, "font_size": 14}),
            bold=wb.add_format({"bold": True, "valign": "top"}),
            header=wb.add_format(
                {"bold": True, "bottom": 1, "bg_color": "#EEEEEE", "text_wrap": True}
            ),
            wrap=wb.add_format({"text_wrap": True, "valign": "top"}),
            fill=fills({}),
            fill_wrap=fills({"text_wrap": True}),
            link=fills({"font_color": "blue", "underline": 1}),
        )


def _put(ws: Worksheet, row: int, col: int, value: Any, fmt: Format | None = None) -> None:
    """Write one cell by its Python type; text is always a string cell, NaN a blank."""
    if value is None or (isinstance(value, float | np.floating) and math.isnan(value)):
        if fmt is not None:
            ws.write_blank(row, col, None, fmt)
    elif isinstance(value, bool | np.bool_):
        ws.write_boolean(row, col, bool(value), fmt)
    elif isinstance(value, int | float | np.integer | np.floating):
        ws.write_number(row, col, float(value), fmt)  # ±inf → #DIV/0! (nan_inf_to_errors)
    elif isinstance(value, str):
        ws.write_string(row, col, value, fmt)
    else:
        ws.write_string(row, col, _as_text(value), fmt)


def _as_text(value: Any) -> str:
    plain = to_json_value(value)
    return plain if isinstance(plain, str) else json.dumps(plain, ensure_ascii=False)


def _put_row(ws: Worksheet, row: int, values: Iterable[Any], fmt: Format | None = None) -> None:
    for col, v in enumerate(values):
        _put(ws, row, col, v, fmt)


def _widths(ws: Worksheet, widths: Iterable[float]) -> None:
    for col, w in enumerate(widths):
        ws.set_column(col, col, w)


def _width(*texts: str, low: float = 9, high: float = 40) -> float:
    longest = max((len(t) for t in texts), default=0)
    return float(min(high, max(low, longest + 2)))


def _worst(flags: Iterable[Flag]) -> Severity | None:
    sev = [Severity(f.severity) for f in flags]
    return max(sev, key=_RANK.__getitem__) if sev else None


# ------------------------------------------------------------------------- About sheet


def _write_about(ws: Worksheet, run: RunResult, blocks: list[_Block], st: _Styles) -> None:
    ws.set_column(0, 0, 22)
    ws.set_column(1, 1, 90)
    ws.set_column(2, 2, 55)
    lines: list[tuple[Any, ...]] = [
        ("tool", "sheetcycle"),
        ("version", run.version),
        ("input file", run.input),
        ("what this is", "A new workbook of results; the input file is not changed."),
        (),
        ("settings",),
    ]
    lines += [(f"  {k}", v) for k, v in run.settings.items()] or [("  (none)",)]
    lines += [(), ("conventions",)]
    lines += [("", text) for text in _CONVENTIONS]
    lines += [(), ("sheets",), ("  About", "this sheet")]
    lines += [(f"  {b.name}", f"results for the table on input sheet '{b.sheet}'") for b in blocks]
    lines += [
        ("  Flags", "every flag, with a link to its cell on the results sheet"),
        ("  References", "every reference value used, with its source"),
    ]
    ws.write_string(0, 0, "sheetcycle results", st.title)
    row = 2
    for line in lines:
        if line and line[0]:
            ws.write_string(row, 0, str(line[0]), st.bold)
        if len(line) > 1:
            _put(ws, row, 1, line[1], st.wrap)
        row += 1
    _write_legend(ws, row + 1, st)


def _write_legend(ws: Worksheet, row: int, st: _Styles) -> int:
    ws.write_string(row, 0, "severity legend", st.bold)
    for sev, (colour, colour_name) in SEVERITY_FILLS.items():
        row += 1
        ws.write_string(row, 0, f"  {sev.value}", st.fill[sev])
        ws.write_string(row, 1, _SEVERITY_MEANING[sev], st.wrap)
        ws.write_string(row, 2, f"fill: {colour_name} ({colour})", st.fill[sev])
    return row + 1


# ---------------------------------------------------------------------- results sheets


def _basis_unit(c: Column) -> str | None:
    if c.quantity is None or c.values is None:
        return None
    for word, unit in _BASIS_UNITS:
        if word in c.quantity:
            return unit
    return None


def _input_title(c: Column) -> str:
    if c.quantity is None:
        return c.header
    name = f"{c.quantity}_{c.index}" if c.index else c.quantity
    unit = _basis_unit(c)
    return f"{name} [{unit}]" if unit else name


def _as_read(c: Column) -> str:
    return f"{c.header} ({c.convention})" if c.convention else c.header


def _lay_out(b: _Block) -> None:
    """Fix the columns of a results sheet: both header rows, ``col_of`` and ``flags_col``."""
    top, names = ["header as read →", "as parsed"], ["input row", "formula"]
    for c in b.columns:
        b.col_of[c.col] = len(names)
        top.append(_as_read(c))
        names.append(_input_title(c))
        if c.uncertainties is not None:
            if c.uncertainty_col is not None:
                b.col_of[c.uncertainty_col] = len(names)
            unit = _basis_unit(c)
            top.append(f"u({c.header})")
            names.append(f"u({_input_title(c).split(' [')[0]})" + (f" [{unit}]" if unit else ""))
    for name, unit in b.computed:
        top += ["computed", "computed", "computed"]
        names += [f"{name} [{unit}]", f"u({name}) [{unit}]", f"method({name})"]
    b.flags_col = len(names)
    top.append("")
    names.append("flags")
    b.top, b.names = top, names


def _input_cell(c: Column, i: int, *, uncertainty: bool = False) -> Any:
    """What column ``c`` holds at data offset ``i``: number, text as read, or None."""
    arr = c.uncertainties if uncertainty else c.values
    if arr is not None and 0 <= i < len(arr) and not math.isnan(arr[i]):
        return float(arr[i])
    if uncertainty or c.texts is None or not 0 <= i < len(c.texts):
        return None
    if c.values is not None and c.quantity is not None:  # recognised numeric: blank, not text
        return None
    return c.texts[i]


def _method_text(method: str, sources: tuple[str, ...]) -> str:
    return f"{method}; sources: {'; '.join(sources)}" if sources else method


def _result_cells(b: _Block, r: RowResult) -> list[Any]:
    first = b.table.first_row if b.table is not None else r.row
    i = r.row - first
    cells: list[Any] = [r.row, r.formula]
    for c in b.columns:
        cells.append(_input_cell(c, i))
        if c.uncertainties is not None:
            cells.append(_input_cell(c, i, uncertainty=True))
    for name, unit in b.computed:
        v = r.values.get(name)
        if v is None or v.unit != unit:
            cells += [None, None, None]
        else:
            cells += [v.value, v.uncertainty, _method_text(v.method, v.sources)]
    return cells


def _write_results_sheet(ws: Worksheet, b: _Block, st: _Styles) -> None:
    _widths(ws, [_width(t, n) for t, n in zip(b.top[:-1], b.names[:-1], strict=True)])
    ws.set_column(b.flags_col, b.flags_col, 60)
    _put_row(ws, 0, b.top, st.header)
    _put_row(ws, 1, b.names, st.header)
    ws.freeze_panes(_HEADER_ROWS, 0)
    last = _HEADER_ROWS + len(b.rows) - 1
    ws.autofilter(_HEADER_ROWS - 1, 0, max(last, _HEADER_ROWS - 1), b.flags_col)
    for k, r in enumerate(b.rows):
        row = _HEADER_ROWS + k
        _put_row(ws, row, _result_cells(b, r))
        worst = _worst(r.flags)
        if worst is not None:
            text = "\n".join(
                f"{f.code} ({Severity(f.severity).value}): {f.message}" for f in r.flags
            )
            ws.write_string(row, b.flags_col, text, st.fill_wrap[worst])


# -------------------------------------------------------------------------- Flags sheet


def _parse_a1(cell: str | None) -> tuple[int, int] | None:
    """(1-based row, 0-based column) of an A1 reference ('C7', '$C$7', 'C7:D9'), or None."""
    if not cell:
        return None
    m = _A1.match(cell.split(":")[0].strip())
    if m is None:
        return None
    col = 0
    for ch in m.group(1).upper():
        col = col * 26 + ord(ch) - 64
    return int(m.group(2)), col - 1


@dataclass(frozen=True)
class _Where:
    """Where a flag points on the results sheets."""

    by_row: dict[tuple[str, int], tuple[_Block, int]]

    @classmethod
    def index(cls, blocks: list[_Block]) -> _Where:
        by_row = {
            (r.sheet, r.row): (b, _HEADER_ROWS + k) for b in blocks for k, r in enumerate(b.rows)
        }
        return cls(by_row)

    def target(self, sheet: str | None, cell: str | None, row: int | None) -> str | None:
        """'Name'!C7 on the results workbook, or None when the flag has no place there."""
        a1 = _parse_a1(cell)
        sheet_row = a1[0] if a1 else row
        if sheet is None or sheet_row is None:
            return None
        hit = self.by_row.get((sheet, sheet_row))
        if hit is None:
            return None
        b, out_row = hit
        out_col = b.col_of.get(a1[1], b.flags_col) if a1 else b.flags_col
        quoted = b.name.replace("'", "''")
        return f"'{quoted}'!{xl_rowcol_to_cell(out_row, out_col)}"


def _all_flags(run: RunResult) -> list[tuple[Flag, str | None, int | None]]:
    """(flag, sheet, row) for every row flag in row order, then every file flag."""
    out: list[tuple[Flag, str | None, int | None]] = [
        (f, f.sheet or r.sheet, r.row) for r in run.rows for f in r.flags
    ]
    out += [(f, f.sheet, None) for f in run.file_flags]
    return out


def _write_flags(ws: Worksheet, run: RunResult, blocks: list[_Block], st: _Styles) -> None:
    names = ["sheet", "cell", "code", "severity", "message", "in results"]
    _widths(ws, [18, 9, 16, 10, 80, 28])
    _put_row(ws, 0, names, st.header)
    ws.freeze_panes(1, 0)
    flags = _all_flags(run)
    ws.autofilter(0, 0, max(len(flags), 1), len(names) - 1)
    where = _Where.index(blocks)
    for k, (f, sheet, row) in enumerate(flags):
        sev = Severity(f.severity)
        out = k + 1
        _put_row(ws, out, [sheet, f.cell, f.code, sev.value], st.fill[sev])
        ws.write_string(out, 4, f.message, st.fill_wrap[sev])
        target = where.target(sheet, f.cell, row)
        if target is None:
            ws.write_blank(out, 5, None, st.fill[sev])
        elif k < _MAX_LINKS:
            ws.write_url(out, 5, f"internal:{target}", st.link[sev], string=target)
        else:
            ws.write_string(out, 5, target, st.fill[sev])


# --------------------------------------------------------------------- References sheet


def _write_references(ws: Worksheet, run: RunResult, st: _Styles) -> None:
    names = ["element", "quantity", "index", "value", "unit", "uncertainty", "source"]
    _widths(ws, [10, 26, 7, 12, 9, 12, 80])
    _put_row(ws, 0, names, st.header)
    ws.freeze_panes(1, 0)
    ws.autofilter(0, 0, max(len(run.references), 1), len(names) - 1)
    for k, ref in enumerate(run.references):
        row = [ref.element, ref.quantity, ref.index, ref.value, ref.unit, ref.uncertainty]
        _put_row(ws, k + 1, row)
        ws.write_string(k + 1, 6, ref.source, st.wrap)


# ------------------------------------------------------------------------------ writer

_OPTIONS = {
    "constant_memory": True,  # rows are written in order; keeps big runs small in memory
    "nan_inf_to_errors": True,  # belt and braces: NaN is written as a blank before this
    "strings_to_formulas": False,
    "strings_to_numbers": False,
    "strings_to_urls": False,
}


def _fill_workbook(wb: xlsxwriter.Workbook, run: RunResult, blocks: list[_Block]) -> None:
    wb.set_properties(
        {"title": "sheetcycle results", "author": "sheetcycle", "created": _FIXED_DATE}
    )
    st = _Styles.make(wb)
    _write_about(wb.add_worksheet("About"), run, blocks, st)
    for b in blocks:
        _write_results_sheet(wb.add_worksheet(b.name), b, st)
    _write_flags(wb.add_worksheet("Flags"), run, blocks, st)
    _write_references(wb.add_worksheet("References"), run, st)


def write_results_workbook(run: RunResult, path: Path, *, force: bool = False) -> None:
    """Write a new results workbook for ``run`` to ``path``, atomically.

    Refuses (``WriteError``, nothing written) when ``path`` exists and ``force`` is false,
    when it is the run's input file, or when a sheet would exceed the xlsx limits.
    """
    path = Path(path)
    blocks = _plan_blocks(run)
    _check_limits(run, blocks)
    inputs = [Path(run.input)] if run.input else []
    with (
        atomic_output(path, force=force, inputs=inputs) as tmp,
        tempfile.TemporaryDirectory(prefix="sheetcycle-xlsx-") as scratch,
    ):
        wb = xlsxwriter.Workbook(str(tmp), {**_OPTIONS, "tmpdir": scratch})
        try:
            _fill_workbook(wb, run, blocks)
        except BaseException:
            for ws in wb.worksheets():  # release constant_memory row files before cleanup
                getattr(ws, "_opt_close", lambda: None)()
            raise
        try:
            wb.close()
        except (OSError, XlsxWriterException) as exc:
            raise write_error(f"cannot write the results workbook ({exc})", file=str(path)) from exc
