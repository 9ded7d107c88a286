"""The imperative shell around the cycle engine: tables in, row results and flags out.

For each compound table: parse the formulas, assign ions, gather every cycle term for every
row (the row's own cell where it has one, otherwise the reference data, the source recorded
either way), hand the arrays to the pure engine, and turn its arrays back into per-row
values and plain-words flags at the cells they concern.
"""

from __future__ import annotations

import math
import re
from collections.abc import Callable, Iterable, Mapping, Sequence
from dataclasses import dataclass, field
from functools import partial
from pathlib import Path
from typing import Any

import numpy as np

from sheetcycle import __version__
from sheetcycle.chem import IonAssignment, assign_ions, parse_formula
from sheetcycle.data import ReferenceData
from sheetcycle.engine.born_haber import (
    IDX,
    TERM_LABELS,
    TERMS,
    CycleStatus,
    CycleTerms,
    close_cycles,
)
from sheetcycle.engine.conventions import (
    CellIssue,
    ColumnConvention,
    electron_gain_from_column,
    lattice_from_column,
    positive_quantity,
)
from sheetcycle.engine.diagnose import RATIO_SLIPS, ratio_slips, residual_slips
from sheetcycle.errors import ChemistryError, FormulaSyntaxError
from sheetcycle.io.safety import Limits
from sheetcycle.io.tables import ColumnOverride, a1
from sheetcycle.model import (
    ROW_MARK,
    Column,
    Flag,
    ReferenceUse,
    RefValue,
    RowResult,
    RunResult,
    Severity,
    Table,
    TableValues,
    share,
)

__all__ = ["Settings", "close_table", "element_overrides", "run_tables"]

KJ = "kJ/mol"


@dataclass(frozen=True)
class Settings:
    """Options of a run. Every field is recorded in the outputs."""

    tolerance: float = 10.0  # kJ/mol: closure residuals below max(2σ, this) pass
    reference_tolerance: float = 0.10  # relative: user values this far from the built-in get a note
    column_overrides: tuple[ColumnOverride, ...] = ()
    reference_files: tuple[str, ...] = ()
    extra_references: tuple[tuple[str, str, int, RefValue], ...] = field(default=(), repr=False)
    covalent_threshold: float = 5.0  # percent: cycle value above the ionic models by more → flag
    model_spread: float = 10.0  # percent: ionic models disagreeing by more → note
    hydration_scale: float | None = (
        None  # ΔhydH(H+) of the user's single-ion scale; None = conventional
    )
    temperature: float | None = None  # K: report reaction enthalpies also at this temperature
    reconcile: bool = False  # workbook-wide least-squares reconciliation of shared terms
    reconcile_threshold: float = 3.0  # normalised residual above which an input is named
    diagrams: bool = False  # a sheet of cycle diagrams (flagged and picked rows) in the copy
    diagram_rows: tuple[tuple[str, int], ...] = ()  # (sheet, row) the user picked
    functions_as_values: bool = False  # our worksheet functions replaced by values in the copy
    limits: Limits = field(default_factory=Limits)  # how much a file may expand when read

    def as_dict(self) -> dict[str, Any]:
        return {
            "tolerance_kJ_per_mol": self.tolerance,
            "reference_tolerance_relative": self.reference_tolerance,
            "lattice_convention": "dissociation (MaXb(s) -> gaseous ions, positive)",
            "electron_gain_convention": (
                "thermochemical electron-gain enthalpy (negative = exothermic)"
            ),
            "column_overrides": [o.__dict__ for o in self.column_overrides],
            "reference_files": list(self.reference_files),
            "covalent_threshold_percent": self.covalent_threshold,
            "model_spread_percent": self.model_spread,
            "hydration_scale_h_plus_kJ_per_mol": self.hydration_scale,
            "temperature_K": self.temperature,
            "reconcile": self.reconcile,
            "reconcile_threshold": self.reconcile_threshold,
            "diagrams": self.diagrams,
            "diagram_rows": [[sheet, row] for sheet, row in self.diagram_rows],
            "functions_as_values": self.functions_as_values,
            "limits": {
                "max_zip_entries": self.limits.max_entries,
                "max_unzipped_bytes": self.limits.max_total_uncompressed,
                "max_zip_ratio": self.limits.max_ratio,
                "max_cells": self.limits.max_cells,
            },
        }


# ----------------------------------------------------------------------------- references

_ELEMENT_COLUMNS: dict[tuple[str, int], tuple[str, int]] = {
    # (column quantity, index) on an elements sheet -> (reference quantity, index)
    ("atomization", 0): ("atomization_enthalpy", 0),
    ("atomization_metal", 0): ("atomization_enthalpy", 0),
    ("atomization_nonmetal", 0): ("atomization_enthalpy", 0),
    ("ionization_energy", 1): ("ionization_energy", 1),
    ("ionization_energy", 2): ("ionization_energy", 2),
    ("ionization_energy", 3): ("ionization_energy", 3),
    ("ionization_energy", 4): ("ionization_energy", 4),
    ("electron_affinity", 1): ("electron_gain_enthalpy", 1),
    ("electron_affinity", 2): ("electron_gain_enthalpy", 2),
}


def element_overrides(table: Table, file_flags: list[Flag]) -> list[tuple[str, str, int, RefValue]]:
    """Reference values typed on a sheet of per-element values, with their cells as source."""
    sym_col = table.column("element")
    if sym_col is None or sym_col.texts is None:
        return []
    out: list[tuple[str, str, int, RefValue]] = []
    for col in table.columns:
        key = (col.quantity or "", col.index)
        if key not in _ELEMENT_COLUMNS or col.values is None:
            continue
        quantity, index = _ELEMENT_COLUMNS[key]
        values = col.values
        if col.quantity == "electron_affinity":
            conv = electron_gain_from_column(values, col.convention, col.index)
            _convention_flags(col, conv, table, file_flags)
            values = conv.values
        elif col.quantity in (
            "ionization_energy",
            "atomization",
            "atomization_metal",
            "atomization_nonmetal",
        ):
            values, issues = positive_quantity(values)
            for i in np.nonzero(issues)[0]:
                file_flags.append(
                    Flag(
                        "value-impossible",
                        Severity.ERROR,
                        f"{col.header} of {sym_col.texts[i]} is negative; an ionization or "
                        "atomization enthalpy is always positive; the value was not used",
                        table.sheet,
                        a1(table.first_row - 1 + int(i), col.col),
                    )
                )
        unc = col.uncertainties if col.uncertainties is not None else np.full(len(values), np.nan)
        for i, sym in enumerate(sym_col.texts):
            if not sym or math.isnan(values[i]):
                continue
            cell = a1(table.first_row - 1 + i, col.col)
            out.append(
                (
                    sym,
                    quantity,
                    index,
                    RefValue(float(values[i]), float(unc[i]), f"workbook {table.sheet}!{cell}"),
                )
            )
    return out


