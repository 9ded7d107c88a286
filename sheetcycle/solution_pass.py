"""The solution-enthalpy pass over a compound table: ΔsolH = ΔH_L + Σ ν ΔhydH(ion).

Runs on a compound table that asks for it: one with a solution-enthalpy column or a
hydration column (of the cation, of the anion, or of the salt's ions together). Per row:

* the lattice enthalpy ΔH_L (dissociation convention) is the row's Born-Haber value when
  the cycle gave one, otherwise the row's own lattice column;
* the single-ion hydration enthalpies come from the row's cation/anion hydration columns,
  otherwise from the built-in table (Marcus, on his −1103 kJ/mol scale), all converted to
  one working scale: ``Settings.hydration_scale`` (None: the conventional scale, H+ = 0).
  A column headed 'ΔhydH' without an ion is the sum over the formula unit, Σ ν ΔhydH;
* with two of ΔsolH, ΔH_L and Σ ν ΔhydH known the third follows
  (:func:`sheetcycle.engine.solution.solve_solution`); with all three, the given ΔsolH is
  checked against the computed one.

Ions: the Born-Haber ion assignment where there is one (binary salts), otherwise a
cation and an anion from the built-in hydration table that make up the formula (NaOH →
Na+ and OH−, NH4NO3 → NH4+ and NO3−).

Scales are recorded per column (the header's 'conventional'/'absolute' word, else the
run's setting, else the scale the other columns state). Columns on different scales are
converted and flagged (``hydration-scales-mixed``). See docs/solution-and-reactions.md.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from functools import cache
from math import gcd

import numpy as np

from sheetcycle.chem.formula import Formula, parse_formula
from sheetcycle.data.thermo import hydration_enthalpy, hydration_table
from sheetcycle.engine.cautions import SOLUTION, CautionThresholds, caution_for
from sheetcycle.engine.conventions import lattice_from_column
from sheetcycle.engine.solution import (
    CONVENTIONAL,
    HALLIWELL_NYBURG,
    MARCUS,
    TISSANDIER,
    HydrationScale,
    SolutionStatus,
    check_scales,
    convert_hydration,
    solve_solution,
)
from sheetcycle.errors import SheetcycleError
from sheetcycle.io.tables import a1
from sheetcycle.model import Column, ComputedValue, Flag, RowResult, Severity, Table

__all__ = ["SaltIons", "caution_flag", "molar_mass", "salt_ions", "solution_pass"]

KJ = "kJ/mol"
_KNOWN_SCALES = (CONVENTIONAL, HALLIWELL_NYBURG, MARCUS, TISSANDIER)
#: A user's single-ion value this far from the built-in one on the same scale, but close to
#: it on another known scale, is probably on that other scale (kJ/mol per unit charge;
#: common practice, no source).
_SCALE_SUSPECT = 150.0
_SCALE_MATCH = 40.0


# ----------------------------------------------------------------------------- helpers


def molar_mass(formula: Formula, atomic_mass: Callable[[str], float | None]) -> float:
    """g/mol of one formula unit (waters included); NaN when an element has no mass."""
    total = 0.0
    for el, n in formula.elements.items():
        m = atomic_mass(el)
        if m is None:
            return math.nan
        total += n * m
    return total


def caution_flag(delta_h: float, mass: float, thresholds: CautionThresholds,
                 sheet: str, cell: str) -> Flag | None:
    """The ``heat-release-caution`` flag for one value, or None below the thresholds."""
    text = caution_for(delta_h, mass, thresholds)
    if text is None:
        return None
    return Flag("heat-release-caution", Severity.WARNING, text, sheet, cell)


@dataclass(frozen=True)
class SaltIons:
    """The two ions of a salt for its solution cycle, as texts the hydration table knows."""

    cation: str  # e.g. "Na+", "Mg2+", "NH4+"
    z_cation: int
    n_cation: float
    anion: str  # e.g. "Cl-", "OH-", "SO4 2-"
    z_anion: int
    n_anion: float
    basis: str  # "Born-Haber assignment" or "built-in hydration table"


def _ion_text(symbol: str, z: int) -> str:
    mag = "" if abs(z) == 1 else str(abs(z))
    return f"{symbol}{mag}{'+' if z > 0 else '-'}"


@cache
def _table_ions() -> tuple[tuple[str, Mapping[str, float], int], ...]:
    out = []
    for entry in hydration_table().values():
        if entry.ion == "H+":
            continue
        out.append((entry.ion, dict(parse_formula(entry.ion).elements), entry.charge))
    return tuple(out)


@cache
def _split_salt(formula_text: str) -> SaltIons | None:
    """A cation and an anion of the built-in table that make up the formula exactly."""
    try:
        f = parse_formula(formula_text)
    except SheetcycleError:
        return None
    if f.charge != 0 or f.hydrate:
        return None
    target = dict(f.elements)
    ions = _table_ions()
    for cat, cel, zc in ions:
        if zc <= 0:
            continue
        for an, ael, za in ions:
            if za >= 0:
                continue
            g = gcd(zc, -za)
            m0, n0 = -za // g, zc // g
            # the multiple k of the smallest neutral unit that gives the formula
            el = next(iter(target))
            per = m0 * cel.get(el, 0) + n0 * ael.get(el, 0)
            if per == 0:
                continue
            k = target[el] / per
            if k <= 0 or abs(k - round(k)) > 1e-9:
                continue
            keys = set(target) | set(cel) | set(ael)
            if all(abs(k * (m0 * cel.get(e, 0) + n0 * ael.get(e, 0)) - target.get(e, 0)) < 1e-9
                   for e in keys):
                return SaltIons(cat, zc, k * m0, an, za, k * n0, "built-in hydration table")
    return None


def salt_ions(formula_text: str | None, assignment: object | None) -> SaltIons | None:
    """The ions of a row: its Born-Haber ion assignment, else the hydration table's ions."""
    if assignment is not None:
        a = assignment
        return SaltIons(_ion_text(a.cation, a.cation_charge), a.cation_charge,  # type: ignore[attr-defined]
                        float(a.n_cation), _ion_text(a.anion, a.anion_charge),  # type: ignore[attr-defined]
                        a.anion_charge, float(a.n_anion), "Born-Haber assignment")  # type: ignore[attr-defined]
    if not formula_text:
        return None
    return _split_salt(formula_text)


