"""Workbook pass: reconcile every cycle of a workbook at once and name the input most likely wrong.

With ``Settings.reconcile`` on, every row whose cycle is fully given (or solved for one
term) becomes one linear closure over *keyed inputs*, and
:func:`sheetcycle.engine.reconcile.reconcile` adjusts them all by weighted least squares.
The keys are what makes rows share terms:

* a reference value (built-in, from a reference file, or typed once on an elements sheet)
  is one key per ``{R|element|quantity|index}`` placeholder of the rows' expressions, so
  every row that uses Cl's electron gain uses the same key;
* a cell of a compound row is one key per cell (``Sheet!C5``), private to its row;
* a term derived by the row's cycle is a free key (estimated, never tested).

One more closure per value that is *not* the built-in one (an elements-sheet cell, a
reference-file entry, a row's own atomization, ionization or electron-gain cell) ties it to
the built-in table's value of the same quantity: x_user − x_table = 0. It is a second,
independent measurement of the same number, and it is what tells a mistyped electron gain
apart from the atomization enthalpy it always appears with in the cycles.

The input the serial elimination names is flagged at its own cell (``likely-culprit``), or,
when the closures cannot tell several inputs apart, each of them (``culprit-one-of``); the
rows it broke get a note that they close once it is corrected, never a culprit flag. Every
row in the network gets ``reconciled_lattice_enthalpy`` and, when it is tested,
``normalised_residual``; a file-level ``reconciliation`` note gives the global test.
"""

from __future__ import annotations

import math
import re
from collections.abc import Callable, Hashable, Iterable, Sequence
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

import numpy as np

from sheetcycle.engine.born_haber import TERM_LABELS, TERMS
from sheetcycle.engine.reconcile import (
    Reconciliation,
    RowCycle,
    build_cycle_constraints,
    default_sigma,
    reconcile,
)
from sheetcycle.io.tables import a1
from sheetcycle.model import ComputedValue, Flag, RefValue, RowResult, Severity, Table

if TYPE_CHECKING:
    from sheetcycle.chem import IonAssignment
    from sheetcycle.data import ReferenceData
    from sheetcycle.pipeline import WorkbookContext

__all__ = [
    "Input",
    "Network",
    "WorkbookReconciliation",
    "build_network",
    "reconcile_pass",
    "reconcile_rows",
]

KJ = "kJ/mol"
_TOKEN = re.compile(r"\{R\|([^{}|]+)\|([a-z_]+)\|(\d+)\}")
_CELL = re.compile(r"\$?([A-Z]{1,3})\$?(\d+)")
_WORKBOOK_SOURCE = re.compile(r"^workbook (.+)!([A-Z]{1,3}\d+)$")
#: Rows named in one flag message at most (the rest are counted).
_MAX_NAMED = 8

RefLookup = Callable[[str, str, int], "RefValue | None"]


@dataclass(frozen=True)
class Input:
    """One keyed input of the network, with where it is and what it is in plain words."""

    key: tuple[Any, ...]  # ("ref", el, quantity, index), ("cell", sheet, A1), ...
    words: str  # "the first electron-gain enthalpy of Cl"
    measured: float  # internal basis and convention (NaN: free)
    sigma: float  # NaN: the default of docs/reconciliation.md
    sheet: str | None = None
    cell: str | None = None
    source: str = ""

    @property
    def where(self) -> str:
        if self.sheet and self.cell:
            return f"{self.sheet}!{self.cell}"
        return self.source or "built-in data"


@dataclass
class Network:
    """Inputs, closures, and which row each closure is (None for a tie to the table)."""

    inputs: dict[Hashable, Input] = field(default_factory=dict)
    cycles: list[RowCycle] = field(default_factory=list)
    rows: list[RowResult | None] = field(default_factory=list)
    lattice_keys: list[Hashable | None] = field(default_factory=list)
    formula_cells: list[tuple[str, str] | None] = field(default_factory=list)

    def add(self, item: Input) -> Hashable:
        self.inputs.setdefault(item.key, item)
        return item.key


@dataclass(frozen=True)
class WorkbookReconciliation:
    """A network and its reconciliation; ``z_named[k]`` is culprit k's |z| when named."""

    network: Network
    result: Reconciliation
    z_named: tuple[float, ...]

    def index(self, key: Hashable) -> int:
        return self.result.keys.index(key)


# ----------------------------------------------------------------------------- building


