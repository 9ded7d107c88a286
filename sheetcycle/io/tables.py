"""Find compound tables in a sheet's cells and read their columns into typed arrays.

A table is a header row (anywhere in the first 30 rows, below any title rows) with at least
a formula column (or an element column, for a sheet of per-element values) and one more
recognised column, an optional units row right under it, and the data rows below, down to
the last row that names a compound. Columns keep their place in the sheet so that every
number can be traced back to its cell.

Units are settled here, at the border: each numeric column is converted to the internal
basis (kJ/mol, pm, g/cm³, nm³, K) as it is read, and a column whose unit cannot be used is
left out with a flag at its header cell.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, replace
from functools import lru_cache

import numpy as np
from sheetcycle.chem import parse_formula
from sheetcycle.errors import FormulaSyntaxError, UnitError
from sheetcycle.io.cells import CellError, SheetCells
from sheetcycle.io.evaluate import col_letters
from sheetcycle.io.headers import HeaderMatch, explain, recognise, split_header
from sheetcycle.io.numbers import is_missing_marker, parse_number_text
from sheetcycle.model import Column, Flag, Severity, Table
from sheetcycle.units import INTERNAL_UNIT, Conversion, conversion, parse_unit, to_internal

__all__ = [
    "HEADER_SEARCH_ROWS",
    "ColumnOverride",
    "a1",
    "find_tables",
    "numeric_cells",
]

#: How far down a sheet the header row is looked for.
HEADER_SEARCH_ROWS = 30

#: Quantities whose cells are kept as text, not numbers.
TEXT_QUANTITIES = frozenset(
    {
        "formula",
        "name",
        "state",
        "element",
        "structure_type",
        "reaction_equation",
        "process",
        "cycle_id",
        "source",
        "notes",
    }
)
#: Quantities that anchor a table: a header row needs one of them.
ANCHORS = frozenset({"formula", "element", "reaction_equation", "process"})

#: The unit assumed (with a flag) for a column whose header and units row give none: the
#: internal basis of its kind.
DEFAULT_UNIT = INTERNAL_UNIT


@dataclass(frozen=True)
class ColumnOverride:
    """A user's statement of what a column holds, overriding its header words.

    ``column`` is a column letter ("C") or the header text as typed. ``sheet`` limits it to
    one sheet (None: every sheet). ``quantity`` "ignore" drops the column.
    """

    column: str
    quantity: str | None = None
    unit: str | None = None
    convention: str | None = None
    index: int | None = None
    sheet: str | None = None

    def applies(self, sheet: str, col: int, header: str) -> bool:
        if self.sheet is not None and self.sheet != sheet:
            return False
        key = self.column.strip()
        return key.upper() == _letter(col) or key == header.strip()


@lru_cache(maxsize=16384)
def _letter(col: int) -> str:
    return col_letters(col)


def a1(row0: int, col0: int) -> str:
    """A1 reference of a 0-based (row, col)."""
    return f"{_letter(col0)}{row0 + 1}"


def _cell(rows: Sequence[Sequence[object]], r: int, c: int) -> object:
    if r >= len(rows):
        return None
    row = rows[r]
    return row[c] if c < len(row) else None


def _text(v: object) -> str | None:
    if isinstance(v, str):
        t = v.strip()
        return t or None
    return None


def numeric_cells(cells: Iterable[object]) -> tuple[np.ndarray, np.ndarray, dict[int, str]]:
    """Numbers of a column: (values, uncertainties from 'x ± u' text, reasons by offset).

    Blank cells are NaN without a reason (the caller knows a blank when it sees one); text,
    booleans and spreadsheet errors are NaN with a plain-words reason; only a literal 0 is 0.
    """
    vals: list[float] = []
    uncs: list[float] = []
    reasons: dict[int, str] = {}
    nan = math.nan
    for i, v in enumerate(cells):
        t = type(v)
        if t is float:
            vals.append(v)  # type: ignore[arg-type]
            uncs.append(nan)
        elif v is None:
            vals.append(nan)
            uncs.append(nan)
        elif t is int:
            vals.append(float(v))  # type: ignore[arg-type]
            uncs.append(nan)
        elif t is str:
            x, u, why = parse_number_text(v)  # type: ignore[arg-type]
            vals.append(x)
            uncs.append(u)
            if why:
                reasons[i] = why
        elif t is bool:
            vals.append(nan)
            uncs.append(nan)
            reasons[i] = f"expected a number, found the logical value {str(v).upper()}"
        elif isinstance(v, CellError):
            vals.append(nan)
            uncs.append(nan)
            reasons[i] = f"the cell holds the spreadsheet error {v.code}"
        else:
            vals.append(nan)
            uncs.append(nan)
            reasons[i] = f"expected a number, found {v!r}"
    return np.asarray(vals, dtype=float), np.asarray(uncs, dtype=float), reasons


def _score(
    row: Sequence[object], sheet: str, overrides: Sequence[ColumnOverride]
) -> tuple[int, list[HeaderMatch | None]]:
    """How much a row looks like a header: recognised columns, counting the user's overrides."""
    matches = [recognise(t) if (t := _text(v)) else None for v in row]
    said = [
        next(
            (
                o.quantity
                for o in overrides
                if o.quantity and o.quantity != "ignore" and o.applies(sheet, c, _text(v) or "")
            ),
            None,
        )
        for c, v in enumerate(row)
    ]
    quantities = [
        q or (m.quantity if m is not None and not m.uncertainty else None)
        for q, m in zip(said, matches, strict=True)
    ]
    anchored = any(q in ANCHORS for q in quantities)
    n = sum(1 for q in quantities if q is not None)
    return (n if anchored and n >= 2 else 0), matches


