"""Cycle diagrams and parity plots for the rows of a run, and a sheet that holds them.

The drawing itself is :mod:`sheetcycle.plots` (pure data in, a matplotlib Figure out);
this module finds, for a row of a :class:`~sheetcycle.model.RunResult`, the numbers to
draw: the cycle's values from the row's trace (the values the engine used, the derived
term included) and its ions. Only flagged and picked rows are drawn, at most
:data:`MAX_IMAGES` per workbook, so a workbook of 100 000 rows does not become 100 000
pictures.
"""

from __future__ import annotations

import io
import math
from collections.abc import Callable, Iterable, Sequence
from pathlib import Path
from typing import IO, TYPE_CHECKING

from sheetcycle.engine.born_haber import TERMS
from sheetcycle.errors import UsageError
from sheetcycle.io.tables import a1
from sheetcycle.model import RowResult, RunResult, Severity, Table

if TYPE_CHECKING:
    from matplotlib.figure import Figure

    from sheetcycle.chem import IonAssignment
    from sheetcycle.io.package import NewSheet
    from sheetcycle.pipeline import TableContext
    from sheetcycle.plots import LevelDiagram

__all__ = [
    "DIAGRAM_SHEET",
    "MAX_IMAGES",
    "diagram_sheet",
    "diagram_sheet_for_run",
    "draw_row",
    "flagged",
    "parity_for_run",
    "parse_row_spec",
    "row_diagram",
    "run_tables_with_ions",
]

DIAGRAM_SHEET = "sheetcycle diagrams"
#: Pictures per workbook at most (cycle diagrams and the parity plot together).
MAX_IMAGES = 50
#: Resolution of embedded pictures: 96 pixels per inch is shown at the figure's own size.
_EMBED_DPI = 96
_ROW_PX = 20  # default row height, 15 pt = 20 px at 96 dpi

TableRows = tuple[Table, Sequence[RowResult], Sequence["IonAssignment | None"]]


def run_tables_with_ions(
    run: RunResult, contexts: Sequence[TableContext] | None = None
) -> list[TableRows]:
    """Every compound table of a run with its rows and their ions.

    From the pipeline's contexts when given; otherwise the ions are assigned again from the
    formulas (and any charge columns) with the built-in charges, as the run did.
    """
    if contexts is not None:
        return [(c.table, c.rows, c.ions) for c in contexts]
    from sheetcycle.data import ReferenceData
    from sheetcycle.pipeline import _assign  # the run's own ion assignment, reused

    by_key = {(r.sheet, r.row): r for r in run.rows}
    out: list[TableRows] = []
    ref = ReferenceData.builtin()
    for t in run.tables:
        if t.column("formula") is None:
            continue
        rows = [by_key.get((t.sheet, t.first_row + i)) for i in range(t.n_rows)]
        if any(r is None for r in rows):
            continue
        ions = _assign(t, ref, [[] for _ in range(t.n_rows)])
        out.append((t, rows, ions))  # type: ignore[arg-type]
    return out


def row_diagram(row: RowResult, ion: IonAssignment | None) -> LevelDiagram | None:
    """The level diagram of a row's cycle, or None when it cannot be drawn.

    Not drawn: rows without a cycle (no ions, or a term missing besides the derived one)
    and polyatomic ions (their levels are not drawn yet, see docs/diagrams.md).
    """
    from sheetcycle.data import is_element
    from sheetcycle.plots import cycle_levels

    if ion is None or not row.trace or not row.formula:
        return None
    a, b = ion.n_cation, ion.n_anion
    p, q = ion.cation_charge, -ion.anion_charge
    if not (float(a).is_integer() and float(b).is_integer()):
        return None
    if not (is_element(ion.cation) and is_element(ion.anion)):
        return None
    coeffs = row.trace["coefficients"]
    values = row.trace["values"]
    unknown = row.trace["solved"]
    if any(
        coeffs[t] != 0 and t != unknown and not math.isfinite(values[t]) for t in TERMS
    ):
        return None
    return cycle_levels(row.formula, int(a), int(b), int(p), int(q), ion.cation, ion.anion,
                        values, unknown)