def _convention_flags(
    col: Column, conv: ColumnConvention, table: Table, file_flags: list[Flag], then: str = ""
) -> None:
    """Say, at the header cell, how a column's sign convention was decided (``then`` adds
    what follows from it)."""
    cell = a1(table.header_row - 1, col.col)
    if conv.contradicts_header:
        file_flags.append(
            Flag(
                "convention-from-signs",
                Severity.WARNING,
                f"column '{col.header}': the header suggests the {_conv_words(col.convention)} "
                f"convention, but the signs of its values say {_conv_words(conv.convention)}; "
                "read by the signs",
                table.sheet,
                cell,
            )
        )
    elif conv.decided_by == "signs":
        file_flags.append(
            Flag(
                "convention-from-signs",
                Severity.NOTE,
                f"column '{col.header}' read in the {_conv_words(conv.convention)} convention "
                f"(decided by the signs of its values){then}",
                table.sheet,
                cell,
            )
        )


# ----------------------------------------------------------------------------- row terms


_TOKEN = re.compile(r"\{R\|[^{}|]+\|[a-z_]+\|\d+\}")


def ref_token(element: str, quantity: str, index: int) -> str:
    """Placeholder for a reference value in a term's spreadsheet expression.

    The writer replaces it by the address of the cell that holds the value on its reference
    sheet; ``{R|Na|ionization_energy|1}``.
    """
    return f"{{R|{element}|{quantity}|{index}}}"


@dataclass
class _Term:
    """One cycle term gathered for every row: values, uncertainties and where each came from.

    ``exprs`` holds, per row, a spreadsheet expression that gives the term's value in kJ/mol
    in the internal convention from the row's own cells and reference placeholders
    (:func:`ref_token`), so that a writer can emit auditable formulas.
    """

    values: np.ndarray
    sigmas: np.ndarray
    sources: list[str | None]  # per row, where not a cell of the row; None where missing
    exprs: list[str | None]
    from_cell: np.ndarray  # bool per row: the value is the row's own cell
    # the columns the row's own cells came from (label, sheet, column, first data row), and
    # per row which of them (-1: none); the source text is made when read (:meth:`source`)
    cells_from: list[tuple[str, str, int, int]] = field(default_factory=list)
    which_cells: np.ndarray | None = None

    @classmethod
    def empty(cls, n: int) -> _Term:
        return cls(
            np.full(n, np.nan), np.full(n, np.nan), [None] * n, [None] * n, np.zeros(n, dtype=bool)
        )

    def source(self, i: int) -> str | None:
        """Where row i's value came from: '<column header>: Sheet!C5', or the reference."""
        if self.which_cells is not None and (k := int(self.which_cells[i])) >= 0:
            label, sheet, col, first_row = self.cells_from[k]
            return f"{label}: {sheet}!{a1(first_row - 1 + i, col)}"
        return self.sources[i]

    def fill_from_cells(
        self,
        col: Column,
        values: np.ndarray,
        table: Table,
        label: str,
        mask: np.ndarray | None = None,
        transform: str = "{}",
    ) -> None:
        """Take the row's own cell wherever it holds a value (and ``mask`` allows).

        ``transform`` turns the converted cell expression into the term, e.g. ``-({})`` for an
        electron affinity in the energy-released convention.
        """
        have = ~np.isnan(values) if mask is None else (~np.isnan(values) & mask)
        self.values = np.where(have, values, self.values)
        self.from_cell = self.from_cell | have
        if col.uncertainties is not None:
            self.sigmas = np.where(have, col.uncertainties, self.sigmas)
        rowless = a1(0, col.col)[:-1] + ROW_MARK
        made: dict[float, str] = {}  # one expression text per distinct factor
        if self.which_cells is None:
            self.which_cells = np.full(len(self.values), -1, dtype=np.int16)
        self.which_cells[have] = len(self.cells_from)
        self.cells_from.append((label, table.sheet, col.col, table.first_row))
        for i in np.nonzero(have)[0]:
            i = int(i)
            if col.from_text is not None and col.from_text[i]:
                self.exprs[i] = None  # a number read out of text: no formula can use the cell
                continue
            factor = col.factor * (col.atoms[i] if col.atoms is not None else 1.0)
            expr = made.get(factor)
            if expr is None:
                base = rowless if factor == 1.0 else f"{rowless}*{factor:.15g}"
                expr = made[factor] = transform.format(base)
            self.exprs[i] = expr