def _find_header(
    rows: Sequence[Sequence[object]], start: int, sheet: str, overrides: Sequence[ColumnOverride]
) -> tuple[int, list[HeaderMatch | None]] | None:
    best: tuple[int, int, list[HeaderMatch | None]] | None = None
    for r in range(start, min(start + HEADER_SEARCH_ROWS, len(rows))):
        s, matches = _score(rows[r], sheet, overrides)
        if s and (best is None or s > best[0]):
            best = (s, r, matches)
    return (best[1], best[2]) if best else None


def _units_row(rows: Sequence[Sequence[object]], r: int) -> dict[int, str] | None:
    """The units written in the row under the header, if that row is a units row."""
    if r >= len(rows):
        return None
    found: dict[int, str] = {}
    for c, v in enumerate(rows[r]):
        if v is None:
            continue
        t = _text(v)
        if t is None:
            return None  # a number: this is data, not units
        t = t.strip("()[] ")
        try:
            parse_unit(t)
        except UnitError:
            continue
        found[c] = t
    return found or None


def _last_data_row(rows: Sequence[Sequence[object]], first: int, anchor_col: int) -> int:
    last = first - 1
    for r in range(first, len(rows)):
        if _cell(rows, r, anchor_col) is not None:
            last = r
    return last


def find_tables(
    sheet: SheetCells,
    *,
    overrides: Sequence[ColumnOverride] = (),
) -> tuple[list[Table], list[Flag]]:
    """The compound (or element) tables of one sheet, and the flags about their columns."""
    rows = sheet.rows
    found = _find_header(rows, 0, sheet.name, overrides)
    if found is None:
        return [], []
    hr, matches = found
    flags: list[Flag] = []
    units_row = _units_row(rows, hr + 1)
    first = hr + 2 if units_row else hr + 1
    headers = [_text(v) or "" for v in rows[hr]]
    matches = list(matches) + [None] * (len(headers) - len(matches))
    specs: list[tuple[int, str, HeaderMatch | None, ColumnOverride | None]] = []
    for c, header in enumerate(headers):
        ov = next((o for o in overrides if o.applies(sheet.name, c, header)), None)
        if not header and ov is None:
            continue
        specs.append((c, header, matches[c], ov))

    anchor = next(
        (
            c
            for c, _, m, ov in specs
            if (ov.quantity if ov and ov.quantity else (m.quantity if m else None)) in ANCHORS
        ),
        None,
    )
    if anchor is None:
        return [], []
    last = _last_data_row(rows, first, anchor)
    n = max(last - first + 1, 0)
    per_atom_atoms: np.ndarray | None = None

    def atoms() -> np.ndarray:
        nonlocal per_atom_atoms
        if per_atom_atoms is None:
            out = np.full(n, np.nan)
            for i in range(n):
                t = _text(_cell(rows, first + i, anchor))
                if t:
                    try:
                        out[i] = parse_formula(t).atom_count()
                    except FormulaSyntaxError:
                        pass
            per_atom_atoms = out
        return per_atom_atoms

    columns: list[Column] = []
    for c, header, m, ov in specs:
        cell = a1(hr, c)
        if ov is not None and ov.quantity == "ignore":
            columns.append(Column(header=header, col=c, quantity=None, note="ignored by the user"))
            continue
        quantity = ov.quantity if ov and ov.quantity else (m.quantity if m else None)
        if quantity is None:
            bad_unit = _label_with_bad_unit(header)
            if bad_unit is not None:
                flags.append(Flag(
                    "unit-unusable", Severity.ERROR,
                    f"column '{header}': the header names {bad_unit[0]} but its unit "
                    f"'{bad_unit[1]}' is not one sheetcycle knows; expected an energy per mole "
                    "such as kJ/mol, kcal/mol or eV; the column was not used",
                    sheet.name, cell))
            columns.append(Column(header=header, col=c, quantity=None, note=explain(header)))
            continue
        if m is not None and m.uncertainty and not (ov and ov.quantity):
            columns.append(
                Column(
                    header=header,
                    col=c,
                    quantity="uncertainty",
                    note=f"uncertainty of {m.target or 'the column to its left'}",
                )
            )
            continue
        index = ov.index if ov and ov.index is not None else (m.index if m else 0)
        convention = ov.convention if ov and ov.convention else (m.convention if m else None)
        kind = m.kind if m is not None and m.quantity == quantity else _kind_of(quantity)
        cells = [_cell(rows, r, c) for r in range(first, first + n)]
        if quantity in TEXT_QUANTITIES or kind == "text":
            texts = tuple(
                _text(v) if isinstance(v, str) else (None if v is None else _plain(v))
                for v in cells
            )
            columns.append(
                Column(
                    header=header,
                    col=c,
                    quantity=quantity,
                    index=index,
                    convention=convention,
                    texts=texts,
                )
            )
            continue
        unit_text = (
            (ov.unit if ov and ov.unit else None)
            or (m.unit_text if m else None)
            or (units_row.get(c) if units_row else None)
            or (split_header(header)[1])
        )
        if not unit_text and kind != "dimensionless":
            unit_text = DEFAULT_UNIT[kind]
            if kind == "energy":
                flags.append(
                    Flag(
                        "unit-assumed",
                        Severity.WARNING,
                        f"column '{header}' gives no unit; its values were read as {unit_text}. "
                        f"Add the unit to the header (e.g. '{header} / kJ mol-1') to be sure.",
                        sheet.name,
                        cell,
                    )
                )
        try:
            conv: Conversion = conversion(unit_text or "", kind)
        except UnitError as exc:
            flags.append(
                Flag(
                    "unit-unusable",
                    Severity.ERROR,
                    f"column '{header}': {exc.problem}; the column was not used",
                    sheet.name,
                    cell,
                )
            )
            columns.append(
                Column(
                    header=header,
                    col=c,
                    quantity=None,
                    unit=unit_text,
                    note=f"unit not usable: {exc.problem}",
                )
            )
            continue
        raw, unc, reasons = numeric_cells(cells)
        if conv.per_entity == "atom":
            values = to_internal(raw, conv, atoms())
            uncs = to_internal(unc, replace(conv, offset=0.0), atoms())
        else:
            values = to_internal(raw, conv)
            uncs = to_internal(unc, replace(conv, offset=0.0))
        for i, why in reasons.items():
            if not math.isnan(raw[i]):
                code, sev = "cell-approximate", Severity.WARNING
            elif isinstance(cells[i], str) and is_missing_marker(cells[i]):  # type: ignore[arg-type]
                code, sev = "cell-missing", Severity.NOTE
            else:
                code, sev = "cell-not-number", Severity.ERROR
            flags.append(
                Flag(
                    code,
                    sev,
                    f"column '{header}' row {first + i + 1}: {why}",
                    sheet.name,
                    a1(first + i, c),
                )
            )
        columns.append(
            Column(
                header=header,
                col=c,
                quantity=quantity,
                index=index,
                unit=conv.unit_text,
                factor=conv.factor,
                convention=convention,
                values=values,
                uncertainties=uncs,
                atoms=atoms() if conv.per_entity == "atom" else None,
                from_text=np.fromiter(
                    (type(v) is str for v in cells), dtype=bool, count=len(cells)
                ),
            )
        )

    columns = _pair_uncertainties(columns, rows, first, n, sheet.name, flags)
    columns = _drop_duplicates(columns, hr, sheet.name, flags)
    table = Table(
        sheet=sheet.name,
        header_row=hr + 1,
        first_row=first + 1,
        last_row=first + n,
        columns=tuple(columns),
        units_row=hr + 2 if units_row else None,
    )
    return [table], flags


