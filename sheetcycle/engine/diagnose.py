"""Name the likely slip behind a number that does not fit.

Two pure, vectorized checks:

* :func:`ratio_slips` compares given values with what they should be near (a reference
  value, or the cycle's own result) and recognises the factors that typical unit and basis
  slips leave behind: eV read as kJ/mol (×1/96.485), kcal read as kJ (×1/4.184), a bond
  dissociation enthalpy used where half of it belongs (×2), a per-atom value used per
  formula unit (×1/atoms).
* :func:`residual_slips` compares a closure residual with the terms whose omission would
  leave exactly that residual: the last ionization energy of the cation, the higher electron
  gains of the anion, a stoichiometric factor applied once instead of a or b times.

Both return, per row, the index of the best-matching candidate or −1.
"""

from __future__ import annotations

from collections.abc import Mapping

import numpy as np
import numpy.typing as npt

__all__ = ["RATIO_SLIPS", "ratio_slips", "residual_slips"]

FloatArray = npt.NDArray[np.float64]
EV_KJ_PER_MOL = 96.48533212  # CODATA 2018: e·N_A / 1000
KCAL_KJ = 4.184  # thermochemical calorie

#: (name, factor given/expected, plain words). Order is the order of preference.
RATIO_SLIPS: tuple[tuple[str, float, str], ...] = (
    ("eV-as-kJ", 1.0 / EV_KJ_PER_MOL, "the values look like eV entered as kJ/mol"),
    ("kJ-as-eV", EV_KJ_PER_MOL, "the values look like kJ/mol entered as eV"),
    ("kcal-as-kJ", 1.0 / KCAL_KJ, "the values look like kcal/mol entered as kJ/mol"),
    ("kJ-as-kcal", KCAL_KJ, "the values look like kJ/mol entered as kcal/mol"),
    (
        "full-bond",
        2.0,
        "the value looks like the whole bond dissociation enthalpy, "
        "where the atomization enthalpy is half of it",
    ),
)


def ratio_slips(
    given: npt.ArrayLike,
    expected: npt.ArrayLike,
    *,
    rel_tol: float = 0.03,
    slips: tuple[tuple[str, float, str], ...] = RATIO_SLIPS,
) -> npt.NDArray[np.intp]:
    """Index into ``slips`` of the factor that maps ``expected`` onto ``given``, or −1.

    A row matches when given/expected lies within ``rel_tol`` of a slip's factor and the
    value is not already within ``rel_tol`` of the expectation itself.
    """
    g = np.asarray(given, dtype=float)
    e = np.asarray(expected, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = g / e
    out = np.full(np.broadcast(g, e).shape, -1, dtype=np.intp)
    plain = np.abs(ratio - 1.0) <= rel_tol
    for i in range(len(slips) - 1, -1, -1):
        hit = np.abs(ratio / slips[i][1] - 1.0) <= rel_tol
        out = np.where(hit & ~plain, i, out)
    return out


def residual_slips(
    residual: npt.ArrayLike,
    tolerance: npt.ArrayLike,
    candidates: Mapping[str, npt.ArrayLike],
) -> tuple[tuple[str, ...], npt.NDArray[np.intp]]:
    """Match each residual with the candidate term (same sign, same size) it most resembles.

    ``candidates`` maps a name to the residual that slip would leave (NaN where it does not
    apply). Returns the candidate names and, per row, the index of the closest candidate
    within ``tolerance`` (kJ/mol, per row or scalar), or −1.
    """
    r = np.asarray(residual, dtype=float)
    tol = np.broadcast_to(np.asarray(tolerance, dtype=float), r.shape)
    names = tuple(candidates)
    if not names:
        return names, np.full(r.shape, -1, dtype=np.intp)
    cand = np.stack(
        [np.broadcast_to(np.asarray(candidates[n], dtype=float), r.shape) for n in names]
    )
    dist = np.abs(cand - r[None, ...])
    dist = np.where(np.isnan(dist) | (np.abs(cand) <= tol[None, ...]), np.inf, dist)
    best = np.argmin(dist, axis=0)
    best_d = np.take_along_axis(dist, best[None, ...], axis=0)[0]
    return names, np.where(best_d <= tol, best, -1).astype(np.intp)
