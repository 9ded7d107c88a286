"""Born-Haber cycles for binary ionic solids MaXb, closed in bulk.

The cycle, per mole of formula unit, with every term an enthalpy in kJ/mol:

    ΔfH(MaXb, s) = a·ΔatH(M) + a·ΣIE(M, 1..p) + b·ΔatH(X) + b·ΣΔegH(X, 1..q) − ΔH_L

where ΔH_L is the lattice enthalpy in the dissociation convention (MaXb(s) → a M^p+(g) +
b X^q−(g), positive) and ΔegH are electron-gain enthalpies (thermochemical sign: negative
for the first electron gain of a halogen, positive for the second of oxygen). Written as one
linear equation over the terms T_k with coefficients c_k,

    Σ_k c_k T_k = 0,   c = (−1, −1, a, a, b, b, b·[q ≥ 2])

every row can be solved for whichever single term is missing, or checked for closure when
none is. Rows are independent, so the whole table is solved at once on (N, K) arrays.

Uncertainties: each term T_k is one value (one reference entry or one cell) used c_k times,
so its contribution is |c_k|·σ_k (fully correlated, linear in the multiplier), and distinct
terms add in quadrature. An unknown σ (NaN) is left out of the sum and the row is marked as
having an incomplete uncertainty budget; it is never taken as zero silently.
"""

from __future__ import annotations

from dataclasses import dataclass
from enum import IntEnum

import numpy as np
import numpy.typing as npt

__all__ = [
    "TERMS",
    "TERM_LABELS",
    "CycleSolution",
    "CycleStatus",
    "CycleTerms",
    "close_cycles",
    "cycle_coefficients",
]

FloatArray = npt.NDArray[np.float64]

#: The terms of the cycle, in column order of the (N, K) arrays.
TERMS: tuple[str, ...] = (
    "formation_enthalpy",
    "lattice_enthalpy",
    "atomization_metal",
    "ionization",
    "atomization_nonmetal",
    "electron_gain_1",
    "electron_gain_higher",
)

#: Plain-words names of the terms, for messages.
TERM_LABELS: dict[str, str] = {
    "formation_enthalpy": "enthalpy of formation",
    "lattice_enthalpy": "lattice enthalpy",
    "atomization_metal": "atomization enthalpy of the metal",
    "ionization": "ionization energies of the metal",
    "atomization_nonmetal": "atomization enthalpy of the non-metal",
    "electron_gain_1": "first electron-gain enthalpy of the non-metal",
    "electron_gain_higher": "second (and higher) electron-gain enthalpies of the non-metal",
}

K = len(TERMS)
IDX = {name: i for i, name in enumerate(TERMS)}


class CycleStatus(IntEnum):
    """What the engine could do with a row."""

    SOLVED = 1  # exactly one term was missing and has been derived
    CLOSED = 2  # every term was given: a closure residual was computed
    UNDERDETERMINED = 3  # two or more terms are missing
    NO_IONS = 4  # the row has no usable ion assignment (a, b or q missing)


@dataclass(frozen=True)
class CycleTerms:
    """Inputs for N rows. ``values`` and ``sigmas`` are (N, K) in the order of TERMS.

    ``n_cation`` (a), ``n_anion`` (b) and ``anion_charge`` (|q|) are length-N arrays; NaN in
    any of them marks a row without a usable ion assignment.
    """

    n_cation: FloatArray
    n_anion: FloatArray
    anion_charge: FloatArray
    values: FloatArray
    sigmas: FloatArray

    @classmethod
    def from_columns(
        cls,
        *,
        n_cation: npt.ArrayLike,
        n_anion: npt.ArrayLike,
        anion_charge: npt.ArrayLike,
        values: dict[str, npt.ArrayLike],
        sigmas: dict[str, npt.ArrayLike] | None = None,
    ) -> CycleTerms:
        """Build from one array per term name (absent names are all-missing)."""
        a = np.asarray(n_cation, dtype=float)
        n = a.shape[0]
        unknown = set(values) - set(TERMS) | set(sigmas or {}) - set(TERMS)
        if unknown:
            raise KeyError(f"unknown cycle terms: {sorted(unknown)}; expected some of {TERMS}")
        v = np.full((n, K), np.nan)
        s = np.full((n, K), np.nan)
        for name, arr in values.items():
            v[:, IDX[name]] = np.broadcast_to(np.asarray(arr, dtype=float), (n,))
        for name, arr in (sigmas or {}).items():
            s[:, IDX[name]] = np.broadcast_to(np.asarray(arr, dtype=float), (n,))
        return cls(
            n_cation=a,
            n_anion=np.broadcast_to(np.asarray(n_anion, dtype=float), (n,)).copy(),
            anion_charge=np.broadcast_to(np.asarray(anion_charge, dtype=float), (n,)).copy(),
            values=v,
            sigmas=s,
        )