def _label_with_bad_unit(header: str) -> tuple[str, str] | None:
    """('the enthalpy of formation', 'bananas') for 'ΔfH° / bananas': a known label with a
    unit part that is not a unit, which the header reader then does not recognise at all."""
    for sep in (" / ", "/", " (", " [", ", "):
        if sep in header:
            label, _, unit = header.rpartition(sep)
            unit = unit.strip().rstrip(")]").strip()
            m = recognise(label.strip()) if label.strip() else None
            if m is not None and unit and m.kind not in ("text", "dimensionless"):
                return m.quantity.replace("_", " "), unit
    return None


#: Quantities that may appear in several columns (text the reader keeps, not numbers).
_REPEATABLE = frozenset({"notes", "source", "uncertainty", "name"})


def _drop_duplicates(columns: list[Column], hr: int, sheet: str, flags: list[Flag]) -> list[Column]:
    """A second column of the same quantity is not used (the first one is), and is flagged."""
    seen: dict[tuple[str, int], Column] = {}
    out: list[Column] = []
    for col in columns:
        key = (col.quantity or "", col.index)
        if col.quantity is None or col.quantity in _REPEATABLE or key not in seen:
            if col.quantity is not None:
                seen.setdefault(key, col)
            out.append(col)
            continue
        first = seen[key]
        flags.append(Flag(
            "column-duplicate", Severity.WARNING,
            f"column '{col.header}' holds the same quantity ({col.quantity.replace('_', ' ')}) "
            f"as column {_letter(first.col)} '{first.header}'; only the first one is used",
            sheet, a1(hr, col.col)))
        out.append(replace(col, quantity=None, values=None, texts=None,
                           note=f"duplicate of column {_letter(first.col)}; not used"))
    return out