def parse_row_spec(text: str) -> tuple[str, int]:
    """'Salts!12' or "'My salts'!12" → (sheet, 12)."""
    sheet, sep, row = text.rpartition("!")
    sheet = sheet.strip()
    if len(sheet) >= 2 and sheet[0] == sheet[-1] == "'":
        sheet = sheet[1:-1].replace("''", "'")
    if not sep or not sheet or not row.strip().isdigit() or int(row) < 1:
        raise UsageError("a row is written SHEET!ROW, e.g. 'Salts!12'", found=text,
                         expected="a sheet name, '!', and a sheet row number (1-based)")
    return sheet, int(row)


def _find(run: RunResult, tables: Sequence[TableRows], sheet: str,
          row: int) -> tuple[RowResult, IonAssignment | None]:
    for table, rows, ions in tables:
        if table.sheet == sheet and table.first_row <= row <= table.last_row:
            i = row - table.first_row
            return rows[i], ions[i]
    raise UsageError(f"no compound row {sheet}!{row} in {Path(run.input).name}",
                     expected="a data row of a compound table",
                     found=", ".join(f"{t.sheet}!{t.first_row}-{t.last_row}"
                                     for t, _, _ in tables) or "no compound tables")


def draw_row(run: RunResult, sheet: str, row: int, path: str | Path | IO[bytes] | None,
             format: str | None = None, *,
             contexts: Sequence[TableContext] | None = None) -> Figure:
    """Draw the cycle of one row of a run as PNG or SVG (format from the suffix if None)."""
    from sheetcycle.plots import draw_levels

    rr, ion = _find(run, run_tables_with_ions(run, contexts), sheet, row)
    d = row_diagram(rr, ion)
    if d is None:
        raise UsageError(
            f"the cycle of {sheet}!{row} ({rr.formula or 'no formula'}) cannot be drawn",
            expected="a compound of monatomic ions whose cycle is complete but for at most "
                     "one term", found="; ".join(f.message for f in rr.flags[:2]) or None)
    return draw_levels(d, _target(path), _format(path, format))


def _format(path: object, format: str | None) -> str:
    if format is not None:
        return format
    if isinstance(path, (str, Path)):
        suffix = Path(path).suffix.lower().lstrip(".")
        if suffix in ("png", "svg"):
            return suffix
        raise UsageError("the picture's file name must end in .png or .svg",
                         found=str(path), expected=".png or .svg")
    return "png"


def _target(path: str | Path | IO[bytes] | None) -> str | IO[bytes] | None:
    return str(path) if isinstance(path, Path) else path


def flagged(row: RowResult) -> bool:
    """A row with a warning or an error (notes do not count)."""
    return any(f.severity in (Severity.WARNING, Severity.ERROR) for f in row.flags)


def parity_for_run(run: RunResult, path: str | Path | IO[bytes] | None,
                   format: str | None = None, *, model: str | None = None) -> Figure | None:
    """Cycle lattice enthalpy against an ionic model's for every compound row of a run.

    ``model`` is one of :data:`sheetcycle.theory.MODELS`; by default the one that gives a
    value for the most rows. None when no row has both values.
    """
    from sheetcycle.plots import parity_plot
    from sheetcycle.theory import _TITLE, MODELS

    rows = [r for r in run.rows if r.formula and "lattice_enthalpy" in r.values]
    if model is None:
        counts = {m: sum(m in r.values for r in rows) for m in MODELS}
        model = max(MODELS, key=lambda m: counts[m])
    if model not in MODELS:
        raise UsageError("unknown lattice-energy model", found=model,
                         expected="one of " + ", ".join(MODELS))
    pairs = [r for r in rows if model in r.values]
    if not pairs:
        return None
    return parity_plot(
        [r.values["lattice_enthalpy"].value for r in pairs],
        [r.values[model].value for r in pairs],
        [r.formula or "" for r in pairs],
        [flagged(r) for r in pairs],
        _target(path),
        model_name=_TITLE.get(model, model),
        format=_format(path, format),
    )


def _png(fig: Figure) -> bytes:
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=_EMBED_DPI)
    return buf.getvalue()


def _rows_for(fig: Figure) -> int:
    height_px = fig.get_figheight() * _EMBED_DPI
    return math.ceil(height_px / _ROW_PX) + 2


def _quote(sheet: str) -> str:
    return "'" + sheet.replace("'", "''") + "'"