def _ref_term(
    n: int,
    keys: Sequence[Any],
    lookup: Callable[[Any], RefValue | None],
    label: Callable[[Any], str],
    used: dict[tuple[str, str, int], ReferenceUse],
    use_key: Callable[[Any], tuple[str, str, int]],
) -> _Term:
    """A term from the reference data, looked up once per distinct key, spread by index."""
    slot: dict[Any, int] = {}
    found: list[RefValue] = []
    texts: list[str] = []
    tokens: list[str] = []
    for key in dict.fromkeys(k for k in keys if k is not None):
        ref = lookup(key)
        if ref is None:
            continue
        slot[key] = len(found)
        found.append(ref)
        texts.append(f"{label(key)}: {ref.source}")
        element, quantity, index = use_key(key)
        tokens.append(ref_token(element, quantity, index))
        used.setdefault(
            (element, quantity, index),
            ReferenceUse(
                element, quantity, index, ref.value, ref.uncertainty, ref.unit, ref.source
            ),
        )
    idx = np.fromiter(
        (slot.get(k, -1) if k is not None else -1 for k in keys), dtype=np.intp, count=n
    )
    have = idx >= 0
    vals = np.array([r.value for r in found] + [np.nan])
    sig = np.array([r.uncertainty for r in found] + [np.nan])
    pick = np.where(have, idx, len(found))
    texts.append(None)  # type: ignore[arg-type]
    tokens.append(None)  # type: ignore[arg-type]
    src = [texts[j] for j in pick.tolist()]
    exprs = [tokens[j] for j in pick.tolist()]
    return _Term(vals[pick], sig[pick], src, exprs, np.zeros(n, dtype=bool))


def _assign(
    table: Table, ref: ReferenceData, flags: list[list[Flag]]
) -> list[IonAssignment | None]:
    fcol = table.column("formula")
    assert fcol is not None and fcol.texts is not None
    ccol = table.column("charge_cation")
    acol = table.column("charge_anion")
    scol = table.column("state")
    out: list[IonAssignment | None] = []
    cache: dict[tuple[str, int | None, int | None], IonAssignment | str] = {}
    for i, text in enumerate(fcol.texts):
        cell = a1(table.first_row - 1 + i, fcol.col)
        if not text:
            out.append(None)
            continue
        zc = _int_or_none(ccol, i)
        za = _int_or_none(acol, i)
        if za is not None and za > 0:
            za = -za  # an anion charge typed as a magnitude
        key = (text, zc, za)
        if key not in cache:
            try:
                f = parse_formula(text)
                cache[key] = assign_ions(
                    f,
                    cation_charges=ref.cation_charges,
                    anion_charge_of=ref.anion_charge,
                    cation_charge=zc,
                    anion_charge=za,
                )
            except (FormulaSyntaxError, ChemistryError) as exc:
                cache[key] = exc.problem if exc.problem else str(exc)
                if isinstance(exc, FormulaSyntaxError):
                    cache[key] = "formula:" + str(cache[key])
        got = cache[key]
        if isinstance(got, str) and _not_a_solid(text, scol, i):
            flags[i].append(
                Flag(
                    "not-ionic-solid",
                    Severity.NOTE,
                    f"{text} is not a solid ({_state_of(text, scol, i)}): it has no "
                    "lattice and no Born-Haber cycle; its values serve reactions",
                    table.sheet,
                    cell,
                )
            )
            out.append(None)
            continue
        if isinstance(got, str):
            code = "formula-unreadable" if got.startswith("formula:") else "ions-unassigned"
            msg = got.removeprefix("formula:")
            msg = msg if msg.startswith(text) else f"{text}: {msg}"
            flags[i].append(Flag(code, Severity.ERROR, msg, table.sheet, cell))
            out.append(None)
        else:
            out.append(got)
    return out


_FLUID_STATES = frozenset({"l", "g", "aq", "liquid", "gas", "sln"})


def _state_of(text: str, scol: Column | None, i: int) -> str | None:
    if scol is not None and scol.texts is not None and scol.texts[i]:
        return scol.texts[i].strip().strip("()").lower()
    try:
        return parse_formula(text).state
    except FormulaSyntaxError:
        return None


def _not_a_solid(text: str, scol: Column | None, i: int) -> bool:
    """A liquid, gas or solute row (a formation-enthalpy list for reactions, say)."""
    return _state_of(text, scol, i) in _FLUID_STATES


def _int_or_none(col: Column | None, i: int) -> int | None:
    if col is None:
        return None
    if col.values is not None:
        v = col.values[i]
        return None if math.isnan(v) else round(v)
    if col.texts is not None and col.texts[i]:
        t = col.texts[i].strip().replace("−", "-")
        sign = -1 if t.endswith("-") or t.startswith("-") else 1
        digits = t.strip("+-")
        return sign * int(digits) if digits.isdigit() else None
    return None


@dataclass
class _TableTrace:
    """The cycle of every row of a table, shared by the rows' lazy trace views.

    ``exprs`` are held with :data:`ROW_MARK` for the row number; a view puts it in.
    """

    def __init__(
        self,
        coefficients: np.ndarray,
        exprs: dict[str, list[str | None]],
        completed: np.ndarray,
        solved: list[str | None],
        first_row: int,
    ) -> None:
        self.coefficients = coefficients
        self.exprs = exprs
        self.completed = completed
        self.solved = solved
        self.first_row = first_row
        self._codes: list[int] | None = None

    def signature(self, i: int) -> int:
        """What a row's formulas depend on, with the row number left out, as a small code:
        rows with equal codes have the same formulas but for their own row numbers."""
        return self.codes()[i]

    def codes(self) -> list[int]:
        """Every row's :meth:`signature` code, in row order."""
        if self._codes is None:
            n = self.coefficients.shape[0]
            parts = [np.unique(c, return_inverse=True)[1].reshape(n)
                     for c in self.coefficients.T]
            for texts in (*(self.exprs[name] for name in TERMS), self.solved):
                ids: dict[str | None, int] = {}
                parts.append(np.fromiter((ids.setdefault(t, len(ids)) for t in texts),
                                         dtype=np.int64, count=n))
            # one code per distinct combination, pairing the parts one at a time (a
            # unique over rows of a 2-d array is ten times slower on a large table)
            code = np.zeros(n, dtype=np.int64)
            for part in parts:
                code = np.unique(code * (int(part.max(initial=0)) + 1) + part,
                                 return_inverse=True)[1].reshape(n)
            self._codes = code.tolist()
        return self._codes


def at_row(expr: str | None, row: int) -> str | None:
    """A term expression with the row's own sheet row (1-based) put in for ROW_MARK."""
    return expr if expr is None or ROW_MARK not in expr else expr.replace(ROW_MARK, str(row))