def _plain(v: object) -> str:
    if isinstance(v, float) and v.is_integer():
        return str(int(v))
    if isinstance(v, CellError):
        return v.code
    return str(v)


def _kind_of(quantity: str) -> str:
    """Unit kind of a quantity named by an override (headers give it otherwise)."""
    from sheetcycle.io.headers import QUANTITY_KINDS

    return QUANTITY_KINDS.get(quantity, "energy")


def _pair_uncertainties(
    columns: list[Column],
    rows: Sequence[Sequence[object]],
    first: int,
    n: int,
    sheet: str,
    flags: list[Flag],
) -> list[Column]:
    """Attach each uncertainty column to the value column it belongs to."""
    out = list(columns)
    for j, col in enumerate(columns):
        if col.quantity != "uncertainty":
            continue
        target_q = col.note[len("uncertainty of ") :] if col.note else ""
        target: int | None = None
        for k in range(len(out)):
            if out[k].quantity == target_q and out[k].values is not None:
                target = k
        if target is None:
            for k in range(j - 1, -1, -1):
                if out[k].values is not None and out[k].quantity not in (None, "uncertainty"):
                    target = k
                    break
        if target is None:
            flags.append(
                Flag(
                    "uncertainty-unpaired",
                    Severity.WARNING,
                    f"uncertainty column '{col.header}' has no value column to belong to",
                    sheet,
                    a1(first - 1, col.col),
                )
            )
            continue
        t = out[target]
        raw, _, _ = numeric_cells(_cell(rows, r, col.col) for r in range(first, first + n))
        u = np.abs(raw) * t.factor
        merged = np.where(np.isnan(u), t.uncertainties, u) if t.uncertainties is not None else u
        out[target] = replace(t, uncertainties=merged, uncertainty_col=col.col)
        out[j] = replace(col, note=f"uncertainty of '{t.header}'")
    return out