# ----------------------------------------------------------------------------- scales


@dataclass(frozen=True)
class _ColumnScale:
    scale: HydrationScale
    declared_by: str  # "header", "settings", "other columns", "default"


def _named_scale(h: float) -> HydrationScale:
    for s in _KNOWN_SCALES:
        if s.h_plus == h:
            return s
    return HydrationScale("user", h, "the run's setting")


def _column_scales(cols: list[Column], settings_h: float | None, table: Table,
                   file_flags: list[Flag]) -> dict[str, _ColumnScale]:
    """The scale of each hydration column, with the flags that say how it was decided."""
    declared: dict[str, HydrationScale | None] = {}
    for c in cols:
        if c.convention == "conventional":
            declared[c.header] = CONVENTIONAL
        elif c.convention == "absolute":
            if settings_h not in (None, 0.0):
                declared[c.header] = _named_scale(float(settings_h))  # type: ignore[arg-type]
            else:
                declared[c.header] = MARCUS
                file_flags.append(Flag(
                    "hydration-scale-assumed", Severity.NOTE,
                    f"column '{c.header}' is on an absolute hydration scale but does not say "
                    f"which; read as Marcus's scale (ΔhydH(H+) = {MARCUS.h_plus:g} kJ/mol). "
                    "Set the run's hydration scale to the ΔhydH(H+) of your source otherwise",
                    table.sheet, a1(table.header_row - 1, c.col)))
        elif settings_h is not None:
            declared[c.header] = _named_scale(float(settings_h))
        else:
            declared[c.header] = None
    check = check_scales(declared)
    first_cell = a1(table.header_row - 1, cols[0].col)
    if check.mixed:
        file_flags.append(Flag("hydration-scales-mixed", Severity.WARNING,
                               f"{check.message}; the values were converted to one scale "
                               "before use", table.sheet, first_cell))
    out: dict[str, _ColumnScale] = {}
    for c in cols:
        d = declared[c.header]
        if d is not None:
            how = "header" if c.convention in ("conventional", "absolute") else "settings"
            out[c.header] = _ColumnScale(d, how)
        elif len(check.scales) == 1:
            (h,) = check.scales
            out[c.header] = _ColumnScale(_named_scale(h), "other columns")
        else:
            out[c.header] = _ColumnScale(CONVENTIONAL, "default")
    undeclared = [c.header for c in cols if declared[c.header] is None]
    if undeclared and check.message and not check.mixed:
        file_flags.append(Flag("hydration-scale-unstated", Severity.NOTE,
                               check.message if check.scales else
                               f"{check.message}; read as the conventional scale (ΔhydH(H+) = 0)",
                               table.sheet, first_cell))
    return out