class _TraceView(Mapping[str, Any]):
    """One row's trace (coefficients, exprs, values, solved) without a dict per row."""

    __slots__ = ("_i", "_t")
    _KEYS = ("coefficients", "exprs", "values", "solved")

    def __init__(self, t: _TableTrace, i: int) -> None:
        self._t, self._i = t, i

    def __getitem__(self, key: str) -> Any:
        t, i = self._t, self._i
        if key == "coefficients":
            return dict(zip(TERMS, t.coefficients[i].tolist(), strict=True))
        if key == "exprs":
            return {name: at_row(t.exprs[name][i], t.first_row + i) for name in TERMS}
        if key == "values":
            return dict(zip(TERMS, t.completed[i].tolist(), strict=True))
        if key == "solved":
            return t.solved[i]
        raise KeyError(key)

    def __iter__(self):  # type: ignore[no-untyped-def]
        return iter(self._KEYS)

    def __len__(self) -> int:
        return len(self._KEYS)

    def signature(self) -> tuple[int, int]:
        """See :meth:`_TableTrace.signature`; with the table's identity."""
        return id(self._t), self._t.signature(self._i)

    def templates(self) -> dict[str, Any]:
        """The trace with the row number left as ROW_MARK in its expressions."""
        t, i = self._t, self._i
        return {"coefficients": self["coefficients"],
                "exprs": {name: t.exprs[name][i] for name in TERMS},
                "solved": t.solved[i]}


@dataclass
class TableContext:
    """What a later pass over a compound table gets: the table, its rows and the cycle."""

    table: Table
    rows: list[RowResult]  # one per data row, in sheet order
    ions: list[IonAssignment | None]
    lattice: np.ndarray  # Born-Haber lattice enthalpy per row (dissociation, kJ/mol; NaN)
    lattice_sigma: np.ndarray
    ref: ReferenceData
    settings: Settings
    file_flags: list[Flag]
    values: TableValues  # the rows' values held column-wise (each row's .values views it)


@dataclass
class WorkbookContext:
    """What a workbook-wide pass gets: every table and every compound table's context.

    A workbook pass returns new rows (e.g. one per reaction of a reaction table) and may add
    values and flags to the rows of ``contexts``.
    """

    tables: list[Table]
    contexts: list[TableContext]
    ref: ReferenceData
    settings: Settings
    file_flags: list[Flag]


