"""Theoretical lattice energies beside every cycle value: the table pass.

For every compound row with assigned ions, gather what the ionic models need (charges and
counts from the ions; radii from the row's radius columns or Shannon's table; the structure
type from a structure column or the built-in mapping; r0 from a distance column, the
density, the row's radius columns, the built-in table of measured lattice constants or
Shannon's radii, in that order; the Born exponent from the ions; the formula-unit volume
from a molar volume, a density or a cell volume and Z), compute the four models of
:mod:`sheetcycle.engine.lattice_models` once over the whole table, and add per row:

* ``kapustinskii``, ``born_lande``, ``born_mayer``, ``volume_based``: U in kJ/mol (0 K,
  positive), each with a method text naming the constants, inputs and their sources;
* ``<model>_difference`` (%): 100 (cycle − model ΔH_L) / model ΔH_L, where the model's U is
  first turned into ΔH_L(298 K) with Jenkins' correction;
* flags ``covalent-character``, ``models-disagree``, ``born-exponent-unknown``,
  ``structure-unknown``, ``radius-unknown``, ``formula-units-missing`` (docs/flags.md).

See docs/lattice-models.md, "In a workbook run", for the choices made here.
"""

from __future__ import annotations

import math
from collections import defaultdict
from collections.abc import Sequence
from dataclasses import dataclass, field
from functools import lru_cache, partial
from typing import TypeVar

import numpy as np
import numpy.typing as npt

from sheetcycle.data.radii import (
    interionic_distance,
    ionic_radius,
    madelung_constant,
    structure_of,
)
from sheetcycle.engine import lattice_models as lm
from sheetcycle.io.tables import a1
from sheetcycle.model import Column, Flag, Severity, share
from sheetcycle.pipeline import TableContext

__all__ = ["COMPARISON_ORDER", "DIFFERENCE_SUFFIX", "MODELS", "theory_pass"]

FloatArray = npt.NDArray[np.float64]
_V = TypeVar("_V")
#: Per-row things only some rows have (flags, missing radii), by row index.
Rows = dict[int, _V]
KJ = "kJ/mol"

#: The JSON names of the four models (U, kJ/mol).
MODELS: tuple[str, ...] = ("kapustinskii", "born_lande", "born_mayer", "volume_based")
#: ``<model> + DIFFERENCE_SUFFIX`` names the percent difference of the cycle value from it.
DIFFERENCE_SUFFIX = "_difference"
#: Which model the covalent-character comparison uses: the first group with a value.
#: Within the first group, the higher of the two values (the more generous to the ionic
#: description, so that a flag means both structure-based models fall short).
COMPARISON_ORDER: tuple[tuple[str, ...], ...] = (
    ("born_lande", "born_mayer"), ("kapustinskii",), ("volume_based",))

_TITLE = {"kapustinskii": "Kapustinskii", "born_lande": "Born-Landé",
          "born_mayer": "Born-Mayer", "volume_based": "volume-based (Glasser-Jenkins)"}

#: Coordination numbers (cation, anion) of the structure types with a Madelung constant.
_COORDINATION: dict[str, tuple[int, int]] = {
    "rock salt": (6, 6), "caesium chloride": (8, 8), "zinc blende": (4, 4),
    "wurtzite": (4, 4), "fluorite": (8, 4), "antifluorite": (4, 8), "rutile": (6, 3),
    "corundum": (6, 4),
}  # fmt: skip
_KAPUSTINSKII_CN = 6

_SRC_CODATA = "constants: CODATA 2018 (N_A, e, ε₀)"
_SRC_KAPUSTINSKII = "Kapustinskii, Q. Rev. Chem. Soc. 10 (1956) 283"
_SRC_PAULING = ("Born exponents: Pauling, The Nature of the Chemical Bond, 3rd ed. (1960), "
                "He 5, Ne 7, Ar/Cu+ 9, Kr/Ag+ 10, Xe/Au+ 12")
_SRC_VBT = ("Jenkins, Roobottom, Passmore & Glasser, Inorg. Chem. 38 (1999) 3609; "
            "Glasser & Jenkins, J. Am. Chem. Soc. 122 (2000) 632")