# ----------------------------------------------------------------------------- the pass


def _cell(table: Table, i: int, col: Column) -> str:
    return a1(table.first_row - 1 + i, col.col)


def _wants_solution(table: Table) -> bool:
    return any(table.column(q) is not None for q in
               ("solution_enthalpy", "hydration_cation", "hydration_anion", "hydration"))


def solution_pass(ctx: object) -> None:
    """Add ``solution_enthalpy`` (or the one missing term) to the rows of a compound table.

    ``ctx`` is a :class:`sheetcycle.pipeline.TableContext`.
    """
    table: Table = ctx.table  # type: ignore[attr-defined]
    if not _wants_solution(table):
        return
    rows: list[RowResult] = ctx.rows  # type: ignore[attr-defined]
    settings = ctx.settings  # type: ignore[attr-defined]
    ref = ctx.ref  # type: ignore[attr-defined]
    file_flags: list[Flag] = ctx.file_flags  # type: ignore[attr-defined]
    n = table.n_rows
    fcol = table.column("formula")
    assert fcol is not None and fcol.texts is not None
    h_work = 0.0 if settings.hydration_scale is None else float(settings.hydration_scale)
    work_words = ("the conventional scale (ΔhydH(H+) = 0)" if h_work == 0
                  else f"the scale with ΔhydH(H+) = {h_work:g} kJ/mol")

    scol = table.column("solution_enthalpy")
    hcat = table.column("hydration_cation")
    han = table.column("hydration_anion")
    hsum = table.column("hydration")
    hyd_cols = [c for c in (hcat, han) if c is not None and c.values is not None]
    scales = _column_scales(hyd_cols, settings.hydration_scale, table, file_flags) \
        if hyd_cols else {}

    def vals(c: Column | None) -> tuple[np.ndarray, np.ndarray]:
        if c is None or c.values is None:
            return np.full(n, np.nan), np.full(n, np.nan)
        u = c.uncertainties if c.uncertainties is not None else np.full(n, np.nan)
        return np.asarray(c.values, dtype=float), np.asarray(u, dtype=float)

    s_val, s_sig = vals(scol)

    # -- lattice: Born-Haber first, the row's own column as the fall-back
    lat = np.asarray(ctx.lattice, dtype=float).copy()  # type: ignore[attr-defined]
    lat_sig = np.asarray(ctx.lattice_sigma, dtype=float).copy()  # type: ignore[attr-defined]
    lat_src: list[str | None] = ["ΔH_L: Born-Haber cycle of this row" if math.isfinite(x)
                                 else None for x in lat]
    lcol = table.column("lattice_enthalpy") or table.column("lattice_energy")
    if lcol is not None and lcol.values is not None:
        given = lattice_from_column(lcol.values, lcol.convention).values
        gu = lcol.uncertainties if lcol.uncertainties is not None else np.full(n, np.nan)
        take = np.isnan(lat) & ~np.isnan(given)
        lat = np.where(take, given, lat)
        lat_sig = np.where(take, gu, lat_sig)
        for i in np.nonzero(take)[0]:
            lat_src[int(i)] = f"ΔH_L: {table.sheet}!{_cell(table, int(i), lcol)}"

    ions = [salt_ions(fcol.texts[i], ctx.ions[i]) for i in range(n)]  # type: ignore[attr-defined]

    # -- single-ion hydration enthalpies on the working scale
    ion_val = np.full((n, 2), np.nan)
    ion_sig = np.full((n, 2), np.nan)
    ion_src: list[list[str | None]] = [[None, None] for _ in range(n)]
    counts = np.zeros((n, 2))
    charges = np.zeros((n, 2))
    row_flags: list[list[Flag]] = [[] for _ in range(n)]
    for i, si in enumerate(ions):
        if si is None:
            continue
        counts[i] = (si.n_cation, si.n_anion)
        charges[i] = (si.z_cation, si.z_anion)
        for k, (ion, z, col) in enumerate(((si.cation, si.z_cation, hcat),
                                           (si.anion, si.z_anion, han))):
            builtin = hydration_enthalpy(ion, h_plus=h_work)
            if col is not None and col.values is not None and not math.isnan(col.values[i]):
                sc = scales[col.header].scale
                v = float(convert_hydration(col.values[i], z, sc.h_plus, h_work))
                ion_val[i, k] = v
                if col.uncertainties is not None:
                    ion_sig[i, k] = col.uncertainties[i]
                conv = "" if sc.h_plus == h_work else f", converted from {sc.name} scale"
                ion_src[i][k] = f"ΔhydH({ion}): {table.sheet}!{_cell(table, i, col)}{conv}"
                if builtin is not None:
                    _scale_suspect(float(col.values[i]), z, sc, builtin.value, h_work, ion,
                                   col, table, i, row_flags[i])
            elif builtin is not None:
                ion_val[i, k] = builtin.value
                ion_sig[i, k] = builtin.uncertainty
                ion_src[i][k] = f"ΔhydH({ion}): built-in, {builtin.source}"

    used = counts != 0
    missing_ion = used & np.isnan(ion_val)
    h_val = np.where(missing_ion.any(axis=1) | ~used.any(axis=1), np.nan,
                     (counts * np.nan_to_num(ion_val)).sum(axis=1))
    us = np.where(used & ~np.isnan(ion_sig), counts * np.nan_to_num(ion_sig), 0.0)
    h_sig = np.where(np.isnan(h_val), np.nan, np.sqrt((us ** 2).sum(axis=1)))
    h_sig_complete = ~(used & np.isnan(ion_sig)).any(axis=1)
    h_from_sum = np.zeros(n, dtype=bool)
    if hsum is not None and hsum.values is not None:
        hv, hu = vals(hsum)
        h_from_sum = ~np.isnan(hv)
        h_val = np.where(h_from_sum, hv, h_val)
        h_sig = np.where(h_from_sum, hu, h_sig)

    # With every term given, compute ΔsolH from the other two and compare.
    have_all = ~np.isnan(s_val) & ~np.isnan(lat) & ~np.isnan(h_val)
    s_in = np.where(have_all, np.nan, s_val)
    sol = solve_solution(s_in, lat, h_val, solution_sigma=s_sig, lattice_sigma=lat_sig,
                         hydration_sigma=h_sig)

    for i in range(n):
        formula = fcol.texts[i]
        if not formula or i >= len(rows):
            continue
        rr = rows[i]
        flags = row_flags[i]
        fcell = _cell(table, i, fcol)
        si = ions[i]
        if si is not None and si.basis != "Born-Haber assignment":
            flags.append(Flag("ions-from-hydration-table", Severity.NOTE,
                              f"for the solution cycle {formula} was read as "
                              f"{_count(si.n_cation)}{si.cation} + {_count(si.n_anion)}{si.anion}",
                              table.sheet, fcell))
        srcs = [s for s in (lat_src[i],) if s]
        if not h_from_sum[i]:
            srcs += [s for s in ion_src[i] if s]
        elif hsum is not None:
            srcs.append(f"Σ ν ΔhydH: {table.sheet}!{_cell(table, i, hsum)}")
        scell = _cell(table, i, scol) if scol is not None else fcell
        status = int(sol.status[i])
        partial = "" if (h_sig_complete[i] or h_from_sum[i]) and sol.sigma_complete[i] else \
            "; the uncertainty counts only the terms that have one"
        value_for_caution = math.nan
        if status == SolutionStatus.SOLVED:
            k = int(sol.solved[i])
            v = float(sol.completed[i, k])
            sg = float(sol.sigmas[i, k])
            if k == 0:
                rr.values["solution_enthalpy"] = ComputedValue(
                    v, sg, KJ, "solution cycle: ΔsolH = ΔH_L + Σ ν ΔhydH (dissociation "
                    f"convention for ΔH_L; hydration on {work_words})" + partial, tuple(srcs))
                value_for_caution = v
                if have_all[i]:
                    _compare(float(s_val[i]), float(s_sig[i]), v, sg, settings.tolerance, rr,
                             table, scell, flags)
            elif k == 1:
                if "lattice_enthalpy" not in rr.values:
                    rr.values["lattice_enthalpy"] = ComputedValue(
                        v, sg, KJ, "solution cycle: ΔH_L = ΔsolH − Σ ν ΔhydH; dissociation "
                        "convention" + partial,
                        tuple([f"ΔsolH: {table.sheet}!{scell}", *srcs]))
                flags.append(Flag("term-derived", Severity.NOTE,
                                  f"the lattice enthalpy of {formula} was not known and was "
                                  f"derived from the solution cycle: {v:.1f} kJ/mol",
                                  table.sheet, fcell))
                value_for_caution = float(s_val[i])
            else:
                _derived_hydration(rr, flags, i, v, sg, si, missing_ion, counts, ion_val,
                                   ion_sig, table, scell, fcell, formula, work_words,
                                   [f"ΔsolH: {table.sheet}!{scell}", *srcs])
                value_for_caution = float(s_val[i])
        else:
            what = []
            if np.isnan(lat[i]):
                what.append("the lattice enthalpy (no Born-Haber value, no lattice column)")
            if np.isnan(h_val[i]):
                if si is None:
                    what.append("the hydration enthalpies (the ions of the formula are not "
                                "known)")
                else:
                    names = [ion for ion, miss in zip((si.cation, si.anion), missing_ion[i],
                                                      strict=True) if miss]
                    what.append("the hydration enthalpy of " + " and ".join(names)
                                if names else "the hydration enthalpies")
            if np.isnan(s_val[i]):
                what.append("the solution enthalpy")
            flags.append(Flag("solution-inputs-missing", Severity.ERROR,
                              f"cannot close the solution cycle of {formula}: missing "
                              + ", ".join(what) + "; two of ΔsolH, ΔH_L and Σ ν ΔhydH are "
                              "needed", table.sheet, scell))
            value_for_caution = float(s_val[i])
        if math.isfinite(value_for_caution):
            try:
                mass = molar_mass(parse_formula(formula), ref.atomic_mass)
            except SheetcycleError:
                mass = math.nan
            fl = caution_flag(value_for_caution, mass, SOLUTION, table.sheet, scell)
            if fl is not None:
                flags.append(fl)
        rr.flags.extend(flags)