def close_table(
    table: Table,
    ref: ReferenceData,
    settings: Settings,
    used: dict[tuple[str, str, int], ReferenceUse],
    file_flags: list[Flag],
    contexts: list[TableContext] | None = None,
) -> list[RowResult]:
    """Close the Born-Haber cycle of every row of a compound table.

    When ``contexts`` is given, the table's :class:`TableContext` is appended to it for the
    passes that run after every table has been closed.
    """
    n = table.n_rows
    fcol = table.column("formula")
    assert fcol is not None and fcol.texts is not None
    row_flags: list[list[Flag]] = [[] for _ in range(n)]
    ions = _assign(table, ref, row_flags)
    nan = np.nan
    a = np.array([x.n_cation if x else nan for x in ions], dtype=float)
    b = np.array([x.n_anion if x else nan for x in ions], dtype=float)
    p = np.array([x.cation_charge if x else nan for x in ions], dtype=float)
    q = np.array([-x.anion_charge if x else nan for x in ions], dtype=float)
    cat = [x.cation if x else None for x in ions]
    an = [x.anion if x else None for x in ions]

    def cell_of(col: Column, i: int) -> str:
        return a1(table.first_row - 1 + i, col.col)

    def col_issue_flags(
        col: Column,
        issues: np.ndarray,
        code: str,
        message: Callable[[int], str],
        severity: Severity,
    ) -> None:
        for i in np.nonzero(issues)[0]:
            row_flags[int(i)].append(
                Flag(code, severity, message(int(i)), table.sheet, cell_of(col, int(i)))
            )

    def mixed_sign_flags(col: Column, conv: ColumnConvention, consequence: str) -> None:
        """Cells whose sign differs from the rest of their column (either convention)."""
        text = (f"{col.header}: this value's sign differs from the rest of the column "
                f"({_conv_words(conv.convention)} convention){consequence}")
        col_issue_flags(col, conv.issues == CellIssue.MIXED_SIGN, "sign-mixed",
                        lambda i: text, Severity.WARNING)

    terms: dict[str, _Term] = {}
    # -- atomization of the metal and the non-metal
    terms["atomization_metal"] = _ref_term(
        n,
        cat,
        ref.atomization,
        lambda s: f"ΔatH({s})",
        used,
        lambda s: (s, "atomization_enthalpy", 0),
    )
    terms["atomization_nonmetal"] = _ref_term(
        n,
        an,
        ref.atomization,
        lambda s: f"ΔatH({s})",
        used,
        lambda s: (s, "atomization_enthalpy", 0),
    )
    ref_at_m = terms["atomization_metal"].values.copy()
    ref_at_x = terms["atomization_nonmetal"].values.copy()
    for qname in ("atomization_metal", "atomization_nonmetal"):
        col = table.column(qname)
        if col is not None and col.values is not None:
            vals, issues = positive_quantity(col.values)
            col_issue_flags(
                col,
                issues,
                "value-impossible",
                lambda i, c=col: (
                    f"{c.header} is negative; an atomization enthalpy is "
                    "always positive; the value was not used"
                ),
                Severity.ERROR,
            )
            expected = ref_at_m if qname == "atomization_metal" else ref_at_x
            vals = _check_against_reference(col, vals, expected, table, row_flags, settings)
            terms[qname].fill_from_cells(col, vals, table, col.header)
    bond = table.column("bond_dissociation")
    if bond is not None and bond.values is not None:
        vals, _ = positive_quantity(bond.values)
        # ΔatH(X) = ½ D(X–X) per atom of X, for the diatomic elements (common practice, no source)
        terms["atomization_nonmetal"].fill_from_cells(
            bond,
            vals / 2.0,
            table,
            f"½ {bond.header}",
            mask=~terms["atomization_nonmetal"].from_cell,
            transform="({})/2",
        )

    # -- ionization energies: IE1..IEp, each from the row or the reference
    ie_total = np.zeros(n)
    ie_var = np.zeros(n)
    ie_sources: list[list[str]] = [[] for _ in range(n)]
    ie_exprs: list[list[str]] = [[] for _ in range(n)]
    ie_missing = np.zeros(n, dtype=bool)
    for k in range(1, 5):
        need = p >= k
        if not need.any():
            continue
        t = _ref_term(
            n,
            [s if need[i] else None for i, s in enumerate(cat)],
            lambda s, k=k: ref.ionization(s, k),
            lambda s, k=k: f"IE{k}({s})",
            used,
            lambda s, k=k: (s, "ionization_energy", k),
        )
        col = table.column("ionization_energy", k)
        if col is not None and col.values is not None:
            vals, issues = positive_quantity(col.values)
            col_issue_flags(
                col,
                issues,
                "value-impossible",
                lambda i, c=col: (
                    f"{c.header} is negative; an ionization energy is "
                    "always positive; the value was not used"
                ),
                Severity.ERROR,
            )
            vals = _check_against_reference(col, vals, t.values, table, row_flags, settings)
            t.fill_from_cells(col, vals, table, col.header, mask=need)
        ie_missing |= need & np.isnan(t.values)
        ie_total += np.where(need, np.nan_to_num(t.values), 0.0)
        ie_var += np.where(need, np.nan_to_num(t.sigmas) ** 2, 0.0)
        for i in np.nonzero(need & ~np.isnan(t.values))[0]:
            ie_sources[int(i)].append(t.source(int(i)) or "")
            ie_exprs[int(i)].append(t.exprs[int(i)] or "")
    ion_values = np.where(ie_missing | np.isnan(p), np.nan, ie_total)
    joined: dict[tuple[str, ...], str] = {}  # rows of one cation share one text
    ion = _Term(
        ion_values,
        np.where(ie_var > 0, np.sqrt(ie_var), np.nan),
        [joined.setdefault(tuple(s), "; ".join(s)) if s else None for s in ie_sources],
        [
            share("+".join(e)) if e and not np.isnan(ion_values[i]) else None
            for i, e in enumerate(ie_exprs)
        ],
        np.zeros(n, dtype=bool),
    )
    sum_col = table.column("ionization_energy", 0)
    if sum_col is not None and sum_col.values is not None:
        vals, _ = positive_quantity(sum_col.values)
        _check_ie_sum(sum_col, vals, cat, p, ref, table, row_flags)
        ion.fill_from_cells(sum_col, vals, table, sum_col.header)
    terms["ionization"] = ion

    # -- electron gains of the anion
    eg1 = _ref_term(
        n,
        an,
        lambda s: ref.electron_gain(s, 1),
        lambda s: f"ΔegH1({s})",
        used,
        lambda s: (s, "electron_gain_enthalpy", 1),
    )
    egh = _ref_term(
        n,
        [s if q[i] >= 2 else None for i, s in enumerate(an)],
        lambda s: ref.electron_gain(s, 2),
        lambda s: f"ΔegH2({s})",
        used,
        lambda s: (s, "electron_gain_enthalpy", 2),
    )
    # A triply charged anion (N3−) also needs a third gain, which tables do not give.
    egh.values = np.where(q >= 3, np.nan, egh.values)
    for k, term in ((1, eg1), (2, egh)):
        col = table.column("electron_affinity", k)
        if col is None or col.values is None:
            continue
        conv = electron_gain_from_column(col.values, col.convention, k)
        _convention_flags(col, conv, table, file_flags)
        mixed_sign_flags(col, conv, "; check which convention it was copied in")
        mask = q >= k if k == 2 else None
        vals = _check_against_reference(col, conv.values, term.values, table, row_flags, settings)
        # the same conversion as electron_gain_from_column, written as a formula
        transform = "ABS({})" if k >= 2 else ("-({})" if conv.convention == "released" else "{}")
        term.fill_from_cells(col, vals, table, col.header, mask=mask, transform=transform)
    terms["electron_gain_1"] = eg1
    terms["electron_gain_higher"] = egh

    # -- formation and lattice enthalpies: the row's own
    form = _Term.empty(n)
    fcol_h = table.column("formation_enthalpy")
    if fcol_h is not None and fcol_h.values is not None:
        form.fill_from_cells(fcol_h, fcol_h.values, table, fcol_h.header)
    terms["formation_enthalpy"] = form
    lat = _Term.empty(n)
    lcol = table.column("lattice_enthalpy") or table.column("lattice_energy")
    if lcol is not None and lcol.values is not None:
        conv = lattice_from_column(lcol.values, lcol.convention)
        _convention_flags(lcol, conv, table, file_flags,
                          then="; results are given in the dissociation convention")
        col_issue_flags(
            lcol,
            conv.issues == CellIssue.IMPOSSIBLE,
            "value-impossible",
            lambda i, c=lcol, cv=conv: (
                f"{c.header}: a lattice enthalpy of this sign is "
                f"impossible in the {cv.convention} convention the header states; "
                "the value was not used"
            ),
            Severity.ERROR,
        )
        mixed_sign_flags(lcol, conv, ": formation and dissociation values seem mixed; its "
                         "magnitude was used")
        lat.fill_from_cells(lcol, conv.values, table, lcol.header, transform="ABS({})")
        if lcol.quantity == "lattice_energy":
            file_flags.append(
                Flag(
                    "energy-as-enthalpy",
                    Severity.NOTE,
                    f"column '{lcol.header}' holds lattice energies U; they were compared with the "
                    "cycle's lattice enthalpy directly, which differ by a few RT",
                    table.sheet,
                    a1(table.header_row - 1, lcol.col),
                )
            )
    terms["lattice_enthalpy"] = lat

    values = {name: terms[name].values for name in TERMS}
    sigmas = {name: terms[name].sigmas for name in TERMS}
    full = CycleTerms.from_columns(
        n_cation=a, n_anion=b, anion_charge=q, values=values, sigmas=sigmas
    )
    without_lattice = CycleTerms.from_columns(
        n_cation=a,
        n_anion=b,
        anion_charge=q,
        values={**values, "lattice_enthalpy": np.full(n, np.nan)},
        sigmas=sigmas,
    )
    sol = close_cycles(full, tolerance=settings.tolerance)
    cyc = close_cycles(without_lattice, tolerance=settings.tolerance)
    rows, store = _row_results(table, ref, settings, terms, sol, cyc, a, b, p, q, cat, an,
                               row_flags)
    if contexts is not None:
        lat_ok = (cyc.status == CycleStatus.SOLVED) & (cyc.solved == IDX["lattice_enthalpy"])
        contexts.append(
            TableContext(
                table,
                rows,
                ions,
                np.where(lat_ok, cyc.value, np.nan),
                np.where(lat_ok, cyc.sigma, np.nan),
                ref,
                settings,
                file_flags,
                store,
            )
        )
    return rows