_SRC_JENKINS = "Jenkins correction: Jenkins, J. Chem. Educ. 82 (2005) 950"
_SRC_MASS = "molar mass from the formula and the built-in standard atomic weights"


@lru_cache(maxsize=256)
def _canonical(text: str | None) -> tuple[str, float, str] | None:
    """(canonical structure name, Madelung constant, source) for a name or alias."""
    if not text or not text.strip():
        return None
    found = madelung_constant(text)
    if found is None:
        return None
    for name in _COORDINATION:
        if madelung_constant(name) == found:
            return name, found[0], found[1]
    return None


def _ion(sym: str, z: int) -> str:
    mag = "" if abs(z) == 1 else str(abs(z))
    return f"{sym}{mag}{'+' if z > 0 else '−'}"


def _signed(x: float) -> str:
    return f"{'−' if x < 0 else '+'}{abs(x):.2f}"


def _pct(x: float) -> str:
    return f"{x:.0f}" if abs(x) >= 10 else f"{x:.1f}"


@dataclass
class _Rows:
    """Per-row inputs of the models as arrays, with per-row words about where they came from."""

    n: int
    ok: np.ndarray  # bool: the row has ions
    zc: FloatArray
    za: FloatArray
    nc: FloatArray
    na: FloatArray
    labels: list[tuple[str, str]]  # (cation label, anion label)
    structure: list[str | None]
    madelung: FloatArray
    structure_src: list[str]
    r_kap: tuple[FloatArray, FloatArray] = field(
        default_factory=lambda: (np.empty(0), np.empty(0)))
    r_kap_src: list[Sequence[str]] = field(default_factory=list)
    r0: FloatArray = field(default_factory=lambda: np.empty(0))
    r0_how: list[str] = field(default_factory=list)
    r0_src: list[Sequence[str]] = field(default_factory=list)
    born_n: FloatArray = field(default_factory=lambda: np.empty(0))
    volume: FloatArray = field(default_factory=lambda: np.empty(0))
    ionic_strength: FloatArray = field(default_factory=lambda: np.empty(0))
    charge_type: npt.NDArray[np.object_] = field(default_factory=lambda: np.empty(0, object))
    volume_how: list[str] = field(default_factory=list)
    volume_src: list[Sequence[str]] = field(default_factory=list)


def _cell(ctx: TableContext, i: int, col: Column) -> str:
    return a1(ctx.table.first_row - 1 + i, col.col)


def _where(ctx: TableContext, i: int, col: Column) -> str:
    return f"{col.header}: {ctx.table.sheet}!{_cell(ctx, i, col)}"


def _column_values(ctx: TableContext, quantity: str) -> tuple[Column | None, FloatArray]:
    col = ctx.table.column(quantity)
    if col is None or col.values is None:
        return None, np.full(len(ctx.rows), np.nan)
    return col, np.asarray(col.values, dtype=float)


# ----------------------------------------------------------------------------- inputs


