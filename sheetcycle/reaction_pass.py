"""The reaction pass: ΔrH of every row of a reaction table by Hess's law.

A reaction table is a table with a reaction-equation column and no formula column
(headers such as 'Reaction' or 'Equation' beside e.g. 'ΔrH'). For each row:

* the equation is parsed (:func:`sheetcycle.chem.reactions.parse_reaction`); an unreadable
  one is flagged ``reaction-unreadable``, an unbalanced one ``reaction-unbalanced``; neither
  gets a value;
* each species, with its state, is looked up: first in the workbook's compound tables (a
  row's formation-enthalpy cell, then the formation enthalpy its Born-Haber cycle derived),
  then in the built-in table ``data/formation.csv``. Elements in their standard states
  count as 0; the electron counts as 0 (the convention of ion thermochemistry). A species
  without data is named in a ``species-data-missing`` flag and the row gets no value;
* ``reaction_enthalpy`` = Σ ν ΔfH with its uncertainty. A given ΔrH (the row's
  reaction-enthalpy column) is compared (``reaction-differs``); when exactly one species
  lacks data, the given ΔrH yields its ΔfH (``species_formation_enthalpy``);
* with a temperature (the row's temperature column, else ``Settings.temperature``),
  ``reaction_enthalpy_at_T`` by Kirchhoff's law: from the row's heat-capacity column read as
  a constant ΔrCp, else from the built-in Shomate sets of every species, with their
  temperature ranges checked (``temperature-out-of-range``);
* a strongly exothermic result gets ``heat-release-caution``, per mole and per kilogram of
  reactants (an equation that dissolves one solid into aqueous ions is judged as a
  dissolution, per kilogram of salt).

Compound-table rows are matched by formula and state: the row's state column, else the
state written in its formula, else none; a row without a state stands for the solid (the
state of the compounds of Born-Haber cycles) and for a species written without a state.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from sheetcycle.chem.formula import Formula, parse_formula
from sheetcycle.chem.reactions import Reaction, Species, parse_reaction, species_key
from sheetcycle.data.thermo import formation_table, shomate_table
from sheetcycle.engine.cautions import REACTION, SOLUTION
from sheetcycle.engine.hess import coefficient_matrix, reaction_enthalpy, solve_formation
from sheetcycle.engine.hess import standard_state_element as is_standard
from sheetcycle.engine.kirchhoff import T_REF, ShomateTable, delta_h_at, delta_h_constant_cp
from sheetcycle.errors import FormulaSyntaxError, SheetcycleError
from sheetcycle.io.tables import a1
from sheetcycle.model import ComputedValue, Flag, RowResult, Severity, Table
from sheetcycle.solution_pass import caution_flag, molar_mass

__all__ = ["FormationLookup", "Found", "norm_state", "reaction_pass", "reaction_tables"]

KJ = "kJ/mol"

_STATE_WORDS = {
    "cr": "s", "c": "s", "solid": "s", "crystal": "s", "crystalline": "s",
    "liq": "l", "liquid": "l", "gas": "g", "gaseous": "g", "vapour": "g", "vapor": "g",
    "aqueous": "aq", "aq.": "aq", "soln": "aq",
}  # fmt: skip


def norm_state(state: str | None) -> str | None:
    """A state as the tables key it: 'cr', 'solid' → 's', 'liquid' → 'l', 'gas' → 'g'."""
    if state is None:
        return None
    s = state.strip().strip("()").strip().lower()
    return _STATE_WORDS.get(s, s) or None


def _key(formula: Formula, state: str | None) -> str:
    return species_key(formula, norm_state(state))


@dataclass(frozen=True)
class Found:
    """One formation enthalpy found for a species, with where it came from."""

    value: float
    sigma: float
    source: str


class FormationLookup:
    """Formation enthalpies by species key: the workbook's compound tables, then built-in."""

    def __init__(self, contexts: Sequence[object]) -> None:
        self._book: dict[str, Found] = {}
        for ctx in contexts:
            self._add_table(ctx)

    def _add_table(self, ctx: object) -> None:
        table: Table = ctx.table  # type: ignore[attr-defined]
        rows: list[RowResult] = ctx.rows  # type: ignore[attr-defined]
        fcol = table.column("formula")
        if fcol is None or fcol.texts is None:
            return
        scol = table.column("state")
        hcol = table.column("formation_enthalpy")
        for i, text in enumerate(fcol.texts):
            if not text:
                continue
            try:
                f = parse_formula(text)
            except SheetcycleError:
                continue
            state = scol.texts[i] if scol is not None and scol.texts is not None else None
            key = _key(f, state or f.state)
            found: Found | None = None
            if hcol is not None and hcol.values is not None and not math.isnan(hcol.values[i]):
                u = hcol.uncertainties[i] if hcol.uncertainties is not None else math.nan
                found = Found(float(hcol.values[i]), float(u),
                              f"{table.sheet}!{a1(table.first_row - 1 + i, hcol.col)}")
            elif i < len(rows) and "formation_enthalpy" in rows[i].values:
                cv = rows[i].values["formation_enthalpy"]
                found = Found(cv.value, cv.uncertainty,
                              f"derived by the Born-Haber cycle of {table.sheet} row "
                              f"{rows[i].row}")
            if found is not None:
                self._book.setdefault(key, found)

    def get(self, sp: Species) -> Found | None:
        key = _key(sp.formula, sp.state)
        got = self._book.get(key)
        if got is None and norm_state(sp.state) == "s":
            got = self._book.get(_key(sp.formula, None))  # a row without a state: the solid
        if got is not None:
            return Found(got.value, got.sigma, f"workbook {got.source}")
        ref = formation_table().get(key)
        if ref is not None:
            return Found(ref.value, ref.uncertainty, f"built-in: {ref.source}")
        return None