def _conv_words(conv: str | None) -> str:
    return {
        "released": "energy-released (EA > 0)",
        "gain": "electron-gain enthalpy (ΔegH < 0)",
        "formation": "formation",
        "dissociation": "dissociation",
    }.get(conv or "", str(conv))


def _check_against_reference(
    col: Column,
    given: np.ndarray,
    expected: np.ndarray,
    table: Table,
    row_flags: list[list[Flag]],
    settings: Settings,
) -> np.ndarray:
    """Flag user values that look like a unit slip, or stray far from the built-in value.

    Returns ``given`` with the unit slips removed (NaN), so that the reference value is used
    for them instead: a number off by a unit factor is worse than none.
    """
    slip = ratio_slips(given, expected)
    with np.errstate(divide="ignore", invalid="ignore"):
        rel = np.abs(given - expected) / np.abs(expected)
    for i in np.nonzero(slip >= 0)[0]:
        i = int(i)
        _, _, words = RATIO_SLIPS[int(slip[i])]
        row_flags[i].append(
            Flag(
                "unit-slip",
                Severity.WARNING,
                f"{col.header} = {given[i]:.4g} kJ/mol after conversion, against {expected[i]:.4g} "
                f"kJ/mol in the reference data: {words}; the reference value was used instead",
                table.sheet,
                a1(table.first_row - 1 + i, col.col),
            )
        )
    far = (slip < 0) & (rel > settings.reference_tolerance)
    for i in np.nonzero(far)[0]:
        i = int(i)
        row_flags[i].append(
            Flag(
                "differs-from-reference",
                Severity.NOTE,
                f"{col.header} = {given[i]:.4g} kJ/mol differs from the reference value "
                f"{expected[i]:.4g} kJ/mol by {100 * rel[i]:.0f} %; the row's own value was used",
                table.sheet,
                a1(table.first_row - 1 + i, col.col),
            )
        )
    return np.where(slip >= 0, np.nan, given)


def _check_ie_sum(
    col: Column,
    given: np.ndarray,
    cat: Sequence[str | None],
    p: np.ndarray,
    ref: ReferenceData,
    table: Table,
    row_flags: list[list[Flag]],
) -> None:
    """A sum of ionization energies that stops one short of the cation's charge."""
    for i, sym in enumerate(cat):
        if sym is None or math.isnan(given[i]) or math.isnan(p[i]) or p[i] < 2:
            continue
        short = ref.ionization_sum(sym, int(p[i]) - 1)
        if short is not None and abs(given[i] - short.value) <= 0.01 * short.value:
            row_flags[i].append(
                Flag(
                    "ionization-short",
                    Severity.ERROR,
                    f"{col.header} = {given[i]:.1f} kJ/mol equals IE1..IE{int(p[i]) - 1} of {sym}, "
                    f"but {sym}{int(p[i])}+ needs IE1..IE{int(p[i])}: IE{int(p[i])} seems left out",
                    table.sheet,
                    a1(table.first_row - 1 + i, col.col),
                )
            )