def _ions_and_structures(ctx: TableContext, flags: Rows[list[Flag]]) -> _Rows:
    n = len(ctx.rows)
    nan = np.full(n, np.nan)
    zc, za, nc, na, mad = nan.copy(), nan.copy(), nan.copy(), nan.copy(), nan.copy()
    ok = np.zeros(n, dtype=bool)
    labels: list[tuple[str, str]] = [("", "")] * n
    structure: list[str | None] = [None] * n
    structure_src = [""] * n
    scol = ctx.table.column("structure_type")
    fcol = ctx.table.column("formula")
    for i, ions in enumerate(ctx.ions):
        if ions is None:
            continue
        ok[i] = True
        zc[i], za[i] = ions.cation_charge, ions.anion_charge
        nc[i], na[i] = ions.n_cation, ions.n_anion
        labels[i] = share((_ion(ions.cation, ions.cation_charge),
                           _ion(ions.anion, ions.anion_charge)))
        formula = ctx.rows[i].formula or ""
        typed = scol.texts[i] if scol is not None and scol.texts is not None else None
        if typed and typed.strip():
            found = _canonical(typed)
            if found is None:
                cell = _cell(ctx, i, scol) if scol is not None else None
                flags[i].append(Flag(
                    "structure-unknown", Severity.NOTE,
                    f"structure '{typed.strip()}' of {formula} has no Madelung constant here "
                    f"(known: {', '.join(_COORDINATION)}); no Born-Landé or Born-Mayer value",
                    ctx.table.sheet, cell))
                continue
            assert scol is not None  # typed came from it
            structure_src[i] = f"structure {found[0]} from {_where(ctx, i, scol)}"
        else:
            built = structure_of(formula)
            found = _canonical(built[0]) if built else None
            if found is None or built is None:
                fcell = _cell(ctx, i, fcol) if fcol is not None else None
                flags[i].append(Flag(
                    "structure-unknown", Severity.NOTE,
                    share(f"no structure type for {formula} (no structure column value and "
                          "none built in): no Born-Landé or Born-Mayer value; a structure "
                          "column (rock salt, caesium chloride, zinc blende, wurtzite, "
                          "fluorite, antifluorite, rutile, corundum) gives them"),
                    ctx.table.sheet, fcell))
                continue
            structure_src[i] = f"structure {found[0]} of {formula}: built-in table ({built[1]})"
        structure[i] = found[0]
        mad[i] = found[1]
        structure_src[i] = share(structure_src[i] + f"; Madelung constant {found[1]:g} ({found[2]})")
    return _Rows(n, ok, zc, za, nc, na, labels, structure, mad, structure_src)


def _radii(ctx: TableContext, rows: _Rows, cn_of: Sequence[tuple[int, int] | None],
           missing: Rows[set[str]]) -> tuple[FloatArray, FloatArray, list[Sequence[str]]]:
    """Radii (pm) per row: the row's radius columns, else Shannon at the given coordination."""
    ccol, cvals = _column_values(ctx, "radius_cation")
    acol, avals = _column_values(ctx, "radius_anion")
    rc, ra = np.full(rows.n, np.nan), np.full(rows.n, np.nan)
    srcs: list[Sequence[str]] = [()] * rows.n  # none yet: one shared empty tuple
    for i, ions in enumerate(ctx.ions):
        cn = cn_of[i]
        if ions is None or cn is None:
            continue
        mine: list[str] = []
        for k, (sym, z, col, vals, out) in enumerate((
                (ions.cation, ions.cation_charge, ccol, cvals, rc),
                (ions.anion, ions.anion_charge, acol, avals, ra))):
            label = rows.labels[i][k]
            if col is not None and not math.isnan(vals[i]):
                out[i] = vals[i]
                mine.append(f"r({label}) = {vals[i]:g} pm from {_where(ctx, i, col)}")
                continue
            found = _shannon_words(label, sym, z, cn[k])
            if found is None:
                missing[i].add(label)
                continue
            out[i] = found[0]
            mine.append(found[1])
        if mine:
            srcs[i] = share(tuple(mine))  # one copy per salt
    return rc, ra, srcs


@lru_cache(maxsize=4096)
def _shannon_words(label: str, sym: str, z: int, cn: int) -> tuple[float, str] | None:
    """A Shannon radius and the words that give its source, made once per ion and
    coordination number."""
    found = _shannon(sym, z, cn)
    if found is None:
        return None
    return found[0], share(f"r({label}) = {found[0]:g} pm: {found[1]}")


@lru_cache(maxsize=1024)
def _shannon(sym: str, z: int, cn: int) -> tuple[float, str] | None:
    return ionic_radius(sym, z, cn)


def _molar_mass(ctx: TableContext) -> FloatArray:
    out = np.full(len(ctx.rows), np.nan)
    for i, ions in enumerate(ctx.ions):
        if ions is None:
            continue
        mc, ma = ctx.ref.atomic_mass(ions.cation), ctx.ref.atomic_mass(ions.anion)
        if mc is not None and ma is not None:
            out[i] = ions.n_cation * mc + ions.n_anion * ma
    return out