def reaction_tables(tables: Sequence[Table]) -> list[Table]:
    """The tables of reaction equations (a reaction-equation column, no formula column)."""
    return [t for t in tables
            if t.column("reaction_equation") is not None and t.column("formula") is None
            and t.column("reaction_equation").texts is not None]  # type: ignore[union-attr]


def reaction_pass(ctx: object) -> list[RowResult]:
    """One :class:`RowResult` per reaction row of every reaction table of the workbook.

    ``ctx`` is a :class:`sheetcycle.pipeline.WorkbookContext`.
    """
    tables = reaction_tables(ctx.tables)  # type: ignore[attr-defined]
    if not tables:
        return []
    lookup = FormationLookup(ctx.contexts)  # type: ignore[attr-defined]
    out: list[RowResult] = []
    for t in tables:
        out.extend(_reaction_table(t, lookup, ctx))
    return out


def _is_dissolution(r: Reaction) -> bool:
    """One species that is not aqueous going wholly to aqueous species (plus water)."""
    solids = [sp for sp in r.reactants if norm_state(sp.state) != "aq"
              and sp.key not in ("H2O(l)",)]
    return (len(solids) == 1 and len(r.reactants) <= 2
            and all(norm_state(sp.state) == "aq" for sp in r.products))


def _reaction_table(table: Table, lookup: FormationLookup, ctx: object) -> list[RowResult]:
    settings = ctx.settings  # type: ignore[attr-defined]
    ref = ctx.ref  # type: ignore[attr-defined]
    ecol = table.column("reaction_equation")
    assert ecol is not None and ecol.texts is not None
    rcol = table.column("reaction_enthalpy")
    tcol = table.column("temperature")
    cpcol = table.column("heat_capacity")

    def cell(i: int, col: object = ecol) -> str:
        return a1(table.first_row - 1 + i, col.col)  # type: ignore[attr-defined]

    rows: list[RowResult] = []
    parsed: list[tuple[int, Reaction]] = []
    for i, text in enumerate(ecol.texts):
        if not text:
            continue
        rr = RowResult(sheet=table.sheet, row=table.first_row + i, formula=text)
        rows.append(rr)
        try:
            r = parse_reaction(text)
        except FormulaSyntaxError as exc:
            rr.flags.append(Flag("reaction-unreadable", Severity.ERROR,
                                 f"cannot read the equation: {exc.problem or exc}; no reaction "
                                 "enthalpy", table.sheet, cell(i)))
            continue
        parsed.append((i, r))
    if not parsed:
        return rows
    by_row = {rr.row - table.first_row: rr for rr in rows}
    reactions = [r for _, r in parsed]
    cm = coefficient_matrix(reactions)
    s_count = len(cm.keys)
    dfh = np.full(s_count, np.nan)
    sig = np.full(s_count, np.nan)
    src: list[str | None] = [None] * s_count
    standard = np.zeros(s_count, dtype=bool)
    assumed = np.zeros(s_count, dtype=bool)
    for k, sp in enumerate(cm.species):
        if sp.is_electron:
            standard[k] = True  # ΔfH(e−) = 0 by the ion convention
            continue
        if is_standard(sp.formula, norm_state(sp.state)):
            standard[k] = True
            assumed[k] = sp.state is None
            continue
        found = lookup.get(sp)
        if found is not None:
            dfh[k], sig[k], src[k] = found.value, found.sigma, found.source
    balanced = np.array([r.is_balanced for r in reactions])
    hess = reaction_enthalpy(cm.nu, dfh, sig, standard=standard, valid=balanced)

    given = np.full(len(parsed), np.nan)
    given_sig = np.full(len(parsed), np.nan)
    if rcol is not None and rcol.values is not None:
        idx = [i for i, _ in parsed]
        given = np.asarray(rcol.values, dtype=float)[idx]
        if rcol.uncertainties is not None:
            given_sig = np.asarray(rcol.uncertainties, dtype=float)[idx]
    solved = solve_formation(cm.nu, dfh, sig, given, given_sig, standard=standard)

    base = np.where(np.isnan(hess.value), np.where(balanced, given, np.nan), hess.value)
    base_sig = np.where(np.isnan(hess.value), given_sig, hess.sigma)
    base_src = ["Hess's law" if math.isfinite(hess.value[j]) else "the given ΔrH"
                for j in range(len(parsed))]

    for j, (i, r) in enumerate(parsed):
        rr = by_row[i]
        flags = rr.flags
        used = np.nonzero(cm.nu[j])[0]
        if not balanced[j]:
            flags.append(Flag("reaction-unbalanced", Severity.ERROR,
                              f"the equation is not balanced ({r.balance().describe()}); no "
                              "reaction enthalpy", table.sheet, cell(i)))
            base[j] = np.nan
            continue
        for k in used:
            if assumed[k]:
                flags.append(Flag("state-assumed", Severity.NOTE,
                                  f"{cm.species[k].text} has no state; read as the element in "
                                  "its standard state (ΔfH = 0)", table.sheet, cell(i)))
            if hess.standard_nonzero[j, k]:
                flags.append(Flag("element-value-ignored", Severity.NOTE,
                                  f"{cm.species[k].text} is an element in its standard state; "
                                  "its ΔfH is 0 by definition", table.sheet, cell(i)))
        missing = [cm.species[k].text + ("" if cm.species[k].state else
                                         " (written without a state: add one, e.g. (g))")
                   for k in used if hess.missing[j, k]]
        sources = tuple(f"ΔfH({cm.species[k].text}): {src[k]}" for k in used if src[k])
        if math.isfinite(hess.value[j]):
            note = "" if hess.sigma_complete[j] else \
                "; the uncertainty counts only the species whose ΔfH has one"
            rr.values["reaction_enthalpy"] = ComputedValue(
                float(hess.value[j]), float(hess.sigma[j]), KJ,
                "Hess's law: ΔrH = Σ ν ΔfH (298.15 K); elements in their standard states 0"
                + note, sources)
            if not hess.sigma_complete[j]:
                flags.append(Flag("uncertainty-partial", Severity.NOTE,
                                  "some formation enthalpies have no uncertainty; the combined "
                                  "uncertainty counts only those that do", table.sheet, cell(i)))
            if rcol is not None and math.isfinite(given[j]):
                _compare(float(given[j]), float(given_sig[j]), float(hess.value[j]),
                         float(hess.sigma[j]), settings.tolerance, table, cell(i, rcol), flags)
        elif len(missing) == 1 and int(solved.index[j]) >= 0:
            k = int(solved.index[j])
            name = cm.species[k].text
            rr.values["species_formation_enthalpy"] = ComputedValue(
                float(solved.value[j]), float(solved.sigma[j]), KJ,
                f"ΔfH of {name} from the given ΔrH by Hess's law",
                (f"ΔrH: {table.sheet}!{cell(i, rcol)}", *sources))
            flags.append(Flag("term-derived", Severity.NOTE,
                              f"no formation enthalpy of {name} was found; from the given ΔrH "
                              f"it is {solved.value[j]:.1f} kJ/mol", table.sheet, cell(i)))
        else:
            flags.append(Flag("species-data-missing", Severity.ERROR,
                              "no formation enthalpy for " + ", ".join(missing) + " (neither "
                              "in the workbook's compound tables nor built in); give it in a "
                              "compound table with formula, state and ΔfH columns; no reaction "
                              "enthalpy", table.sheet, cell(i)))
        _at_temperature(rr, j, i, r, cm, base[j], base_sig[j], base_src[j], table, tcol, cpcol,
                        settings, cell)
        _caution(rr, r, float(base[j]), ref, table, cell(i))
    return rows