def _row_results(
    table: Table,
    ref: ReferenceData,
    settings: Settings,
    terms: dict[str, _Term],
    sol: Any,
    cyc: Any,
    a: np.ndarray,
    b: np.ndarray,
    p: np.ndarray,
    q: np.ndarray,
    cat: Sequence[str | None],
    an: Sequence[str | None],
    row_flags: list[list[Flag]],
) -> tuple[list[RowResult], TableValues]:
    n = table.n_rows
    fcol = table.column("formula")
    assert fcol is not None and fcol.texts is not None
    lcol = table.column("lattice_enthalpy") or table.column("lattice_energy")
    fhcol = table.column("formation_enthalpy")
    li = IDX["lattice_enthalpy"]

    # Residual diagnosis, vectorized over the closed rows.
    tol = np.maximum(2 * np.nan_to_num(sol.residual_sigma), settings.tolerance)
    v = sol.completed
    candidates = {
        "ie_last": np.where(p >= 2, a * _last_ie(ref, cat, p), np.nan),
        "eg_higher": np.where(q >= 2, b * v[:, IDX["electron_gain_higher"]], np.nan),
        "metal_factor": np.where(
            a > 1, (a - 1) * (v[:, IDX["atomization_metal"]] + v[:, IDX["ionization"]]), np.nan
        ),
        "nonmetal_factor": np.where(
            b > 1,
            (b - 1)
            * (
                v[:, IDX["atomization_nonmetal"]]
                + v[:, IDX["electron_gain_1"]]
                + np.where(q >= 2, v[:, IDX["electron_gain_higher"]], 0)
            ),
            np.nan,
        ),
        "formation_kcal": (4.184 - 1.0) * v[:, IDX["formation_enthalpy"]],
    }
    names, match = residual_slips(sol.residual, tol, candidates)
    lat_slip = ratio_slips(v[:, li], cyc.value)

    statuses = sol.status.tolist()
    solved_k = sol.solved.tolist()
    lat_rows = ((cyc.status == CycleStatus.SOLVED) & (cyc.solved == li)).tolist()
    exceeds = sol.exceeds.tolist()
    is_solved, is_closed = (
        int(CycleStatus.SOLVED),
        int(CycleStatus.CLOSED),
    )
    shared = _TableTrace(
        sol.coefficients,
        {name: terms[name].exprs for name in TERMS},
        sol.completed,
        [TERMS[k] if st == is_solved else None for st, k in zip(statuses, solved_k, strict=True)],
        table.first_row,
    )
    notes_lat = _sigma_notes(terms, cyc, n)
    notes_res = _sigma_notes(terms, sol, n)
    # the values, column-wise: one put per quantity; method words are rendered when read
    has = np.fromiter((bool(f) for f in fcol.texts), dtype=bool, count=n)
    has &= sol.status != CycleStatus.NO_IONS
    closed = has & (sol.status == CycleStatus.CLOSED)
    solved = has & (sol.status == CycleStatus.SOLVED)
    store = TableValues(n)
    store.put("lattice_enthalpy", cyc.value, cyc.sigma, KJ,
              partial(_cycle_words, _LATTICE_WORDS, notes_lat, terms, "lattice_enthalpy"),
              present=has & np.asarray(lat_rows, dtype=bool))
    store.put("closure_residual", sol.residual, sol.residual_sigma, KJ,
              partial(_cycle_words, _CLOSURE_WORDS, notes_res, terms, None),
              present=closed)
    for out_name, names_ in _DERIVED.items():
        store.put(out_name, sol.value, sol.sigma, KJ,
                  partial(_derived_words, solved_k, terms),
                  present=solved & np.isin(sol.solved, [IDX[t] for t in names_]))
    results = [RowResult(sheet=table.sheet, row=table.first_row + i, formula=fcol.texts[i],
                         values=store.row(i), flags=row_flags[i]) for i in range(n)]
    for i in np.nonzero(has)[0].tolist():
        results[i].trace = _TraceView(shared, i)
    flagged = (closed & np.asarray(exceeds, dtype=bool)) | solved | (
        has & ~closed & ~solved)
    for i in np.nonzero(flagged)[0].tolist():
        formula = fcol.texts[i]
        flags = row_flags[i]
        status = statuses[i]
        fcell = a1(table.first_row - 1 + i, fcol.col)
        if status == is_closed:
            cell = a1(table.first_row - 1 + i, lcol.col) if lcol else fcell
            msg = (
                f"the cycle does not close: from the other terms the lattice enthalpy is "
                f"{cyc.value[i]:.1f} kJ/mol, the given value is {v[i, li]:.1f} kJ/mol; "
                f"the residual {sol.residual[i]:+.1f} ± {sol.residual_sigma[i]:.1f} kJ/mol "
                f"is larger than max(2σ, {settings.tolerance:g} kJ/mol)"
            )
            hint = _residual_hint(
                names,
                int(match[i]),
                int(lat_slip[i]),
                cat[i],
                an[i],
                int(p[i]),
                int(q[i]),
                a[i],
                b[i],
            )
            flags.append(
                Flag(
                    "cycle-open",
                    Severity.WARNING,
                    msg + (f". {hint}" if hint else ""),
                    table.sheet,
                    cell,
                )
            )
        elif status == is_solved:
            name = TERMS[solved_k[i]]
            if name in _OUT_NAME:
                flags.append(
                    Flag(
                        "term-derived",
                        Severity.NOTE,
                        f"the {TERM_LABELS[name]} was not given and was derived from "
                        f"the cycle: {sol.value[i]:.1f} kJ/mol",
                        table.sheet,
                        fcell,
                    )
                )
        else:  # underdetermined
            missing = [TERMS[k] for k in np.nonzero(sol.missing[i])[0]]
            words = ", ".join(
                _missing_words(t, cat[i], an[i], int(p[i]), int(q[i])) for t in missing
            )
            cell = fcell
            if "formation_enthalpy" in missing and fhcol is not None:
                cell = a1(table.first_row - 1 + i, fhcol.col)
            flags.append(
                Flag(
                    "inputs-missing",
                    Severity.ERROR,
                    f"cannot close the cycle of {formula}: missing {words}; a cycle "
                    "can be solved for one missing term only",
                    table.sheet,
                    cell,
                )
            )
    return results, store


_LATTICE_WORDS = ("Born-Haber cycle: ΔH_L = a·(ΔatH(M) + ΣIE) + b·(ΔatH(X) + ΣΔegH) − ΔfH; "
                  "dissociation convention")
_CLOSURE_WORDS = "cycle lattice enthalpy minus the given lattice enthalpy"
#: the cycle term a solved row derived -> the name of the value it reports
_OUT_NAME = {
    "formation_enthalpy": "formation_enthalpy",
    "electron_gain_1": "electron_gain_enthalpy",
    "electron_gain_higher": "electron_gain_enthalpy",
    "atomization_metal": "atomization_enthalpy",
    "atomization_nonmetal": "atomization_enthalpy",
    "ionization": "ionization_energy",
}
_DERIVED: dict[str, list[str]] = {}
for _term, _out in _OUT_NAME.items():
    _DERIVED.setdefault(_out, []).append(_term)


def _cycle_words(method: str, notes: Sequence[str], terms: dict[str, _Term],
                 exclude: str | None, i: int) -> tuple[str, list[str]]:
    """Method and sources of a row's cycle lattice enthalpy or closure residual."""
    return method + notes[i], _sources(terms, i, exclude=() if exclude is None else (exclude,))


def _derived_words(solved_k: Sequence[int], terms: dict[str, _Term],
                   i: int) -> tuple[str, list[str]]:
    """Method and sources of the term a row's cycle was solved for."""
    name = TERMS[solved_k[i]]
    return (f"Born-Haber cycle solved for the {TERM_LABELS[name]}",
            _sources(terms, i, exclude=(name,)))