def _distances(ctx: TableContext, rows: _Rows, molar_mass: FloatArray,
               missing: Rows[set[str]]) -> None:
    """r0 per row, the first of: a distance column; the density (cubic structures); the
    row's own radius columns (both ions); the built-in measured distance (when the row's
    structure is the tabulated one); the sum of Shannon radii."""
    n = rows.n
    rows.r0 = np.full(n, np.nan)
    rows.r0_how = [""] * n
    rows.r0_src = [()] * n  # no sources yet: one shared empty tuple
    dcol, dvals = _column_values(ctx, "interionic_distance")
    rhocol, rho = _column_values(ctx, "density")
    ccol, cvals = _column_values(ctx, "radius_cation")
    acol, avals = _column_values(ctx, "radius_anion")
    names = np.array([s if s is not None else "" for s in rows.structure], dtype=object)
    from_density = lm.r0_from_density(names, molar_mass, rho)
    cn_of = [_COORDINATION.get(s) if s is not None else None for s in rows.structure]
    rc, ra, rsrc = _radii(ctx, rows, cn_of, missing)
    from_radii = lm.r0_from_radii(rc, ra)
    for i in range(n):
        structure = rows.structure[i]
        if structure is None:
            continue
        formula = ctx.rows[i].formula or ""
        if dcol is not None and np.isfinite(dvals[i]) and dvals[i] > 0:
            rows.r0[i] = dvals[i]
            rows.r0_how[i] = "given"
            rows.r0_src[i] = [f"r0 from {_where(ctx, i, dcol)}"]
            continue
        if rhocol is not None and np.isfinite(from_density[i]):
            rows.r0[i] = from_density[i]
            rows.r0_how[i] = f"from the density {rho[i]:g} g/cm3 ({structure} cell)"
            rows.r0_src[i] = [f"r0 from the density, {_where(ctx, i, rhocol)}", _SRC_MASS]
            continue
        own_radii = (ccol is not None and acol is not None and np.isfinite(cvals[i])
                     and np.isfinite(avals[i]))
        measured = None if own_radii else _measured(formula, structure)
        if measured is not None:
            rows.r0[i] = measured[0]
            rows.r0_how[i] = ("measured, from the built-in table of room-temperature "
                              "lattice constants")
            rows.r0_src[i] = share((measured[1],))
        elif np.isfinite(from_radii[i]):
            rows.r0[i] = from_radii[i]
            rows.r0_how[i] = "estimated as r+ + r−"
            other = None if own_radii else _measured(formula, None)
            if own_radii:
                rows.r0_how[i] += " from the row's radius columns"
            elif other is not None:
                rows.r0_how[i] += (f"; the built-in measured distance of {formula} is for "
                                   f"another structure than {structure}")
            rows.r0_src[i] = rsrc[i]


@lru_cache(maxsize=1024)
def _measured(formula: str, structure: str | None) -> tuple[float, str] | None:
    return interionic_distance(formula, structure)


def _volumes(ctx: TableContext, rows: _Rows, molar_mass: FloatArray,
             flags: Rows[list[Flag]]) -> None:
    """Formula-unit volume (nm3): a molar-volume column, else the density, else cell / Z."""
    n = rows.n
    rows.volume = np.full(n, np.nan)
    rows.volume_how = [""] * n
    rows.volume_src = [()] * n
    vcol, vm = _column_values(ctx, "molar_volume")
    rhocol, rho = _column_values(ctx, "density")
    ccol, vcell = _column_values(ctx, "cell_volume")
    zcol, zcell = _column_values(ctx, "formula_units_per_cell")
    by_rho = lm.formula_unit_volume_from_density(molar_mass, rho)
    by_cell = lm.formula_unit_volume_from_cell(vcell, zcell)
    fcol = ctx.table.column("formula")
    for i in range(n):
        if not rows.ok[i]:
            continue
        if vcol is not None and np.isfinite(vm[i]) and vm[i] > 0:
            rows.volume[i] = vm[i]
            rows.volume_how[i] = "given"
            rows.volume_src[i] = [f"V from {_where(ctx, i, vcol)}"]
        elif rhocol is not None and np.isfinite(by_rho[i]):
            rows.volume[i] = by_rho[i]
            rows.volume_how[i] = (f"V = M/(ρ N_A), M = {molar_mass[i]:.3f} g/mol, "
                                  f"ρ = {rho[i]:g} g/cm3")
            rows.volume_src[i] = [f"density from {_where(ctx, i, rhocol)}", _SRC_MASS]
        elif ccol is not None and zcol is not None and np.isfinite(by_cell[i]):
            rows.volume[i] = by_cell[i]
            rows.volume_how[i] = f"V = V_cell/Z = {vcell[i]:.5g} nm3 / {zcell[i]:g}"
            rows.volume_src[i] = [f"cell volume from {_where(ctx, i, ccol)}",
                                  f"Z from {_where(ctx, i, zcol)}"]
        elif ccol is not None and np.isfinite(vcell[i]):
            cell = _cell(ctx, i, fcol) if fcol is not None else None
            flags[i].append(Flag(
                "formula-units-missing", Severity.NOTE,
                f"{ccol.header} is given but not the number Z of formula units per cell: no "
                "volume-based value (add a Z column)", ctx.table.sheet, cell))