def _ref_words(element: str, quantity: str, index: int) -> str:
    if quantity == "atomization_enthalpy":
        return f"the atomization enthalpy of {element}"
    if quantity == "ionization_energy":
        return f"IE{index} of {element}"
    if quantity == "electron_gain_enthalpy":
        nth = {1: "first", 2: "second", 3: "third"}.get(index, f"{index}th")
        return f"the {nth} electron-gain enthalpy of {element}"
    return f"{quantity.replace('_', ' ')} {index} of {element}"


def _lookup(ref: ReferenceData) -> RefLookup:
    def get(element: str, quantity: str, index: int) -> RefValue | None:
        if quantity == "atomization_enthalpy":
            return ref.atomization(element)
        if quantity == "ionization_energy":
            return ref.ionization(element, index)
        if quantity == "electron_gain_enthalpy":
            return ref.electron_gain(element, index)
        return ref.value(element, quantity, index)

    return get


def _located(source: str) -> tuple[str | None, str | None]:
    m = _WORKBOOK_SOURCE.match(source)
    return (m.group(1), m.group(2)) if m else (None, None)


def _ref_input(element: str, quantity: str, index: int, lookup: RefLookup) -> Input | None:
    ref = lookup(element, quantity, index)
    if ref is None:
        return None
    sheet, cell = _located(ref.source)
    return Input(("ref", element, quantity, index), _ref_words(element, quantity, index),
                 ref.value, ref.uncertainty, sheet, cell, ref.source)


def _column_at(table: Table, letters: str) -> Any:
    from sheetcycle.io.package_xml import col_index

    col0 = col_index(letters)
    return next((c for c in table.columns if c.col == col0), None)


def _table_key(term: str, ion: IonAssignment, piece_index: int | None,
               p: int) -> tuple[str, str, int] | None:
    """The built-in quantity a row's own cell of ``term`` measures (None for ΔfH, ΔH_L)."""
    if term == "atomization_metal":
        return (ion.cation, "atomization_enthalpy", 0)
    if term == "atomization_nonmetal":
        return (ion.anion, "atomization_enthalpy", 0)
    if term == "ionization":
        return (ion.cation, "ionization_sum", p) if piece_index is None else (
            ion.cation, "ionization_energy", piece_index)
    if term == "electron_gain_1":
        return (ion.anion, "electron_gain_enthalpy", 1)
    if term == "electron_gain_higher":
        return (ion.anion, "electron_gain_enthalpy", 2) if -ion.anion_charge == 2 else None
    return None


def _row_terms(net: Network, table: Table, i: int, rr: RowResult, ion: IonAssignment,
               lookup: RefLookup, ties: dict[Hashable, tuple[str, str, int]]
               ) -> tuple[list[tuple[Hashable, float]], Hashable | None] | None:
    trace = rr.trace
    coeffs: dict[str, float] = trace["coefficients"]
    exprs: dict[str, str | None] = trace["exprs"]
    values: dict[str, float] = trace["values"]
    solved: str | None = trace["solved"]
    needed = [t for t in TERMS if coeffs[t] != 0.0]
    if any(not math.isfinite(values[t]) for t in needed):
        return None
    p = int(ion.cation_charge)
    out: list[tuple[Hashable, float]] = []
    lattice_key: Hashable | None = None
    for term in needed:
        c = float(coeffs[term])
        if term == solved:
            key = net.add(Input(("derived", rr.sheet, rr.row, term),
                                f"the {TERM_LABELS[term]} of {rr.formula} derived by its cycle",
                                math.nan, math.nan, rr.sheet, None, "derived"))
            out.append((key, c))
            lattice_key = key if term == "lattice_enthalpy" else lattice_key
            continue
        pieces = _pieces(net, table, i, rr, term, exprs[term], values[term], ion, p, lookup,
                         ties)
        out.extend((k, c * f) for k, f in pieces)
        if term == "lattice_enthalpy":
            lattice_key = pieces[0][0]
    return out, lattice_key