@dataclass(frozen=True)
class CycleSolution:
    """Outputs for N rows.

    ``completed`` is ``values`` with the solved term filled in. ``solved`` is the index of
    the solved term (−1 where nothing was solved). ``missing`` marks the terms that were
    needed but absent (for flags that name them). ``residual`` is Σ c_k T_k for CLOSED rows
    (NaN elsewhere), with ``residual_sigma`` its combined standard uncertainty.
    ``sigma_complete`` is False where some needed term had no uncertainty.
    """

    status: npt.NDArray[np.int8]
    solved: npt.NDArray[np.int8]
    value: FloatArray
    sigma: FloatArray
    completed: FloatArray
    coefficients: FloatArray
    missing: npt.NDArray[np.bool_]
    residual: FloatArray
    residual_sigma: FloatArray
    sigma_complete: npt.NDArray[np.bool_]
    exceeds: npt.NDArray[np.bool_]  # CLOSED rows whose |residual| > max(2σ, tolerance)


def cycle_coefficients(
    n_cation: FloatArray, n_anion: FloatArray, anion_charge: FloatArray
) -> FloatArray:
    """The (N, K) coefficients c_k of the cycle equation Σ c_k T_k = 0."""
    n = n_cation.shape[0]
    c = np.empty((n, K))
    c[:, IDX["formation_enthalpy"]] = -1.0
    c[:, IDX["lattice_enthalpy"]] = -1.0
    c[:, IDX["atomization_metal"]] = n_cation
    c[:, IDX["ionization"]] = n_cation
    c[:, IDX["atomization_nonmetal"]] = n_anion
    c[:, IDX["electron_gain_1"]] = n_anion
    c[:, IDX["electron_gain_higher"]] = np.where(anion_charge >= 2, n_anion, 0.0)
    return c


def close_cycles(terms: CycleTerms, *, tolerance: float = 10.0) -> CycleSolution:
    """Solve each row for its one missing term, or check its closure.

    ``tolerance`` (kJ/mol) is the smallest closure residual that is reported as exceeding:
    a row is flagged when |residual| > max(2σ, tolerance).
    """
    if tolerance < 0 or not np.isfinite(tolerance):
        raise ValueError(f"tolerance must be a non-negative number of kJ/mol, got {tolerance!r}")
    a, b, q = terms.n_cation, terms.n_anion, terms.anion_charge
    n = a.shape[0]
    ions_ok = np.isfinite(a) & np.isfinite(b) & np.isfinite(q)
    c = cycle_coefficients(
        np.where(ions_ok, a, 0.0), np.where(ions_ok, b, 0.0), np.where(ions_ok, q, 0.0)
    )
    v, s = terms.values, terms.sigmas
    needed = c != 0.0
    given = ~np.isnan(v)
    missing = needed & ~given & ions_ok[:, None]
    n_missing = missing.sum(axis=1)

    use = needed & given
    cv = np.where(use, c * v, 0.0)
    has_sigma = ~np.isnan(s)
    cs = np.where(use & has_sigma, c * s, 0.0)
    total = cv.sum(axis=1)
    total_var = np.einsum("ij,ij->i", cs, cs)
    sigma_known = use & ~has_sigma

    status = np.full(n, CycleStatus.UNDERDETERMINED, dtype=np.int8)
    status[n_missing == 1] = CycleStatus.SOLVED
    status[n_missing == 0] = CycleStatus.CLOSED
    status[~ions_ok] = CycleStatus.NO_IONS

    solved_mask = status == CycleStatus.SOLVED
    solved = np.where(solved_mask, np.argmax(missing, axis=1), -1).astype(np.int8)
    rows = np.nonzero(solved_mask)[0]
    k = solved[rows].astype(np.intp)
    value = np.full(n, np.nan)
    sigma = np.full(n, np.nan)
    ck = c[rows, k]
    value[rows] = -total[rows] / ck
    sigma[rows] = np.sqrt(total_var[rows]) / np.abs(ck)
    completed = v.copy()
    completed[rows, k] = value[rows]

    closed = status == CycleStatus.CLOSED
    residual = np.where(closed, total, np.nan)
    residual_sigma = np.where(closed, np.sqrt(total_var), np.nan)
    sigma_complete = ~(sigma_known.any(axis=1)) & ions_ok
    # With an incomplete budget the known part of σ is a lower bound; the tolerance guards it.
    limit = np.maximum(2.0 * np.nan_to_num(residual_sigma), tolerance)
    exceeds = closed & (np.abs(np.nan_to_num(residual)) > limit)

    return CycleSolution(
        status=status,
        solved=solved,
        value=value,
        sigma=sigma,
        completed=completed,
        coefficients=c,
        missing=missing,
        residual=residual,
        residual_sigma=residual_sigma,
        sigma_complete=sigma_complete,
        exceeds=exceeds,
    )