def _born_exponents(ctx: TableContext, rows: _Rows, flags: Rows[list[Flag]]) -> None:
    cat = [a.cation if a is not None else None for a in ctx.ions]
    an = [a.anion if a is not None else None for a in ctx.ions]
    rows.born_n = lm.born_exponent_for_ions(np.array(cat, dtype=object), rows.zc,
                                            np.array(an, dtype=object), rows.za)
    fcol = ctx.table.column("formula")
    for i, ions in enumerate(ctx.ions):
        if ions is None or np.isfinite(rows.born_n[i]):
            continue
        which = []
        for sym, z, label in ((ions.cation, ions.cation_charge, rows.labels[i][0]),
                              (ions.anion, ions.anion_charge, rows.labels[i][1])):
            zn = ctx.ref.atomic_number(sym)
            if zn is None:
                which.append(f"{label} (element unknown)")
                continue
            electrons = zn - z  # z is signed: cation loses, anion gains
            if electrons not in lm.BORN_EXPONENTS:
                which.append(f"{label} has {electrons} electrons")
        if not which:
            which = [f"{rows.labels[i][0]} and {rows.labels[i][1]} have no listed exponent"]
        cell = _cell(ctx, i, fcol) if fcol is not None else None
        flags[i].append(Flag(
            "born-exponent-unknown", Severity.NOTE,
            f"no Born-Landé value for {ctx.rows[i].formula}: {' and '.join(which)}, not a "
            "noble-gas or d10 configuration, so Pauling's scheme gives no Born exponent "
            "and none was guessed (Born-Mayer needs none)", ctx.table.sheet, cell))


# ----------------------------------------------------------------------------- method texts


def _charges(rows: _Rows, i: int) -> str:
    return f"z = {rows.zc[i]:+.0f}/{rows.za[i]:+.0f}".replace("-", "−")


def _enthalpy_words(u: float, corr: float) -> str:
    sign = "−" if corr < 0 else "+"
    return (f"U at 0 K; ΔH_L(298 K) = U {sign} {abs(corr):.2f} kJ/mol = {u + corr:.1f} kJ/mol "
            "(Jenkins correction [p(n/2 − 2) + q(n/2 − 2)]RT, monatomic ions n = 3)")


def _model_words(name: str, rows: _Rows, models: dict[str, FloatArray], corr: FloatArray,
                 i: int) -> tuple[str, tuple[str, ...]]:
    return _method(name, rows, i, float(models[name][i]), float(corr[i]))