def _compare(given: float, given_sig: float, computed: float, sig: float, tolerance: float,
             table: Table, cell: str, flags: list[Flag]) -> None:
    diff = given - computed
    s = math.hypot(0.0 if math.isnan(sig) else sig, 0.0 if math.isnan(given_sig) else given_sig)
    if abs(diff) > max(2 * s, tolerance):
        flags.append(Flag(
            "reaction-differs", Severity.WARNING,
            f"the given ΔrH {given:.1f} kJ/mol differs from Hess's law ({computed:.1f} ± "
            f"{sig:.1f} kJ/mol) by {diff:+.1f} kJ/mol, more than max(2σ, {tolerance:g} kJ/mol): "
            "check the states (H2O(l) or H2O(g)), the coefficients and the sign", table.sheet,
            cell))


def _at_temperature(rr: RowResult, j: int, i: int, r: Reaction, cm: object, dh0: float,
                    dh0_sig: float, dh0_src: str, table: Table, tcol: object, cpcol: object,
                    settings: object, cell: object) -> None:
    """``reaction_enthalpy_at_T`` by Kirchhoff's law, when a temperature is asked for."""
    t = math.nan
    if tcol is not None and tcol.values is not None:  # type: ignore[attr-defined]
        t = float(tcol.values[i])  # type: ignore[attr-defined]
    if math.isnan(t) and settings.temperature is not None:  # type: ignore[attr-defined]
        t = float(settings.temperature)  # type: ignore[attr-defined]
    if math.isnan(t) or not math.isfinite(dh0):
        return
    here = cell(i)  # type: ignore[operator]
    cp = math.nan
    if cpcol is not None and cpcol.values is not None:  # type: ignore[attr-defined]
        cp = float(cpcol.values[i])  # type: ignore[attr-defined]
    if math.isfinite(cp):
        v, _ = delta_h_constant_cp(t, dh0, cp)
        rr.values["reaction_enthalpy_at_T"] = ComputedValue(
            float(v), dh0_sig, KJ,
            f"Kirchhoff's law at {t:g} K with the constant ΔrCp = {cp:g} J/(mol·K) of "
            f"{table.sheet}!{cell(i, cpcol)}; ΔrH(298.15 K) from {dh0_src}",  # type: ignore[operator]
            ())
        if abs(t - T_REF) > 300:
            rr.flags.append(Flag("heat-capacity-constant", Severity.NOTE,
                                 f"a constant ΔrCp over {abs(t - T_REF):.0f} K is a rough "
                                 "approximation", table.sheet, here))
        return
    nu = np.asarray(cm.nu[j])  # type: ignore[attr-defined]
    used = np.nonzero(nu)[0]
    species = [cm.species[k] for k in used]  # type: ignore[attr-defined]
    table_sets = shomate_table()
    sets = [() if sp.is_electron else
            table_sets.get(_key(sp.formula, sp.state or _default_state(sp)), ())
            for sp in species]
    absent = [sp.text for sp, s in zip(species, sets, strict=True) if not s]
    if absent:
        rr.flags.append(Flag("heat-capacity-missing", Severity.WARNING,
                             f"no value at {t:g} K: no heat-capacity data for "
                             + ", ".join(absent) + " (built-in Shomate sets: "
                             + ", ".join(table_sets) + "); give a heat-capacity column (ΔrCp) "
                             "for a constant-Cp estimate", table.sheet, here))
        return
    st = ShomateTable.from_sets(sets)
    res = delta_h_at([t], [dh0], nu[used][None, :], st, sigma_ref=[dh0_sig])
    bad = [f"{sp.text} ({', '.join(f'{s.t_min:g}-{s.t_max:g} K' for s in ss)})"
           for k, (sp, ss) in enumerate(zip(species, sets, strict=True))
           if res.out_of_range[0, k]]
    if bad:
        rr.flags.append(Flag("temperature-out-of-range", Severity.WARNING,
                             f"{t:g} K is outside the range of the heat-capacity data of "
                             + "; ".join(bad) + "; no value at that temperature",
                             table.sheet, here))
        return
    if math.isfinite(res.value[0]):
        srcs = tuple(sorted({f"Shomate {sp.text}: {ss[0].source}"
                             for sp, ss in zip(species, sets, strict=True)}))
        rr.values["reaction_enthalpy_at_T"] = ComputedValue(
            float(res.value[0]), float(res.sigma[0]), KJ,
            f"Kirchhoff's law at {t:g} K from Shomate heat capacities; ΔrH(298.15 K) from "
            f"{dh0_src}", srcs)


def _default_state(sp: Species) -> str | None:
    """The state of an element written without one: its standard state's phase."""
    if sp.state is None and is_standard(sp.formula, None):
        (el,) = sp.formula.elements
        return "g" if el in ("H", "N", "O", "F", "Cl", "He", "Ne", "Ar", "Kr", "Xe") else None
    return sp.state


def _caution(rr: RowResult, r: Reaction, dh: float, ref: object, table: Table,
             cell: str) -> None:
    if not math.isfinite(dh):
        return
    dissolution = _is_dissolution(r)
    side = [sp for sp in r.reactants if not sp.is_electron]
    if dissolution:
        side = [sp for sp in side if norm_state(sp.state) != "aq" and sp.key != "H2O(l)"]
    mass = 0.0
    for sp in side:
        mass += float(sp.exact) * molar_mass(sp.formula, ref.atomic_mass)  # type: ignore[attr-defined]
    fl = caution_flag(dh, mass, SOLUTION if dissolution else REACTION, table.sheet, cell)
    if fl is not None:
        rr.flags.append(fl)