def _count(x: float) -> str:
    return "" if x == 1 else f"{x:g} "


def _compare(given: float, given_sig: float, computed: float, sig: float, tolerance: float,
             rr: RowResult, table: Table, cell: str, flags: list[Flag]) -> None:
    res = given - computed
    rs = math.sqrt(sig ** 2 + (0.0 if math.isnan(given_sig) else given_sig ** 2)) \
        if math.isfinite(sig) else given_sig
    rr.values["solution_residual"] = ComputedValue(
        res, rs, KJ, "given ΔsolH minus ΔH_L + Σ ν ΔhydH", ())
    limit = max(2 * (rs if math.isfinite(rs) else 0.0), tolerance)
    if abs(res) > limit:
        flags.append(Flag(
            "solution-cycle-open", Severity.WARNING,
            f"the given solution enthalpy {given:.1f} kJ/mol differs from ΔH_L + Σ ν ΔhydH = "
            f"{computed:.1f} kJ/mol by {res:+.1f} kJ/mol, more than max(2σ, {tolerance:g} "
            "kJ/mol); single-ion hydration data scatter by 10-15 kJ/mol, so check the larger "
            "differences (a sign, a scale, a lattice value)", table.sheet, cell))


def _derived_hydration(rr: RowResult, flags: list[Flag], i: int, v: float, sg: float,
                       si: SaltIons | None, missing_ion: np.ndarray, counts: np.ndarray,
                       ion_val: np.ndarray, ion_sig: np.ndarray, table: Table, scell: str,
                       fcell: str, formula: str, work_words: str, srcs: list[str]) -> None:
    """ΔsolH and ΔH_L known: the hydration sum, or the one ion without a value."""
    if si is not None and missing_ion[i].sum() == 1:
        k = int(np.argmax(missing_ion[i]))
        other = 1 - k
        ion = (si.cation, si.anion)[k]
        single = (v - counts[i, other] * ion_val[i, other]) / counts[i, k]
        s_other = ion_sig[i, other] if math.isfinite(ion_sig[i, other]) else 0.0
        ssg = math.sqrt(sg ** 2 + (counts[i, other] * s_other) ** 2) / counts[i, k]
        name = ("hydration_cation", "hydration_anion")[k]
        rr.values[name] = ComputedValue(
            float(single), float(ssg), KJ,
            f"solution cycle solved for ΔhydH({ion}) on {work_words}", tuple(srcs))
        flags.append(Flag("term-derived", Severity.NOTE,
                          f"the hydration enthalpy of {ion} was not known and was derived from "
                          f"the solution cycle of {formula}: {single:.1f} kJ/mol on {work_words}",
                          table.sheet, fcell))
        return
    rr.values["hydration_sum"] = ComputedValue(
        v, sg, KJ, "solution cycle: Σ ν ΔhydH = ΔsolH − ΔH_L", tuple(srcs))
    flags.append(Flag("term-derived", Severity.NOTE,
                      f"the hydration enthalpy of the ions of {formula} together was derived "
                      f"from the solution cycle: {v:.1f} kJ/mol", table.sheet, fcell))


def _scale_suspect(raw: float, z: int, sc: HydrationScale, builtin_work: float, h_work: float,
                   ion: str, col: Column, table: Table, i: int, flags: list[Flag]) -> None:
    """A user value that matches the built-in one on another scale rather than its own."""
    on_own = float(convert_hydration(builtin_work, z, h_work, sc.h_plus))
    if abs(raw - on_own) <= _SCALE_SUSPECT * abs(z):
        return
    for other in _KNOWN_SCALES:
        if other.h_plus == sc.h_plus:
            continue
        there = float(convert_hydration(builtin_work, z, h_work, other.h_plus))
        if abs(raw - there) <= _SCALE_MATCH * abs(z):
            flags.append(Flag(
                "hydration-scale-suspect", Severity.WARNING,
                f"{col.header} = {raw:.0f} kJ/mol for {ion} was read on the {sc.name} scale "
                f"(ΔhydH(H+) = {sc.h_plus:g}), where the built-in value is {on_own:.0f}; it "
                f"matches the built-in value on the {other.name} scale ({there:.0f}). State the "
                "column's scale in its header ('conventional' or 'absolute')",
                table.sheet, _cell(table, i, col)))
            return