def _pieces(net: Network, table: Table, i: int, rr: RowResult, term: str, expr: str | None,
            value: float, ion: IonAssignment, p: int, lookup: RefLookup,
            ties: dict[Hashable, tuple[str, str, int]]) -> list[tuple[Hashable, float]]:
    """The keyed inputs a term is the sum of (each with factor 1)."""
    private = Input(("value", rr.sheet, rr.row, term),
                    f"the {TERM_LABELS[term]} of {rr.formula}", value, math.nan, rr.sheet,
                    None, "row value")
    if expr is None:
        return [(net.add(private), 1.0)]
    parts = expr.split("+") if term == "ionization" else [expr]
    found: list[tuple[Input, tuple[str, str, int] | None]] = []
    for part in parts:
        tok = _TOKEN.fullmatch(part)
        if tok is not None:
            item = _ref_input(tok.group(1), tok.group(2), int(tok.group(3)), lookup)
            if item is None:
                return [(net.add(private), 1.0)]
            found.append((item, None))
            continue
        cells = _CELL.findall(part)
        if len(cells) != 1:
            return [(net.add(private), 1.0)]
        letters, _ = cells[0]
        col = _column_at(table, letters)
        if col is None or col.values is None:
            return [(net.add(private), 1.0)]
        cell = f"{letters}{cells[0][1]}"
        halved = part.endswith("/2")
        v = value if len(parts) == 1 else float(col.values[i])
        s = math.nan
        if col.uncertainties is not None:
            s = float(col.uncertainties[i]) / (2.0 if halved else 1.0)
        words = f"{col.header} of {rr.formula}"
        piece_index = col.index if col.quantity == "ionization_energy" and col.index else None
        found.append((Input(("cell", table.sheet, cell), words, v, s, table.sheet, cell,
                            f"{table.sheet}!{cell}"), _table_key(term, ion, piece_index, p)))
    total = sum(item.measured for item, _ in found)
    if not math.isclose(total, value, rel_tol=1e-9, abs_tol=1e-9):
        return [(net.add(private), 1.0)]
    out: list[tuple[Hashable, float]] = []
    for item, table_key in found:
        key = net.add(item)
        if table_key is not None:
            ties.setdefault(key, table_key)
        elif item.key[0] == "ref" and item.source and not _is_builtin(item):
            ties.setdefault(key, (item.key[1], item.key[2], item.key[3]))
        out.append((key, 1.0))
    return out


def _is_builtin(item: Input) -> bool:
    from sheetcycle.data import ReferenceData

    _, element, quantity, index = item.key
    ref = _lookup(ReferenceData.builtin())(element, quantity, index)
    return ref is not None and ref.source == item.source


def build_network(
    tables: Iterable[tuple[Table, Sequence[RowResult], Sequence[IonAssignment | None]]],
    lookup: RefLookup,
) -> Network:
    """The closures of every row (fully given or solved for one term) and the table ties."""
    from sheetcycle.data import ReferenceData

    builtin = ReferenceData.builtin()
    net = Network()
    ties: dict[Hashable, tuple[str, str, int]] = {}
    for table, rows, ions in tables:
        fcol = table.column("formula")
        for i, (rr, ion) in enumerate(zip(rows, ions, strict=True)):
            if ion is None or not rr.trace or not rr.formula:
                continue
            got = _row_terms(net, table, i, rr, ion, lookup, ties)
            if got is None:
                continue
            terms, lattice_key = got
            net.cycles.append(RowCycle(tuple(terms), label=(rr.sheet, rr.row)))
            net.rows.append(rr)
            net.lattice_keys.append(lattice_key)
            net.formula_cells.append(
                (table.sheet, a1(table.first_row - 1 + i, fcol.col)) if fcol else None)
    for key, (element, quantity, index) in ties.items():
        if quantity == "ionization_sum":
            ref = builtin.ionization_sum(element, index)
        else:
            ref = _lookup(builtin)(element, quantity, index)
        if ref is None:
            continue
        words = (f"IE1..IE{index} of {element}" if quantity == "ionization_sum"
                 else _ref_words(element, quantity, index))
        tie = net.add(Input(("table", element, quantity, index), f"{words} in the built-in table",
                            ref.value, ref.uncertainty, None, None, ref.source))
        net.cycles.append(RowCycle(((key, 1.0), (tie, -1.0)), label=("table", key)))
        net.rows.append(None)
        net.lattice_keys.append(None)
        net.formula_cells.append(None)
    return net


def reconcile_rows(
    tables: Iterable[tuple[Table, Sequence[RowResult], Sequence[IonAssignment | None]]],
    lookup: RefLookup,
    *,
    threshold: float = 3.0,
) -> WorkbookReconciliation | None:
    """Build the network of these rows and reconcile it (None when it has no closure)."""
    net = build_network(tables, lookup)
    if not net.cycles:
        return None
    keys, mat = build_cycle_constraints(net.cycles, list(net.inputs))
    measured = np.array([net.inputs[k].measured for k in keys])
    sigma = np.array([net.inputs[k].sigma for k in keys])
    # a zero or negative uncertainty cell is not usable: the default applies instead
    sigma = np.where(np.isnan(sigma) | (sigma > 0), sigma, np.nan)
    res = reconcile(keys, measured, sigma, mat, threshold=threshold)
    z_named: list[float] = []
    for k, culprit in enumerate(res.culprits):
        step = reconcile(keys, measured, sigma, mat, threshold=threshold, max_culprits=k)
        z_named.append(float(abs(step.normalised_residual[keys.index(culprit)])))
    return WorkbookReconciliation(net, res, tuple(z_named))