def _method(name: str, rows: _Rows, i: int, u: float, corr: float) -> tuple[str, tuple[str, ...]]:
    if name == "kapustinskii":
        rc, ra = rows.r_kap[0][i], rows.r_kap[1][i]
        text = (f"Kapustinskii: U = K·ν·|z+z−|/(r+ + r−)·(1 − d/(r+ + r−)), "
                f"K = {lm.KAPUSTINSKII_K_KJ_PM / 1e5:.5g}×10⁵ kJ pm/mol, "
                f"d = {lm.KAPUSTINSKII_D_PM:g} pm; "
                f"ν = {rows.nc[i] + rows.na[i]:g}, {_charges(rows, i)}, "
                f"r({rows.labels[i][0]}) = {rc:g} pm, r({rows.labels[i][1]}) = {ra:g} pm; "
                f"table radii at coordination {_KAPUSTINSKII_CN} for both ions whatever the "
                "structure (the rock-salt reference of Kapustinskii's equation)")
        srcs = (_SRC_KAPUSTINSKII, *rows.r_kap_src[i])
    elif name in ("born_lande", "born_mayer"):
        tail = (f"(1 − 1/n), n = {rows.born_n[i]:g} (mean of the two ions' exponents)"
                if name == "born_lande" else f"(1 − ρ/r0), ρ = {lm.BORN_MAYER_RHO_PM:g} pm")
        text = (f"{_TITLE[name]}: U = N_A·M·|z+z−|·e²/(4πε₀·r0)·{tail}; "
                f"M = {rows.madelung[i]:g} ({rows.structure[i]}; with |z+z−| and the shortest "
                f"cation-anion distance), {_charges(rows, i)}, r0 = {rows.r0[i]:.1f} pm "
                f"({rows.r0_how[i]})")
        srcs = (_SRC_CODATA, rows.structure_src[i], *rows.r0_src[i])
        if name == "born_lande":
            srcs = (*srcs, _SRC_PAULING)
        else:
            srcs = (*srcs, "ρ = 34.5 pm: common practice, no source")
    else:
        ctype = str(rows.charge_type[i])
        alpha, beta = lm.VBT_COEFFICIENTS[ctype]
        ionic = float(rows.ionic_strength[i])
        high = lm.VBT_HIGH_A * ionic * np.cbrt(2 * ionic / rows.volume[i])
        if math.isclose(u, high, rel_tol=1e-12):
            form = (f"high-energy form U = A·I·(2I/V)^(1/3), A = {lm.VBT_HIGH_A:g} kJ nm/mol "
                    f"(the estimate U = 2I(α/V^(1/3) + β) exceeded {lm.VBT_HIGH_THRESHOLD:g} "
                    "kJ/mol)")
        else:
            form = (f"U = 2I(α/V^(1/3) + β), α = {alpha:g} kJ nm/mol, β = {beta:g} kJ/mol "
                    f"(charge type {ctype})")
        text = (f"volume-based (Glasser-Jenkins): {form}; I = {ionic:g}, "
                f"V = {rows.volume[i]:.5g} nm3 per formula unit ({rows.volume_how[i]})")
        srcs = (_SRC_VBT, *rows.volume_src[i])
    return f"{text}; {_enthalpy_words(u, corr)}", (*srcs, _SRC_JENKINS)


# ----------------------------------------------------------------------------- the pass