def _sigma_notes(terms: dict[str, _Term], sol: Any, n: int) -> list[str]:
    """Per row: which terms the uncertainty leaves out, when some have none ('' otherwise)."""
    names = [name for name in TERMS]
    lacking = np.stack(
        [
            (sol.coefficients[:, IDX[name]] != 0)
            & ~np.isnan(terms[name].values)
            & np.isnan(terms[name].sigmas)
            & ((name != "lattice_enthalpy") | (sol.status == CycleStatus.CLOSED))
            for name in names
        ],
        axis=1,
    )
    cache: dict[bytes, str] = {}
    out: list[str] = []
    for row in lacking:
        key = row.tobytes()
        if key not in cache:
            missing = [TERM_LABELS[names[k]] for k in np.nonzero(row)[0]]
            cache[key] = (
                (
                    "; the uncertainty counts only the terms that have one (none given "
                    "for: " + ", ".join(missing) + ")"
                )
                if missing
                else ""
            )
        out.append(cache[key])
    return out


def _last_ie(ref: ReferenceData, cat: Sequence[str | None], p: np.ndarray) -> np.ndarray:
    """IE_p of each row's cation (the term a derivation most often leaves out)."""
    out = np.full(len(cat), np.nan)
    for i, s in enumerate(cat):
        if s is not None and not math.isnan(p[i]) and p[i] >= 2:
            r = ref.ionization(s, int(p[i]))
            if r is not None:
                out[i] = r.value
    return out


def _residual_hint(
    names: tuple[str, ...],
    match: int,
    lat_slip: int,
    m: str | None,
    x: str | None,
    p: int,
    q: int,
    a: float,
    b: float,
) -> str:
    if lat_slip >= 0:
        return "The given lattice enthalpy: " + RATIO_SLIPS[lat_slip][2]
    if match < 0:
        return ""
    what = names[match]
    return {
        "ie_last": f"The residual matches IE{p} of {m}: was the last ionization energy "
        f"left out where the given value was derived?",
        "eg_higher": f"The residual matches the second electron gain of {x}: was it left out "
        "where the given value was derived?",
        "metal_factor": f"The residual matches {a - 1:g} × (ΔatH + ΣIE) of {m}: was the "
        f"stoichiometric factor {a:g} for {m} missed?",
        "nonmetal_factor": f"The residual matches {b - 1:g} × (ΔatH + ΣΔegH) of {x}: was the "
        f"stoichiometric factor {b:g} for {x} missed?",
        "formation_kcal": "The residual matches an enthalpy of formation in kcal/mol read as "
        "kJ/mol: check the unit of the formation column",
    }[what]


def _missing_words(term: str, m: str | None, x: str | None, p: int, q: int) -> str:
    if term == "ionization":
        return f"ionization energies IE1..IE{p} of {m}"
    if term == "electron_gain_higher":
        return (
            f"electron gains 2..{q} of {x} (no tabulated value; give them in a column "
            "or on an elements sheet)"
        )
    if term in ("atomization_metal",):
        return f"the atomization enthalpy of {m}"
    if term == "atomization_nonmetal":
        return f"the atomization enthalpy of {x}"
    if term == "electron_gain_1":
        return f"the first electron-gain enthalpy of {x}"
    return f"the {TERM_LABELS[term]}"


def _sources(terms: dict[str, _Term], i: int, exclude: Iterable[str] = ()) -> list[str]:
    skip = set(exclude)
    return [s for name, t in terms.items() if name not in skip and (s := t.source(i))]


# ----------------------------------------------------------------------------- whole run


def _route_to_rows(flags: list[Flag], rows: Sequence[RowResult]) -> list[Flag]:
    """Attach each cell flag to the compound row it concerns; keep the rest file-level."""
    by_row = {(r.sheet, r.row): r for r in rows}
    rest: list[Flag] = []
    for f in flags:
        digits = (f.cell or "").lstrip("ABCDEFGHIJKLMNOPQRSTUVWXYZ")
        target = by_row.get((f.sheet or "", int(digits))) if digits.isdigit() else None
        if target is None:
            rest.append(f)
        else:
            target.flags.insert(0, f)
    return rest


def run_tables(
    path: str | Path,
    tables: Sequence[Table],
    settings: Settings,
    file_flags: list[Flag],
    *,
    reference: ReferenceData | None = None,
) -> RunResult:
    """Close every compound table's cycles, with any element sheet's values as references."""
    from sheetcycle.model import forget_shared

    forget_shared()
    base = reference or ReferenceData.builtin()
    overrides: list[tuple[str, str, int, RefValue]] = list(settings.extra_references)
    for t in tables:
        if t.column("element") is not None and t.column("formula") is None:
            overrides.extend(element_overrides(t, file_flags))
    ref = base.with_overrides(overrides) if overrides else base
    used: dict[tuple[str, str, int], ReferenceUse] = {}
    rows: list[RowResult] = []
    contexts: list[TableContext] = []
    for t in tables:
        if t.column("formula") is not None:
            rows.extend(close_table(t, ref, settings, used, file_flags, contexts))
    from sheetcycle.passes import TABLE_PASSES, WORKBOOK_PASSES

    for ctx in contexts:
        for table_pass in TABLE_PASSES:
            table_pass(ctx)
    for workbook_pass in WORKBOOK_PASSES:
        rows.extend(
            workbook_pass(
                WorkbookContext(
                    tables=list(tables),
                    contexts=contexts,
                    ref=ref,
                    settings=settings,
                    file_flags=file_flags,
                )
            )
        )
    file_flags = _route_to_rows(file_flags, rows)
    exprs: set[str] = set()
    for shared in {
        id(r.trace._t): r.trace._t for r in rows if isinstance(r.trace, _TraceView)
    }.values():
        for row_exprs in shared.exprs.values():
            exprs.update(e for e in row_exprs if e)
    pointed = {tok for e in exprs for tok in _TOKEN.findall(e)}
    references = [u for key, u in used.items() if ref_token(*key) in pointed]
    return RunResult(
        version=__version__,
        input=str(path),
        tables=list(tables),
        rows=rows,
        references=sorted(references, key=lambda r: (r.element, r.quantity, r.index)),
        settings=settings.as_dict(),
        file_flags=file_flags,
    )
