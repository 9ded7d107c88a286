"""Reaction enthalpies by Hess's law, for many reactions at once.

For reactions r over species s with signed stoichiometric numbers ν[r, s] (products
positive, reactants negative; the N × S matrix from :func:`coefficient_matrix`),

    ΔrH[r] = Σ_s ν[r, s] · ΔfH[s]

Elements in their standard states (:func:`standard_state_element`) count as 0 with no
uncertainty, whatever the table says. A species without ΔfH (NaN) leaves every reaction
that uses it without a value (NaN), and ``missing[r, s]`` names it for the caller's flag.

Uncertainty: ν[r, s] is the *net* number of species s in reaction r. A species written on
both sides (``2 H2O(g) -> 2 H2O(l) + ...`` with some H2O(g) back among the products) is one
tabulated value used with its net ν, so it contributes |ν_net|·σ (fully correlated: the parts
on the two sides cancel, they do not add in quadrature). Distinct species are independent
and add in quadrature: σ(ΔrH) = sqrt(Σ_s (ν[r, s]·σ[s])²). An unknown σ (NaN) is left out
of the sum and ``sigma_complete`` is False for that reaction; it is never taken as zero
silently.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import numpy.typing as npt

from sheetcycle.chem.formula import Formula
from sheetcycle.chem.reactions import Reaction, Species

__all__ = [
    "CoefficientMatrix",
    "FormationSolution",
    "HessResult",
    "coefficient_matrix",
    "reaction_enthalpy",
    "solve_formation",
    "standard_state_element",
]

FloatArray = npt.NDArray[np.float64]
BoolArray = npt.NDArray[np.bool_]

# -- standard states -------------------------------------------------------------------

#: Elements whose standard state is not a solid of single atoms: (atoms per molecule, phase).
_NON_SOLID: dict[str, tuple[int, str]] = {
    "H": (2, "g"), "N": (2, "g"), "O": (2, "g"), "F": (2, "g"), "Cl": (2, "g"),
    "He": (1, "g"), "Ne": (1, "g"), "Ar": (1, "g"), "Kr": (1, "g"), "Xe": (1, "g"),
    "Rn": (1, "g"), "Br": (2, "l"), "Hg": (1, "l"),
}  # fmt: skip
#: Solid elements whose reference form is a molecule: the molecular counts also allowed.
_SOLID_MOLECULES: dict[str, frozenset[int]] = {
    "I": frozenset({2}), "S": frozenset({1, 8}), "P": frozenset({1, 4}),
}  # fmt: skip
#: Words for a solid in its reference form, per element beyond the generic ones.
_SOLID_WORDS = frozenset({"s", "cr", "c"})
_REFERENCE_FORMS: dict[str, frozenset[str]] = {
    "C": frozenset({"graphite"}),
    "S": frozenset({"rhombic", "alpha"}),
    "P": frozenset({"white"}),
    "Sn": frozenset({"white", "beta"}),
    "Se": frozenset({"grey", "gray"}),
    "As": frozenset({"grey", "gray"}),
}
#: Modifications that are *not* the reference form.
_OTHER_FORMS = frozenset(
    {"diamond", "monoclinic", "red", "black", "yellow", "gamma", "am", "vit", "gl", "liq"}
)
_PHASE_ALIASES = {"cr": "s", "c": "s", "liq": "l"}


def standard_state_element(formula: Formula, state: str | None) -> bool:
    """True when ``formula`` in ``state`` is an element in its standard state (298.15 K,
    1 bar), whose enthalpy of formation is 0 by definition.

    O2(g), N2(g), H2(g), F2(g), Cl2(g), the noble gases (g), Br2(l), Hg(l), I2(s),
    C(graphite) or C(s), S(s) or S8(s) (rhombic), P(s) or P4(s) (white, the NBS reference
    form; ``P(s, white)``), and every other element as a solid of single atoms (Fe(s),
    Na(s), Si(s)). Not standard: monatomic gases (Na(g), O(g), Cl(g)), O3, C(diamond),
    P(red), S(monoclinic), Br2(g), I2(g), ions and anything with waters.

    ``state`` is a state text as :class:`~sheetcycle.chem.reactions.Species` carries it:
    ``"g"``, ``"s"``, ``"graphite"``, ``"s, white"`` ... A species written without a state
    (None) is taken in its standard form when its formula is the element's standard
    formula (``O2``, ``Hg``, ``Fe``); the caller should say that the state was assumed.
    """
    if formula.charge != 0 or formula.hydrate != 0 or len(formula.elements) != 1:
        return False
    ((symbol, count),) = formula.elements.items()
    if not float(count).is_integer():
        return False
    n = int(count)
    words = set() if state is None else {w.strip().lower() for w in state.split(",")}
    words = {_PHASE_ALIASES.get(w, w) for w in words if w}
    if words & _OTHER_FORMS:
        return False
    if symbol in _NON_SOLID:
        atoms, phase = _NON_SOLID[symbol]
        return n == atoms and (not words or words == {phase})
    if n not in _SOLID_MOLECULES.get(symbol, frozenset({1})):
        return False
    forms = _REFERENCE_FORMS.get(symbol, frozenset())
    return not (words - {"s"} - forms)


# -- the coefficient matrix -------------------------------------------------------------


@dataclass(frozen=True)
class CoefficientMatrix:
    """Signed net stoichiometric numbers ν (N reactions × S species), with the species key
    of each column and one representative :class:`Species` per column."""

    nu: FloatArray
    keys: tuple[str, ...]
    species: tuple[Species, ...]


def coefficient_matrix(reactions: Sequence[Reaction]) -> CoefficientMatrix:
    """ν[r, s] for a list of parsed reactions; columns in order of first appearance."""
    keys: dict[str, int] = {}
    reps: list[Species] = []
    for r in reactions:
        for key, sp in r.species().items():
            if key not in keys:
                keys[key] = len(keys)
                reps.append(sp)
    nu = np.zeros((len(reactions), len(keys)))
    for i, r in enumerate(reactions):
        for key, n in r.net().items():
            nu[i, keys[key]] = float(n)
    return CoefficientMatrix(nu, tuple(keys), tuple(reps))


# -- Hess's law -------------------------------------------------------------------------


@dataclass(frozen=True)
class HessResult:
    """ΔrH per reaction (NaN where a species lacks data or the reaction is not valid).

    ``missing[r, s]``: species s is used by reaction r and has no ΔfH (name it in a flag).
    ``standard_nonzero[r, s]``: species s is an element in its standard state but was given a
    non-zero ΔfH, which was ignored (worth a flag: the column may be something else).
    """

    value: FloatArray
    sigma: FloatArray
    missing: BoolArray
    sigma_complete: BoolArray
    standard_nonzero: BoolArray


def _prepare(
    nu: npt.ArrayLike,
    dfh: npt.ArrayLike,
    sigma: npt.ArrayLike | None,
    standard: npt.ArrayLike | None,
) -> tuple[FloatArray, FloatArray, FloatArray, BoolArray, BoolArray]:
    n = np.atleast_2d(np.asarray(nu, dtype=float))
    shape = n.shape
    v = np.broadcast_to(np.asarray(dfh, dtype=float), shape)
    s = np.broadcast_to(np.asarray(np.nan if sigma is None else sigma, dtype=float), shape)
    std = np.broadcast_to(np.asarray(False if standard is None else standard, dtype=bool), shape)
    used = n != 0.0
    v_eff = np.where(std, 0.0, v)
    s_eff = np.where(std, 0.0, s)
    standard_nonzero = used & std & np.isfinite(v) & (v != 0.0)
    return n, v_eff, s_eff, used, standard_nonzero


def reaction_enthalpy(
    nu: npt.ArrayLike,
    dfh: npt.ArrayLike,
    sigma: npt.ArrayLike | None = None,
    *,
    standard: npt.ArrayLike | None = None,
    valid: npt.ArrayLike | None = None,
) -> HessResult:
    """ΔrH = Σ ν ΔfH for every reaction, with its standard uncertainty.

    ``nu`` is (N, S); ``dfh`` and ``sigma`` are (S,) or (N, S) in kJ/mol, NaN where unknown;
    ``standard`` (S,) or (N, S) marks elements in their standard states (0 by definition);
    ``valid`` (N,) is False for reactions that must get no value (an unbalanced equation).
    """
    n, v, s, used, standard_nonzero = _prepare(nu, dfh, sigma, standard)
    missing = used & np.isnan(v)
    any_missing = missing.any(axis=1)
    terms = np.where(used, n * np.where(np.isnan(v), 0.0, v), 0.0)
    value = terms.sum(axis=1)
    s_known = used & ~np.isnan(s)
    us = np.where(s_known, n * np.where(np.isnan(s), 0.0, s), 0.0)
    sig = np.sqrt(np.einsum("ij,ij->i", us, us))
    ok = ~any_missing
    if valid is not None:
        ok &= np.broadcast_to(np.asarray(valid, dtype=bool), ok.shape)
    value = np.where(ok, value, np.nan)
    sig = np.where(ok, sig, np.nan)
    sigma_complete = np.asarray(ok & ~(used & ~s_known).any(axis=1), dtype=bool)
    return HessResult(value, sig, missing, sigma_complete, standard_nonzero)


@dataclass(frozen=True)
class FormationSolution:
    """The one unknown ΔfH of each reaction whose ΔrH is known.

    ``index[r]`` is the column solved for (−1 where nothing was solved: no unknown, more
    than one, or no ΔrH); ``value``/``sigma`` are NaN there. ``n_missing[r]`` counts the
    unknowns so the caller can say which case it was.
    """

    index: npt.NDArray[np.intp]
    value: FloatArray
    sigma: FloatArray
    n_missing: npt.NDArray[np.intp]


def solve_formation(
    nu: npt.ArrayLike,
    dfh: npt.ArrayLike,
    sigma: npt.ArrayLike | None,
    delta_r_h: npt.ArrayLike,
    delta_r_h_sigma: npt.ArrayLike | None = None,
    *,
    standard: npt.ArrayLike | None = None,
) -> FormationSolution:
    """Solve each reaction with a known ΔrH for its single species without ΔfH:

        ΔfH[k] = (ΔrH − Σ_{s≠k} ν[r, s] ΔfH[s]) / ν[r, k]

    (e.g. a formation enthalpy from a measured combustion enthalpy). The uncertainty
    combines σ(ΔrH) and the other species' |ν|σ in quadrature, divided by |ν[r, k]|.
    """
    n, v, s, used, _ = _prepare(nu, dfh, sigma, standard)
    rows = n.shape[0]
    drh = np.broadcast_to(np.asarray(delta_r_h, dtype=float), (rows,))
    drs = np.broadcast_to(
        np.asarray(np.nan if delta_r_h_sigma is None else delta_r_h_sigma, dtype=float), (rows,)
    )
    missing = used & np.isnan(v)
    n_missing = missing.sum(axis=1)
    solvable = (n_missing == 1) & np.isfinite(drh)
    k = np.where(solvable, np.argmax(missing, axis=1), -1)
    known = np.where(used & ~missing, n * v, 0.0).sum(axis=1)
    us = np.where(used & ~missing & ~np.isnan(s), n * s, 0.0)
    var = np.einsum("ij,ij->i", us, us) + np.where(np.isnan(drs), 0.0, drs) ** 2
    nu_k = n[np.arange(rows), np.maximum(k, 0)]
    with np.errstate(divide="ignore", invalid="ignore"):
        value = np.where(solvable, (drh - known) / nu_k, np.nan)
        sig = np.where(solvable, np.sqrt(var) / np.abs(nu_k), np.nan)
    return FormationSolution(k.astype(np.intp), value, sig, n_missing.astype(np.intp))