def diagram_sheet(
    run: RunResult,
    picked: Iterable[tuple[str, int]] = (),
    *,
    contexts: Sequence[TableContext] | None = None,
    limit: int = MAX_IMAGES,
    parity: bool = True,
    on_image: Callable[[], None] | None = None,
) -> NewSheet | None:
    """The "sheetcycle diagrams" sheet: the parity plot, then a diagram per picked row and
    per flagged row (warnings and errors), at most ``limit`` pictures in all.

    Picked rows come first, in the order given, then flagged rows in sheet order. Each
    diagram has a caption row linking to its compound row. None when there is nothing to
    draw. ``on_image`` is called after each picture (a progress bar's update).
    """
    from sheetcycle.io.package import AddedCell, NewSheet
    from sheetcycle.plots import draw_levels

    tables = run_tables_with_ions(run, contexts)
    picked_list = list(dict.fromkeys(picked))
    wanted: list[tuple[RowResult, IonAssignment | None, str]] = []
    seen: set[tuple[str, int]] = set()
    for sheet, row in picked_list:
        rr, ion = _find(run, tables, sheet, row)
        wanted.append((rr, ion, "picked"))
        seen.add((sheet, row))
    n_flagged = 0
    for _, rows, ions in tables:
        for rr, ion in zip(rows, ions, strict=True):
            if (rr.sheet, rr.row) not in seen and flagged(rr):
                n_flagged += 1
                wanted.append((rr, ion, "flagged"))
    t = AddedCell
    cells: list[list[AddedCell | None]] = [
        [t("sheetcycle: Born-Haber cycle diagrams", style="header")],
        [t("Levels to scale in kJ per mol of formula unit, relative to the elements in their "
           "standard states; the derived term is violet and dashed; a cycle that does not "
           "close ends its formation arrow on a dashed level of its own (docs/diagrams.md).")],
        [],
    ]
    images: list[tuple[int, int, bytes]] = []
    links: dict[tuple[int, int], str] = {}
    budget = max(int(limit), 0)
    if parity and budget:
        fig = parity_for_run(run, None, "png")
        if fig is not None:
            cells.append([t("Parity plot: cycle lattice enthalpy against an ionic model; "
                            "flagged compounds are labelled", style="header")])
            images.append((len(cells), 0, _png(fig)))
            cells.extend([[] for _ in range(_rows_for(fig))])
            budget -= 1
            if on_image:
                on_image()
    drawn = skipped = 0
    for rr, ion, why in wanted:
        if drawn >= budget:
            skipped += 1
            continue
        d = row_diagram(rr, ion)
        if d is None:
            continue
        fig = draw_levels(d, None)
        caption = f"{rr.formula} — {rr.sheet} row {rr.row} ({why})"
        worst = [f for f in rr.flags if f.severity in (Severity.WARNING, Severity.ERROR)]
        if worst:
            caption += f": {worst[0].code}"
        fcell = _formula_cell(tables, rr)
        if fcell is not None:
            links[(len(cells), 0)] = fcell
        cells.append([t(caption, style="warning" if worst else "header")])
        images.append((len(cells), 0, _png(fig)))
        cells.extend([[] for _ in range(_rows_for(fig))])
        drawn += 1
        if on_image:
            on_image()
    if not images:
        return None
    cap = (f"{drawn} diagram(s): {len(picked_list)} picked row(s), {n_flagged} flagged row(s); "
           f"at most {limit} pictures per workbook")
    if skipped:
        cap += f"; {skipped} more row(s) not drawn (draw them with 'sheetcycle diagram')"
    cells[2] = [t(cap)]
    return NewSheet(DIAGRAM_SHEET, cells, col_widths=(110,), links=links, images=images)


def _formula_cell(tables: Sequence[TableRows], rr: RowResult) -> str | None:
    for table, _, _ in tables:
        fcol = table.column("formula")
        if table.sheet == rr.sheet and fcol is not None:
            return f"{_quote(table.sheet)}!{a1(rr.row - 1, fcol.col)}"
    return None


def diagram_sheet_for_run(run: RunResult) -> NewSheet | None:
    """The diagram sheet as the run's settings ask for it (``diagrams``, ``diagram_rows``).

    None unless the settings record ``diagrams`` as true (the annotate option
    ``--diagrams``), so runs without it keep their outputs exactly as before.
    """
    if not run.settings.get("diagrams"):
        return None
    picked = [(str(s), int(r)) for s, r in run.settings.get("diagram_rows") or ()]
    return diagram_sheet(run, picked)