# ----------------------------------------------------------------------------- the pass


def reconcile_pass(ctx: WorkbookContext) -> list[RowResult]:
    """Reconcile the workbook when ``Settings.reconcile`` is on; adds values and flags."""
    if not ctx.settings.reconcile:
        return []
    wr = reconcile_rows(((c.table, c.rows, c.ions) for c in ctx.contexts), _lookup(ctx.ref),
                        threshold=ctx.settings.reconcile_threshold)
    if wr is None:
        return []
    _row_values(wr)
    ctx.file_flags.extend(_culprit_flags(wr, ctx.settings.tolerance))
    ctx.file_flags.append(_summary(wr))
    return []


def _row_values(wr: WorkbookReconciliation) -> None:
    res = wr.result
    freed = ", ".join(wr.network.inputs[k].words for k in res.culprits)
    note = f"; with {freed} treated as unknown (named as likely wrong)" if freed else ""
    for rr, key in zip(wr.network.rows, wr.network.lattice_keys, strict=True):
        if rr is None or key is None:
            continue
        j = wr.index(key)
        v = float(res.adjusted[j])
        if not math.isfinite(v):
            continue
        rr.values["reconciled_lattice_enthalpy"] = ComputedValue(
            v, float(res.adjusted_sigma[j]), KJ,
            "workbook-wide weighted least-squares reconciliation of every closed cycle over "
            "their shared terms (docs/reconciliation.md): the lattice enthalpy consistent with "
            "all rows at once; dissociation convention" + note
            + ("; no uncertainty for a value derived by its own cycle" if res.free[j] else ""),
            (wr.network.inputs[key].where,))
        z = float(res.normalised_residual[j])
        if math.isfinite(z):
            rr.values["normalised_residual"] = ComputedValue(
                z, math.nan, "",
                "normalised residual of the row's own values (its lattice enthalpy, and so "
                "its enthalpy of formation) in the workbook-wide reconciliation: the "
                "adjustment divided by its standard deviation; a value with |z| above "
                f"{res.critical_value:.2f} is named as likely wrong", ())


def _fmt(x: float) -> str:
    return f"{x:.1f}".replace("-", "−")


def _sfmt(x: float) -> str:
    return f"{x:+.1f}".replace("-", "−")


def _closures(wr: WorkbookReconciliation, keys: set[Hashable],
              tolerance: float) -> tuple[list[int], list[int]]:
    """Row closures using any of ``keys``: (all of them, those that do not close as given)."""
    inputs = wr.network.inputs
    m = wr.result.measured
    s = default_sigma(m, wr.result.sigma)
    pos = {k: j for j, k in enumerate(wr.result.keys)}
    users: list[int] = []
    broken: list[int] = []
    for n, (cyc, rr) in enumerate(zip(wr.network.cycles, wr.network.rows, strict=True)):
        if rr is None or not any(k in keys for k, _ in cyc.terms):
            continue
        users.append(n)
        if any(math.isnan(inputs[k].measured) for k, _ in cyc.terms):
            continue  # a derived row closes by construction
        r = sum(c * m[pos[k]] for k, c in cyc.terms)
        sr = math.sqrt(sum((c * s[pos[k]]) ** 2 for k, c in cyc.terms))
        if abs(r) > max(2.0 * sr, tolerance):
            broken.append(n)
    return users, broken


def _row_names(wr: WorkbookReconciliation, idx: Sequence[int]) -> str:
    names = []
    for n in idx[:_MAX_NAMED]:
        rr = wr.network.rows[n]
        assert rr is not None
        names.append(f"{rr.formula} ({rr.sheet} row {rr.row})")
    more = len(idx) - _MAX_NAMED
    return ", ".join(names) + (f" and {more} more" if more > 0 else "")