def theory_pass(ctx: TableContext) -> None:
    """Add the four ionic-model lattice energies, their differences from the cycle value and
    the flags that read them to every compound row of one table."""
    n = len(ctx.rows)
    if n == 0 or not any(a is not None for a in ctx.ions):
        return
    # per row, made when a row first gets one (most rows get none)
    flags: Rows[list[Flag]] = defaultdict(list)
    missing: Rows[set[str]] = defaultdict(set)
    rows = _ions_and_structures(ctx, flags)
    molar_mass = _molar_mass(ctx)

    kap_cn = [(_KAPUSTINSKII_CN, _KAPUSTINSKII_CN) if ok else None for ok in rows.ok]
    rkc, rka, rows.r_kap_src = _radii(ctx, rows, kap_cn, missing)
    rows.r_kap = (rkc, rka)
    _distances(ctx, rows, molar_mass, missing)
    _volumes(ctx, rows, molar_mass, flags)
    _born_exponents(ctx, rows, flags)

    rows.ionic_strength = lm.ionic_strength_factor(rows.nc, rows.zc, rows.na, rows.za)
    rows.charge_type = lm.vbt_charge_type(rows.zc, rows.za)
    with np.errstate(all="ignore"):
        models: dict[str, FloatArray] = {
            "kapustinskii": lm.kapustinskii(rows.nc + rows.na, rows.zc, rows.za, rkc, rka),
            "born_lande": lm.born_lande(rows.madelung, rows.zc, rows.za, rows.r0, rows.born_n),
            "born_mayer": lm.born_mayer(rows.madelung, rows.zc, rows.za, rows.r0),
            "volume_based": lm.volume_based(rows.volume, rows.ionic_strength,
                                            rows.charge_type),
        }
        corr = lm.jenkins_correction(rows.nc, rows.na, "monatomic", "monatomic")
        cycle = np.asarray(ctx.lattice, dtype=float)
        sigma = np.asarray(ctx.lattice_sigma, dtype=float)
        diffs = {name: lm.percent_difference(cycle, u + corr) for name, u in models.items()}
        diff_sigma = {name: 100.0 * sigma / (u + corr) for name, u in models.items()}
        stack = np.stack([models[m] for m in MODELS])
        spread = lm.model_spread(*stack)
        lowest = np.where(np.isfinite(stack), stack, np.inf).min(axis=0)
        spread_pct = 100.0 * spread / lowest

    pick = _comparison_models(models, diffs)
    # one renderer per model for the whole table: a value keeps only its row index
    words = {m: partial(_model_words, m, rows, models, corr) for m in MODELS}
    diff_words = {m: partial(_difference_words, m, cycle, models, corr) for m in MODELS}
    ok = np.asarray(rows.ok, dtype=bool)
    # the values column-wise; the words are written when read (JSON, results workbook)
    for name in MODELS:
        ctx.values.put(name, models[name], math.nan, KJ, words[name],
                       present=ok & np.isfinite(models[name]))
    for name in MODELS:
        ctx.values.put(name + DIFFERENCE_SUFFIX, diffs[name], diff_sigma[name], "%",
                       diff_words[name],
                       present=ok & np.isfinite(cycle) & np.isfinite(diffs[name]))
    fcol = ctx.table.column("formula")
    for i in np.nonzero(ok)[0].tolist():
        rr = ctx.rows[i]
        fcell = _cell(ctx, i, fcol) if fcol is not None else None
        for label in sorted(missing.get(i, ())):
            flags[i].append(Flag(
                "radius-unknown", Severity.NOTE,
                f"no ionic radius for {label} in Shannon's table and no radius column value: "
                "no model that needs it (Kapustinskii; Born-Landé and Born-Mayer unless r0 is "
                "given or follows from the density)", ctx.table.sheet, fcell))
        if math.isfinite(cycle[i]):
            _compare(ctx, rows, i, models, corr, cycle, fcell, flags, pick)
        if math.isfinite(spread_pct[i]) and spread_pct[i] > ctx.settings.model_spread:
            have = {m: float(models[m][i]) for m in MODELS if math.isfinite(models[m][i])}
            hi = max(have, key=have.__getitem__)
            lo = min(have, key=have.__getitem__)
            flags[i].append(Flag(
                "models-disagree", Severity.NOTE,
                f"the ionic models disagree for {rr.formula}: {_TITLE[hi]} gives "
                f"{have[hi]:.0f} kJ/mol, {_pct(spread_pct[i])} % above {_TITLE[lo]} "
                f"({have[lo]:.0f} kJ/mol), more than their usual spread of "
                f"{ctx.settings.model_spread:g} %; check the radii, structure and volume used "
                "(the volume-based fit is known to be poor for 2:2 oxides)",
                ctx.table.sheet, fcell))
        rr.flags.extend(flags.get(i, ()))


