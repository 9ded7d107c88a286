"""Theoretical lattice energies of ionic solids: Kapustinskii, Born-Landé, Born-Mayer and
volume-based thermodynamics (Glasser-Jenkins), with the helpers they need.

Every function takes array-likes, broadcasts them with numpy and returns float64 arrays.
A missing or non-physical input (NaN, a non-positive distance, volume or ion count, a
Born exponent not above 1, an unknown label) gives NaN in that element and never an
exception, so one bad row of a workbook cannot stop a batch; the caller turns NaN into a
flag. Lattice energies U are in kJ per mol of formula unit, positive in the dissociation
sense (solid -> gaseous ions), at 0 K without zero-point energy (the "lattice potential
energy" U_POT). :func:`jenkins_correction` converts U to the lattice enthalpy at T.

Lengths are in pm, volumes in nm3 per formula unit, molar masses in g/mol, densities in
g/cm3 (the internal basis of :mod:`sheetcycle.model`). The Madelung convention is the one
of ``sheetcycle/data/madelung.csv``: ``M`` goes with ``|z+ z-|`` of the actual ion charges
and with ``r0``, the shortest cation-anion distance (so fluorite 2.51939, corundum 4.1719).
See docs/lattice-models.md.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

import numpy as np
import numpy.typing as npt

__all__ = [
    "AVOGADRO",
    "BORN_EXPONENTS",
    "BORN_MAYER_RHO_PM",
    "COULOMB_KJ_PM",
    "ELEMENTARY_CHARGE",
    "GAS_CONSTANT",
    "ION_KIND_DOF",
    "KAPUSTINSKII_D_PM",
    "KAPUSTINSKII_K_JENKINS_KJ_PM",
    "KAPUSTINSKII_K_KJ_PM",
    "VACUUM_PERMITTIVITY",
    "VBT_COEFFICIENTS",
    "VBT_HIGH_A",
    "VBT_HIGH_THRESHOLD",
    "born_exponent",
    "born_exponent_for_ions",
    "born_lande",
    "born_mayer",
    "delta_pv_correction",
    "formula_unit_volume_from_cell",
    "formula_unit_volume_from_density",
    "ionic_strength_factor",
    "jenkins_correction",
    "kapustinskii",
    "model_spread",
    "percent_difference",
    "r0_from_density",
    "r0_from_radii",
    "vbt_charge_type",
    "volume_based",
]

FloatArray = npt.NDArray[np.float64]

# --- Physical constants: CODATA 2018 (Tiesinga et al., Rev. Mod. Phys. 93, 025010 (2021)).
# N_A, e and R = N_A k are exact in the 2019 SI; epsilon_0 is measured. Hard-coded so that
# run time needs no scipy; tests compare them with scipy.constants.
AVOGADRO = 6.02214076e23  # mol^-1, exact
ELEMENTARY_CHARGE = 1.602176634e-19  # C, exact
VACUUM_PERMITTIVITY = 8.8541878128e-12  # F/m, CODATA 2018, rel. unc. 1.5e-10
GAS_CONSTANT = 8.314462618  # J mol^-1 K^-1 (= N_A k, exact to the digits given)

#: N_A e^2 / (4 pi eps0) in kJ mol^-1 pm: the Coulomb energy of one mole of unit-charge
#: pairs 1 pm apart (about 1.389355e5).
COULOMB_KJ_PM = (
    AVOGADRO * ELEMENTARY_CHARGE**2 / (4.0 * math.pi * VACUUM_PERMITTIVITY) * 1e-3 * 1e12
)

# --- Kapustinskii (Kapustinskii, Q. Rev. Chem. Soc. 10 (1956) 283), in the usual form
# U = K nu |z+ z-| / (r+ + r-) * (1 - d / (r+ + r-)), K = 1.2025e-4 J m mol^-1, d = 3.45e-11 m.
# 1.2025e-4 J m mol^-1 = 1.2025e-7 kJ m mol^-1 = 1.2025e5 kJ pm mol^-1.
KAPUSTINSKII_K_KJ_PM = 1.2025e5
KAPUSTINSKII_D_PM = 34.5
#: The constant of the Kapustinskii form in the CRC Handbook table "Lattice Energies"
#: (Jenkins & Roobottom): 121.4 kJ mol^-1 nm, used there with thermochemical radii.
KAPUSTINSKII_K_JENKINS_KJ_PM = 1.214e5

#: Born-Mayer repulsion range rho (0.345 Angstrom), common practice, no source.
BORN_MAYER_RHO_PM = 34.5

# --- Volume-based thermodynamics: U = 2 I (alpha / Vm^(1/3) + beta), Vm in nm3.
# (alpha / kJ mol^-1 nm, beta / kJ mol^-1) by charge type "z+:z-" (Jenkins, Roobottom,
# Passmore & Glasser, Inorg. Chem. 38 (1999) 3609, Table 4; from memory, not re-checked
# against the paper). "1:1" MX (NaCl), "2:1" MX2 (CaF2), "1:2" M2X (K2O); "general" is the
# fit over all salt types, used for every other charge type (MgO, Al2O3 ...).
VBT_COEFFICIENTS: Mapping[str, tuple[float, float]] = {
    "1:1": (117.3, 51.9),
    "2:1": (133.5, 60.9),
    "1:2": (165.3, -29.8),
    "general": (138.7, 27.6),
}
#: U = A I (2I/Vm)^(1/3) for U above 5000 kJ/mol: A = 121.39 kJ mol^-1 nm
#: (Glasser & Jenkins, J. Am. Chem. Soc. 122 (2000) 632, abstract).
VBT_HIGH_A = 121.39
VBT_HIGH_THRESHOLD = 5000.0

#: Born exponent by the ion's electron count (noble-gas-like configuration), Pauling's
#: values (Pauling, The Nature of the Chemical Bond, 3rd ed., 1960; from memory):
#: He 5, Ne 7, Ar 9, Kr 10, Xe 12; d10 ions take the value of the row they close:
#: 28 e (Cu+, Zn2+) 9, 46 e (Ag+, Cd2+) 10, 78 e (Au+, Hg2+) 12; 86 e (Rn-like) 12.
BORN_EXPONENTS: Mapping[int, float] = {
    2: 5.0, 10: 7.0, 18: 9.0, 28: 9.0, 36: 10.0, 46: 10.0, 54: 12.0, 78: 12.0, 86: 12.0,
}  # fmt: skip
_CONFIG_ELECTRONS: Mapping[str, int] = {
    "he": 2, "ne": 10, "ar": 18, "cu+": 28, "kr": 36, "ag+": 46, "xe": 54, "au+": 78, "rn": 86,
}  # fmt: skip

#: Degrees of freedom n of a gaseous ion for the Jenkins correction (J. Chem. Educ. 82
#: (2005) 950): 3 monatomic, 5 linear polyatomic, 6 non-linear polyatomic.
ION_KIND_DOF: Mapping[str, float] = {"monatomic": 3.0, "linear": 5.0, "nonlinear": 6.0}

_SYMBOLS = (
    "H He Li Be B C N O F Ne Na Mg Al Si P S Cl Ar K Ca Sc Ti V Cr Mn Fe Co Ni Cu Zn Ga Ge "
    "As Se Br Kr Rb Sr Y Zr Nb Mo Tc Ru Rh Pd Ag Cd In Sn Sb Te I Xe Cs Ba La Ce Pr Nd Pm Sm "
    "Eu Gd Tb Dy Ho Er Tm Yb Lu Hf Ta W Re Os Ir Pt Au Hg Tl Pb Bi Po At Rn Fr Ra Ac Th Pa U "
    "Np Pu Am Cm Bk Cf Es Fm Md No Lr Rf Db Sg Bh Hs Mt Ds Rg Cn Nh Fl Mc Lv Ts Og"
).split()
_ATOMIC_NUMBER: Mapping[str, int] = {s: i + 1 for i, s in enumerate(_SYMBOLS)}


def _f(x: Any) -> FloatArray:
    """As a float64 array; anything that is not a number becomes NaN."""
    try:
        return np.asarray(x, dtype=np.float64)
    except (TypeError, ValueError):
        obj = np.asarray(x, dtype=object)
        out = np.full(obj.shape, np.nan)
        for idx, v in np.ndenumerate(obj):
            try:
                out[idx] = float(v)
            except (TypeError, ValueError):
                pass
        return out


def _pos(x: FloatArray) -> FloatArray:
    """x where finite and > 0, NaN elsewhere."""
    with np.errstate(invalid="ignore"):
        return np.where(np.isfinite(x) & (x > 0), x, np.nan)


def _charge_product(z_cation: Any, z_anion: Any) -> FloatArray:
    z = np.abs(_f(z_cation)) * np.abs(_f(z_anion))
    return _pos(z)


def _texts(x: Any) -> npt.NDArray[np.object_]:
    return np.asarray(x, dtype=object)


# --------------------------------------------------------------------------- models


def kapustinskii(
    n_ions: Any,
    z_cation: Any,
    z_anion: Any,
    r_cation_pm: Any,
    r_anion_pm: Any,
    *,
    constant_kj_pm: float = KAPUSTINSKII_K_KJ_PM,
    d_pm: float = KAPUSTINSKII_D_PM,
) -> FloatArray:
    """Kapustinskii lattice energy, kJ/mol (positive).

    ``U = K nu |z+ z-| / (r+ + r-) * (1 - d / (r+ + r-))`` with ``K = 1.2025e-4 J m mol-1``
    (``1.2025e5 kJ pm mol-1``) and ``d = 34.5 pm`` (Kapustinskii, Q. Rev. Chem. Soc. 10
    (1956) 283). ``nu`` is the number of ions in the formula unit; charges may be given
    with or without sign. Pass ``constant_kj_pm=KAPUSTINSKII_K_JENKINS_KJ_PM`` for the
    121.4 kJ mol-1 nm form used with thermochemical radii in the CRC Handbook table.
    """
    with np.errstate(all="ignore"):
        r = _pos(_f(r_cation_pm)) + _pos(_f(r_anion_pm))
        nu = _pos(_f(n_ions))
        u = constant_kj_pm * nu * _charge_product(z_cation, z_anion) / r * (1.0 - d_pm / r)
        return _pos(u)


def _coulomb(madelung: Any, z_cation: Any, z_anion: Any, r0_pm: Any) -> FloatArray:
    with np.errstate(all="ignore"):
        return (
            COULOMB_KJ_PM
            * _pos(_f(madelung))
            * _charge_product(z_cation, z_anion)
            / _pos(_f(r0_pm))
        )


def born_lande(madelung: Any, z_cation: Any, z_anion: Any, r0_pm: Any, born_n: Any) -> FloatArray:
    """Born-Landé lattice energy, kJ/mol (positive).

    ``U = N_A M |z+ z-| e^2 / (4 pi eps0 r0) * (1 - 1/n)`` with CODATA 2018 constants
    (:data:`COULOMB_KJ_PM`), ``M`` in the ``|z+ z-|``/shortest-distance convention of
    madelung.csv and ``r0`` the shortest cation-anion distance in pm. ``n`` must exceed 1.
    """
    with np.errstate(all="ignore"):
        n = _f(born_n)
        n = np.where(np.isfinite(n) & (n > 1.0), n, np.nan)
        return _pos(_coulomb(madelung, z_cation, z_anion, r0_pm) * (1.0 - 1.0 / n))


def born_mayer(
    madelung: Any, z_cation: Any, z_anion: Any, r0_pm: Any, rho_pm: Any = BORN_MAYER_RHO_PM
) -> FloatArray:
    """Born-Mayer lattice energy, kJ/mol (positive).

    ``U = N_A M |z+ z-| e^2 / (4 pi eps0 r0) * (1 - rho/r0)``; ``rho = 34.5 pm`` by default.
    Same constants and Madelung convention as :func:`born_lande`.
    """
    with np.errstate(all="ignore"):
        r0 = _pos(_f(r0_pm))
        return _pos(_coulomb(madelung, z_cation, z_anion, r0) * (1.0 - _pos(_f(rho_pm)) / r0))


def ionic_strength_factor(n_cation: Any, z_cation: Any, n_anion: Any, z_anion: Any) -> FloatArray:
    """``I = 1/2 sum n_i z_i^2`` over the ions of one formula unit (NaCl 1, CaF2 3, Al2O3 15)."""
    with np.errstate(all="ignore"):
        i = 0.5 * (_pos(_f(n_cation)) * _f(z_cation) ** 2 + _pos(_f(n_anion)) * _f(z_anion) ** 2)
        return _pos(i)


def vbt_charge_type(z_cation: Any, z_anion: Any) -> npt.NDArray[np.object_]:
    """The VBT coefficient key for each row: "1:1", "2:1" (MX2), "1:2" (M2X) or "general".

    NaN charges give None.
    """
    zc = np.abs(_f(z_cation))
    za = np.abs(_f(z_anion))
    zc, za = np.broadcast_arrays(zc, za)
    out = np.full(zc.shape, "general", dtype=object)
    for (c, a), name in {(1.0, 1.0): "1:1", (2.0, 1.0): "2:1", (1.0, 2.0): "1:2"}.items():
        out[(zc == c) & (za == a)] = name
    out[~(np.isfinite(zc) & np.isfinite(za))] = None
    return out


def _coefficients(charge_type: Any, shape: tuple[int, ...]) -> tuple[FloatArray, FloatArray]:
    if charge_type is None:
        labels = np.full(shape, "general", dtype=object)
    else:
        labels = np.broadcast_to(_texts(charge_type), shape)
    alpha = np.full(shape, np.nan)
    beta = np.full(shape, np.nan)
    for idx in np.ndindex(shape):
        key = labels[idx]
        coef = VBT_COEFFICIENTS.get(key.strip().lower()) if isinstance(key, str) else None
        if coef is not None:
            alpha[idx], beta[idx] = coef
    return alpha, beta


def volume_based(volume_nm3: Any, ionic_strength: Any, charge_type: Any = None) -> FloatArray:
    """Volume-based (Glasser-Jenkins) lattice energy, kJ/mol (positive).

    ``U = 2 I (alpha / Vm^(1/3) + beta)`` with ``Vm`` the formula-unit volume in nm3 and
    ``(alpha, beta)`` from :data:`VBT_COEFFICIENTS` by ``charge_type`` ("1:1", "2:1",
    "1:2" or "general"; None means "general" for every row; see :func:`vbt_charge_type`).
    Where that estimate exceeds 5000 kJ/mol, the limiting form ``U = A I (2I/Vm)^(1/3)``,
    ``A = 121.39 kJ mol-1 nm`` (Glasser & Jenkins 2000) is used instead, element by element.
    """
    with np.errstate(all="ignore"):
        v, i = np.broadcast_arrays(_pos(_f(volume_nm3)), _pos(_f(ionic_strength)))
        shape = np.broadcast_shapes(v.shape, () if charge_type is None else np.shape(charge_type))
        v = np.broadcast_to(v, shape)
        i = np.broadcast_to(i, shape)
        alpha, beta = _coefficients(charge_type, shape)
        low = 2.0 * i * (alpha / np.cbrt(v) + beta)
        high = VBT_HIGH_A * i * np.cbrt(2.0 * i / v)
        return _pos(np.where(low > VBT_HIGH_THRESHOLD, high, low))


def formula_unit_volume_from_density(molar_mass_g_mol: Any, density_g_cm3: Any) -> FloatArray:
    """Formula-unit volume ``V = M / (rho N_A)`` in nm3 (1 cm3 = 1e21 nm3)."""
    with np.errstate(all="ignore"):
        return _pos(_pos(_f(molar_mass_g_mol)) / (_pos(_f(density_g_cm3)) * AVOGADRO) * 1e21)


def formula_unit_volume_from_cell(cell_volume_nm3: Any, z_formula_units: Any) -> FloatArray:
    """Formula-unit volume from a unit-cell volume (nm3) and Z formula units per cell."""
    with np.errstate(all="ignore"):
        return _pos(_pos(_f(cell_volume_nm3)) / _pos(_f(z_formula_units)))


# ------------------------------------------------------------------- Born exponents


def born_exponent(config: Any) -> FloatArray:
    """Born exponent for a configuration label: "He", "Ne", "Ar", "Kr", "Xe", "Rn",
    "Cu+", "Ag+", "Au+" (case-insensitive), or an electron count (int). NaN otherwise."""
    obj = _texts(config)
    out = np.full(obj.shape, np.nan)
    for idx, v in np.ndenumerate(obj):
        count: int | None = None
        if isinstance(v, str):
            count = _CONFIG_ELECTRONS.get(v.strip().lower())
        elif isinstance(v, int | np.integer) and not isinstance(v, bool):
            count = int(v)
        if count is not None and count in BORN_EXPONENTS:
            out[idx] = BORN_EXPONENTS[count]
    return out


def _ion_electrons(symbol: Any, charge: Any, sign: float) -> FloatArray:
    sym = _texts(symbol)
    q = np.abs(_f(charge))
    sym, q = np.broadcast_arrays(sym, q)
    flat = sym.ravel().tolist()
    # one lookup per distinct symbol, not per row
    z_of = {s: (_ATOMIC_NUMBER.get(s.strip()) if isinstance(s, str) else None)
            for s in set(flat) if isinstance(s, str | None)}
    z = np.array([np.nan if (k := z_of.get(s) if isinstance(s, str | None) else None) is None
                  else float(k) for s in flat], dtype=float).reshape(sym.shape)
    with np.errstate(invalid="ignore"):
        whole = np.isfinite(q) & (q == np.round(q))
    return np.where(np.isfinite(z) & whole, z + sign * q, np.nan)


#: BORN_EXPONENTS as an array indexed by electron count (NaN where none is listed).
def _exponent_table() -> FloatArray:
    table = np.full(max(BORN_EXPONENTS) + 1, np.nan)
    for electrons, n in BORN_EXPONENTS.items():
        table[electrons] = n
    return table


def born_exponent_for_ions(
    cation_symbol: Any, cation_charge: Any, anion_symbol: Any, anion_charge: Any
) -> FloatArray:
    """Mean of the two ions' Born exponents (Pauling), each from its electron count
    ``Z - |charge|`` (cation) or ``Z + |charge|`` (anion) via :data:`BORN_EXPONENTS`.

    An ion whose electron count is not one of the listed closed-shell/d10 counts (e.g.
    Fe2+, 24 electrons) has no Born exponent here: the result is NaN and the caller
    should flag the row rather than guess.
    """
    e_c = _ion_electrons(cation_symbol, cation_charge, -1.0)
    e_a = _ion_electrons(anion_symbol, anion_charge, +1.0)
    e_c, e_a = np.broadcast_arrays(e_c, e_a)

    table = _exponent_table()

    def lookup(e: FloatArray) -> FloatArray:
        ok = np.isfinite(e) & (e >= 0) & (e < len(table))
        return np.where(ok, table[np.where(ok, e, 0).astype(np.intp)], np.nan)

    return 0.5 * (lookup(e_c) + lookup(e_a))


# ----------------------------------------------------------------- Jenkins correction


def _dof(kind: Any) -> FloatArray:
    obj = _texts(kind)
    out = np.full(obj.shape, np.nan)
    for idx, v in np.ndenumerate(obj):
        if isinstance(v, str):
            key = v.strip().lower().replace("-", "").replace(" ", "").replace("_", "")
            out[idx] = ION_KIND_DOF.get(key, np.nan)
        elif isinstance(v, int | float | np.number) and float(v) in (3.0, 5.0, 6.0):
            out[idx] = float(v)
    return out


def jenkins_correction(
    n_cation: Any, n_anion: Any, cation_kind: Any, anion_kind: Any, T: Any = 298.15
) -> FloatArray:
    """``Delta H_L - U`` in kJ/mol: ``[p (n_M/2 - 2) + q (n_X/2 - 2)] R T``.

    p, q are the numbers of cations and anions in the formula unit; n_M, n_X are 3 for a
    monatomic ion, 5 for a linear and 6 for a non-linear polyatomic ion (kinds "monatomic",
    "linear", "nonlinear", or 3/5/6). Jenkins, J. Chem. Educ. 82 (2005) 950; the same form
    heads the CRC Handbook table "Lattice Energies". Each gaseous ion carries
    (n/2 + 1) R T of enthalpy above 0 K, each ion in the solid about 3 R T (classical
    lattice vibrations), hence n/2 - 2 per ion: NaCl -RT, CaF2 -3/2 RT at any T.
    """
    with np.errstate(all="ignore"):
        p = _pos(_f(n_cation))
        q = _pos(_f(n_anion))
        t = _pos(_f(T))
        corr = p * (_dof(cation_kind) / 2.0 - 2.0) + q * (_dof(anion_kind) / 2.0 - 2.0)
        return corr * GAS_CONSTANT * t * 1e-3


def delta_pv_correction(n_ions: Any, T: Any = 298.15) -> FloatArray:
    """The pV-work-only correction ``nu R T`` (kJ/mol) from ``Delta H = Delta U + Delta(pV)``
    for nu moles of ideal gaseous ions, neglecting heat capacities: NaCl +2RT, CaF2 +3RT.
    Cruder than :func:`jenkins_correction`; given because many tabulations use it."""
    with np.errstate(all="ignore"):
        return _pos(_f(n_ions)) * _pos(_f(T)) * GAS_CONSTANT * 1e-3


# -------------------------------------------------------------- interionic distance


def r0_from_radii(r_cation_pm: Any, r_anion_pm: Any) -> FloatArray:
    """Estimated shortest cation-anion distance ``r0 = r+ + r-`` (pm)."""
    with np.errstate(all="ignore"):
        return _pos(_f(r_cation_pm)) + _pos(_f(r_anion_pm))


# structure key -> (formula units per cubic cell, r0 / a)
_CUBIC_GEOMETRY: Mapping[str, tuple[float, float]] = {
    "rock salt": (4.0, 0.5),
    "caesium chloride": (1.0, math.sqrt(3.0) / 2.0),
    "zinc blende": (4.0, math.sqrt(3.0) / 4.0),
    "fluorite": (4.0, math.sqrt(3.0) / 4.0),
    "antifluorite": (4.0, math.sqrt(3.0) / 4.0),
}
_STRUCTURE_SPELLINGS: Mapping[str, str] = {
    "rocksalt": "rock salt", "halite": "rock salt", "nacl": "rock salt",
    "caesiumchloride": "caesium chloride", "cesiumchloride": "caesium chloride",
    "cscl": "caesium chloride", "zincblende": "zinc blende", "sphalerite": "zinc blende",
    "fluorite": "fluorite", "caf2": "fluorite", "antifluorite": "antifluorite",
    "na2o": "antifluorite",
}  # fmt: skip


def _structure_key(name: Any) -> str | None:
    if not isinstance(name, str):
        return None
    key = "".join(ch for ch in name.lower() if ch.isalnum())
    return _STRUCTURE_SPELLINGS.get(key)


def r0_from_density(structure: Any, molar_mass_g_mol: Any, density_g_cm3: Any) -> FloatArray:
    """Shortest cation-anion distance (pm) of a cubic structure from its density.

    ``a = (Z M / (rho N_A))^(1/3)`` with Z formula units per cell; rock salt ``r0 = a/2``
    (Z = 4), caesium chloride ``r0 = sqrt(3) a / 2`` (Z = 1), zinc blende, fluorite and
    antifluorite ``r0 = sqrt(3) a / 4`` (Z = 4). Any other structure (wurtzite, rutile,
    corundum ...) needs cell parameters that a density does not give: NaN, for the caller
    to flag as "r0 not derivable from density for this structure".
    """
    names = _texts(structure)
    v = formula_unit_volume_from_density(molar_mass_g_mol, density_g_cm3)  # nm3
    names, v = np.broadcast_arrays(names, v)
    out = np.full(v.shape, np.nan)
    for idx in map(tuple, np.argwhere(np.isfinite(v))):
        key = _structure_key(names[idx])
        if key is not None:
            z, ratio = _CUBIC_GEOMETRY[key]
            out[idx] = ratio * np.cbrt(z * v[idx]) * 1000.0  # nm -> pm
    return out


# ---------------------------------------------------------------------- comparisons


def percent_difference(cycle_value: Any, model_value: Any) -> FloatArray:
    """``100 (cycle - model) / model``: positive when the Born-Haber value is above the
    ionic model (extra, largely covalent, binding)."""
    with np.errstate(all="ignore"):
        m = _f(model_value)
        m = np.where(np.isfinite(m) & (m != 0.0), m, np.nan)
        return 100.0 * (_f(cycle_value) - m) / m


def model_spread(first: Any, *others: Any) -> FloatArray:
    """Largest minus smallest of several model estimates, element by element, ignoring
    models that are NaN in that element; NaN where fewer than two are available (so a
    single model array gives all NaN)."""
    stack = np.stack(np.broadcast_arrays(*[_f(m) for m in (first, *others)]))
    finite = np.isfinite(stack)
    count = finite.sum(axis=0)
    hi = np.where(finite, stack, -np.inf).max(axis=0)
    lo = np.where(finite, stack, np.inf).min(axis=0)
    with np.errstate(invalid="ignore"):
        return np.where(count >= 2, hi - lo, np.nan)