def _culprit_flags(wr: WorkbookReconciliation, tolerance: float) -> list[Flag]:
    res = wr.result
    inputs = wr.network.inputs
    out: list[Flag] = []
    for k, (culprit, group) in enumerate(zip(res.culprits, res.confounded, strict=True)):
        users, broken = _closures(wr, set(group), tolerance)
        j = wr.index(culprit)
        item = inputs[culprit]
        adj, meas = float(res.adjusted[j]), float(res.measured[j])
        z = wr.z_named[k]
        breaks = (f"; it breaks the cycles of {_row_names(wr, broken)}" if broken
                  else "; no single cycle fails with it, but together they disagree")
        uses = f"used by {len(users)} cycle{'s' if len(users) != 1 else ''}"
        if culprit[0] == "table":  # type: ignore[index]
            out.append(Flag(
                "table-disagrees", Severity.NOTE,
                f"{item.words} ({_fmt(meas)} kJ/mol, {item.source}) disagrees with the "
                f"workbook's own value and the closures, which put it at {_fmt(adj)} kJ/mol "
                f"(normalised residual {z:.1f}); the workbook's value was kept"))
            continue
        tail = (f"{_fmt(meas)} kJ/mol as used (internal sign convention); the other data "
                f"put it at {_fmt(adj)} kJ/mol, an adjustment of {_sfmt(adj - meas)} kJ/mol; "
                f"normalised residual {z:.1f} (limit {res.critical_value:.2f}); {uses}{breaks}")
        if len(group) == 1:
            out.append(Flag("likely-culprit", Severity.WARNING,
                            f"{item.words} is most likely wrong: {tail}", item.sheet,
                            item.cell))
            _closes_notes(wr, broken, culprit, adj, meas, tolerance)
            continue
        named = "; ".join(f"{inputs[g].words} ({inputs[g].where})" for g in group)
        for g in group:
            gi = inputs[g]
            gm = float(res.measured[wr.index(g)])
            # confounded inputs have proportional coefficients: c_g·Δ_g = c_culprit·Δ_culprit
            ratio = _ratio(wr, culprit, g)
            fix = (f"; if it is the wrong one, the other data put it at "
                   f"{_fmt(gm + (adj - meas) * ratio)} kJ/mol" if math.isfinite(ratio) else "")
            out.append(Flag(
                "culprit-one-of", Severity.WARNING,
                f"one of these {len(group)} values is most likely wrong, and the cycles "
                f"cannot tell which: {named}. This one, {gi.words}, is {_fmt(gm)} kJ/mol as "
                f"used{fix}; normalised residual {z:.1f} (limit {res.critical_value:.2f}); "
                f"{uses}{breaks}", gi.sheet, gi.cell))
    return out


def _ratio(wr: WorkbookReconciliation, culprit: Hashable, other: Hashable) -> float:
    """c_culprit / c_other in a closure that holds both (NaN when none does)."""
    for cyc in wr.network.cycles:
        coefs = dict(cyc.terms)
        if culprit in coefs and other in coefs and coefs[other] != 0:
            return float(coefs[culprit] / coefs[other])
    return math.nan


def _closes_notes(wr: WorkbookReconciliation, broken: Sequence[int], culprit: Hashable,
                  adj: float, meas: float, tolerance: float) -> None:
    item = wr.network.inputs[culprit]
    for n in broken:
        rr = wr.network.rows[n]
        where = wr.network.formula_cells[n]
        assert rr is not None
        c = next(c for k, c in wr.network.cycles[n].terms if k == culprit)
        rr.flags.append(Flag(
            "closes-once-corrected", Severity.NOTE,
            f"the cycle of {rr.formula} does not close as given because of a shared value: "
            f"with {item.words} ({item.where}) at {_fmt(adj)} kJ/mol instead of {_fmt(meas)} "
            f"its residual changes by {_sfmt(-c * (adj - meas))} kJ/mol; the row's own "
            "values are not suspected", where[0] if where else rr.sheet,
            where[1] if where else None))


def _summary(wr: WorkbookReconciliation) -> Flag:
    res = wr.result
    net = wr.network
    n_rows = sum(r is not None for r in net.rows)
    counts: dict[Hashable, int] = {}
    for cyc, rr in zip(net.cycles, net.rows, strict=True):
        if rr is not None:
            for k, _ in cyc.terms:
                counts[k] = counts.get(k, 0) + 1
    shared = sum(1 for v in counts.values() if v > 1)
    named = ("; named as likely wrong: " + "; ".join(
        f"{net.inputs[c].words} ({net.inputs[c].where})" for c in res.culprits)
        if res.culprits else "; no input stands out")
    after = (f"; with them treated as unknown: χ² = {res.chi2:.1f} on {res.dof} (p = "
             f"{res.p_value:.3g})" if res.culprits else "")
    verdict = "consistent" if res.consistent else "not consistent"
    return Flag(
        "reconciliation", Severity.NOTE,
        f"workbook-wide reconciliation of {n_rows} cycles over {len(res.keys)} inputs "
        f"({shared} shared by several rows) by weighted least squares: as given, χ² = "
        f"{res.chi2_initial:.1f} on {res.dof_initial} degrees of freedom (p = "
        f"{res.p_value_initial:.3g}){named}{after}; the final set is {verdict} "
        f"(|z| limit {res.critical_value:.2f}, α = {res.alpha:g})")