def _comparison_models(models: dict[str, FloatArray], diffs: dict[str, FloatArray]
                       ) -> list[tuple[str | None, float, bool]]:
    """Per row: the model the covalent-character comparison uses (COMPARISON_ORDER: the
    first group with a value, the higher value within it), the cycle's percent difference
    from it, and whether it is the only one of a group of several with a value."""
    n = len(next(iter(models.values())))
    chosen = np.full(n, -1)
    alone = np.zeros(n, dtype=bool)
    names = [m for group in COMPARISON_ORDER for m in group]
    for group in COMPARISON_ORDER:
        vals = np.stack([models[m] for m in group])
        have = np.isfinite(vals)
        todo = (chosen < 0) & have.any(axis=0)
        # the first of the highest (max() in group order keeps the first on a tie)
        best = np.argmax(np.where(have, vals, -np.inf), axis=0)
        chosen = np.where(todo, names.index(group[0]) + best, chosen)
        if len(group) > 1:
            alone |= todo & (have.sum(axis=0) == 1)
    d = np.full(n, np.nan)
    for k, m in enumerate(names):
        d = np.where(chosen == k, diffs[m], d)
    return [(names[c] if c >= 0 else None, x, a)
            for c, x, a in zip(chosen.tolist(), d.tolist(), alone.tolist(), strict=True)]


def _difference_words(name: str, cycle: FloatArray, models: dict[str, FloatArray],
                      corr: FloatArray, i: int) -> tuple[str, tuple[str, ...]]:
    u, c = float(models[name][i]), float(corr[i])
    cycle_i, h = float(cycle[i]), u + c
    return (f"100·(Born-Haber ΔH_L − {_TITLE[name]} ΔH_L)/{_TITLE[name]} ΔH_L = "
            f"100·({cycle_i:.1f} − {h:.1f})/{h:.1f}; the model's U {u:.1f} "
            f"kJ/mol turned into ΔH_L(298 K) with the Jenkins correction {_signed(c)} kJ/mol "
            "(monatomic ions, n = 3); positive: the cycle value lies above the ionic model",
            (f"{name} (this row)", "lattice_enthalpy (this row)", _SRC_JENKINS))


def _compare(ctx: TableContext, rows: _Rows, i: int, models: dict[str, FloatArray],
             corr: FloatArray, cycle: FloatArray, fcell: str | None,
             flags: Rows[list[Flag]],
             pick: Sequence[tuple[str | None, float, bool]]) -> None:
    """The covalent-character flag of one row whose cycle value is known."""
    chosen, d, alone = pick[i]
    if chosen is None or not d > ctx.settings.covalent_threshold:
        return
    h = float(models[chosen][i] + corr[i])
    why = {"born_lande": "the higher of the two structure-based models",
           "born_mayer": "the higher of the two structure-based models",
           "kapustinskii": "no structure-based value for this row",
           "volume_based": "the only model with a value for this row"}[chosen]
    if alone:
        why = "the only structure-based model with a value for this row"
    r0_note = ""
    if chosen in ("born_lande", "born_mayer"):
        r0_note = f"; r0 = {rows.r0[i]:.1f} pm, {rows.r0_how[i]}"
        if rows.r0_how[i].startswith("estimated"):
            r0_note += ("; r0 was estimated from ionic radii: the interionic distance or the "
                        "density gives a firmer comparison")
    # Up to twice the threshold the excess is of the size of what the simple ionic models
    # leave out for large, polarisable ions (dispersion: Cs and Rb halides, Li iodide); it
    # is flagged as a note that says both. Beyond it (Ag and Cu(I) halides) it is a warning.
    strong = d > 2 * ctx.settings.covalent_threshold
    meaning = ("the bonding has significant covalent character (polarisation), so the ionic "
               "model underestimates it" if strong else
               "some covalent character, or the dispersion energy the simple ionic models "
               "leave out (largest for big ions such as Cs+, Rb+ and I−)")
    flags[i].append(Flag(
        "covalent-character", Severity.WARNING if strong else Severity.NOTE,
        # rounded figures: rows of one salt often say the same words, kept once
        share(f"the Born-Haber lattice enthalpy ({cycle[i]:.0f} kJ/mol) is {_pct(d)} % above "
              f"the {_TITLE[chosen]} value ({h:.0f} kJ/mol at 298 K): {meaning} "
              f"(compared with {_TITLE[chosen]}, {why}; threshold "
              f"{ctx.settings.covalent_threshold:g} %{r0_note})"), ctx.table.sheet, fcell))
