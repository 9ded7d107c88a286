"""Solution enthalpies from lattice and hydration terms, for many salts at once.

Per mole of salt dissolved to infinite dilution,

    ΔsolH = ΔH_L + Σ_i ν_i ΔhydH(ion_i)

with ΔH_L the lattice enthalpy in the dissociation convention (solid → gaseous ions,
positive) and ν_i the number of ions i in the formula unit. Written as one linear equation
over the three terms (ΔsolH, ΔH_L, H = Σ ν ΔhydH) with coefficients (1, −1, −1), any one of
them follows from the other two, and with all three given the residual is a closure check.

Hydration scales. Single-ion hydration enthalpies need an extra-thermodynamic choice: the
value of ΔhydH(H+). On the conventional scale ΔhydH(H+) = 0; absolute scales fix it near
−1090 to −1150 kJ/mol (−1091 Halliwell & Nyburg 1963, −1103 Marcus 1987, −1150.1 Tissandier
et al. 1998; all from memory). For an ion of charge z,

    ΔhydH_conv(ion) = ΔhydH_abs(ion) − z · ΔhydH_abs(H+)

so between two scales with H+ values h1 and h2 a value moves by z·(h2 − h1): cations and
anions move in opposite directions, and every sum over a neutral salt (Σ ν z = 0) is the
same on every scale. A sum over ions that is not neutral depends on the scale; such rows are
marked (``scale_dependent``).

Uncertainties: one ion's value used ν times contributes |ν|·σ (fully correlated); distinct
ions and the three terms add in quadrature. Unknown σ (NaN) is left out and marked.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from enum import IntEnum

import numpy as np
import numpy.typing as npt

__all__ = [
    "CONVENTIONAL",
    "HALLIWELL_NYBURG",
    "MARCUS",
    "SOLUTION_TERMS",
    "TISSANDIER",
    "HydrationScale",
    "HydrationSum",
    "ScaleCheck",
    "SolutionResult",
    "SolutionStatus",
    "check_scales",
    "convert_hydration",
    "hydration_sum",
    "solve_solution",
]

FloatArray = npt.NDArray[np.float64]
BoolArray = npt.NDArray[np.bool_]

SOLUTION_TERMS: tuple[str, ...] = ("solution_enthalpy", "lattice_enthalpy", "hydration_sum")
_COEFFS = np.array([1.0, -1.0, -1.0])


@dataclass(frozen=True, slots=True)
class HydrationScale:
    """A single-ion hydration scale: its name and the ΔhydH(H+) it fixes (kJ/mol)."""

    name: str
    h_plus: float
    source: str = ""

    @property
    def is_conventional(self) -> bool:
        return self.h_plus == 0.0


CONVENTIONAL = HydrationScale("conventional", 0.0, "ΔhydH(H+) = 0 by convention")
HALLIWELL_NYBURG = HydrationScale(
    "Halliwell-Nyburg", -1091.0,
    "H. F. Halliwell, S. C. Nyburg, Trans. Faraday Soc. 59 (1963) 1126; from memory",
)  # fmt: skip
MARCUS = HydrationScale(
    "Marcus", -1103.0,
    "Y. Marcus, J. Chem. Soc. Faraday Trans. 1 83 (1987) 2985; from memory",
)  # fmt: skip
TISSANDIER = HydrationScale(
    "Tissandier", -1150.1,
    "M. D. Tissandier et al., J. Phys. Chem. A 102 (1998) 7787; from memory",
)  # fmt: skip


def convert_hydration(
    value: npt.ArrayLike,
    charge: npt.ArrayLike,
    from_scale_h: npt.ArrayLike,
    to_scale_h: npt.ArrayLike,
) -> FloatArray:
    """Move single-ion hydration enthalpies from the scale with ΔhydH(H+) = ``from_scale_h``
    to the one with ``to_scale_h`` (0 for the conventional scale): value + z·(to − from).
    Broadcasts over all arguments; NaN stays NaN."""
    v = np.asarray(value, dtype=float)
    z = np.asarray(charge, dtype=float)
    return v + z * (np.asarray(to_scale_h, dtype=float) - np.asarray(from_scale_h, dtype=float))


@dataclass(frozen=True)
class HydrationSum:
    """Σ ν ΔhydH per row with its uncertainty.

    ``missing[r, i]``: ion i is in row r's formula and has no hydration enthalpy.
    ``scale_dependent[r]``: the ions of row r do not add up to a neutral set (Σ ν z ≠ 0), so
    the sum depends on the hydration scale.
    """

    value: FloatArray
    sigma: FloatArray
    missing: BoolArray
    sigma_complete: BoolArray
    scale_dependent: BoolArray


def hydration_sum(
    counts: npt.ArrayLike,
    values: npt.ArrayLike,
    sigmas: npt.ArrayLike | None = None,
    *,
    charges: npt.ArrayLike | None = None,
) -> HydrationSum:
    """Σ_i ν[r, i]·ΔhydH[i] for each row r.

    ``counts`` is (N, I): ions of each kind per formula unit; ``values``/``sigmas`` are (I,)
    or (N, I), all on one scale; ``charges`` (I,) lets the result mark rows whose ions are
    not neutral overall (left all False when not given).
    """
    nu = np.atleast_2d(np.asarray(counts, dtype=float))
    v = np.broadcast_to(np.asarray(values, dtype=float), nu.shape)
    s = np.broadcast_to(np.asarray(np.nan if sigmas is None else sigmas, dtype=float), nu.shape)
    used = nu != 0.0
    missing = used & np.isnan(v)
    value = np.where(used, nu * np.where(np.isnan(v), 0.0, v), 0.0).sum(axis=1)
    value = np.where(missing.any(axis=1), np.nan, value)
    known = used & ~np.isnan(s)
    us = np.where(known, nu * np.where(np.isnan(s), 0.0, s), 0.0)
    sigma = np.where(np.isnan(value), np.nan, np.sqrt(np.einsum("ij,ij->i", us, us)))
    sigma_complete = ~np.isnan(value) & ~(used & ~known).any(axis=1)
    if charges is None:
        dependent = np.zeros(nu.shape[0], dtype=bool)
    else:
        z = np.broadcast_to(np.asarray(charges, dtype=float), nu.shape)
        dependent = np.abs((nu * z).sum(axis=1)) > 1e-9
    return HydrationSum(value, sigma, missing, sigma_complete, dependent)


class SolutionStatus(IntEnum):
    SOLVED = 1  # exactly one of the three terms was missing and has been derived
    CLOSED = 2  # all three were given: a residual was computed
    UNDERDETERMINED = 3  # two or three terms are missing


@dataclass(frozen=True)
class SolutionResult:
    """Outputs for N rows, terms in the order of SOLUTION_TERMS.

    ``completed`` (N, 3) is the input with the solved term filled in, ``sigmas`` (N, 3) the
    same for uncertainties. ``solved`` is the index of the solved term (−1 elsewhere).
    ``residual`` = ΔsolH − ΔH_L − H for CLOSED rows (NaN elsewhere) with its σ.
    """

    status: npt.NDArray[np.int8]
    solved: npt.NDArray[np.int8]
    completed: FloatArray
    sigmas: FloatArray
    residual: FloatArray
    residual_sigma: FloatArray
    sigma_complete: BoolArray

    def term(self, name: str) -> FloatArray:
        return self.completed[:, SOLUTION_TERMS.index(name)]

    def term_sigma(self, name: str) -> FloatArray:
        return self.sigmas[:, SOLUTION_TERMS.index(name)]


def solve_solution(
    solution: npt.ArrayLike,
    lattice: npt.ArrayLike,
    hydration: npt.ArrayLike,
    *,
    solution_sigma: npt.ArrayLike | None = None,
    lattice_sigma: npt.ArrayLike | None = None,
    hydration_sigma: npt.ArrayLike | None = None,
) -> SolutionResult:
    """Find whichever one of ΔsolH, ΔH_L (dissociation, positive) and Σ ν ΔhydH is missing
    (NaN) in each row from the other two, or the closure residual when none is."""
    cols = [np.atleast_1d(np.asarray(x, dtype=float)) for x in (solution, lattice, hydration)]
    n = np.broadcast_shapes(*(c.shape for c in cols))[0]
    v = np.stack([np.broadcast_to(c, (n,)) for c in cols], axis=1)
    sig_in = [solution_sigma, lattice_sigma, hydration_sigma]
    s = np.stack(
        [
            np.broadcast_to(np.asarray(np.nan if x is None else x, dtype=float), (n,))
            for x in sig_in
        ],
        axis=1,
    )
    given = ~np.isnan(v)
    n_missing = (~given).sum(axis=1)
    cv = np.where(given, _COEFFS * np.where(given, v, 0.0), 0.0)
    total = cv.sum(axis=1)
    s_known = given & ~np.isnan(s)
    var = np.where(s_known, np.where(np.isnan(s), 0.0, s) ** 2, 0.0).sum(axis=1)

    status = np.full(n, SolutionStatus.UNDERDETERMINED, dtype=np.int8)
    status[n_missing == 1] = SolutionStatus.SOLVED
    status[n_missing == 0] = SolutionStatus.CLOSED
    solved_mask = status == SolutionStatus.SOLVED
    solved = np.where(solved_mask, np.argmax(~given, axis=1), -1).astype(np.int8)
    rows = np.nonzero(solved_mask)[0]
    k = solved[rows].astype(np.intp)
    completed = v.copy()
    sigmas = np.where(given, s, np.nan)
    completed[rows, k] = -total[rows] / _COEFFS[k]
    sigmas[rows, k] = np.sqrt(var[rows])
    closed = status == SolutionStatus.CLOSED
    residual = np.where(closed, total, np.nan)
    residual_sigma = np.where(closed, np.sqrt(var), np.nan)
    sigma_complete = (status != SolutionStatus.UNDERDETERMINED) & ~(given & ~s_known).any(axis=1)
    return SolutionResult(
        status, solved, completed, sigmas, residual, residual_sigma, sigma_complete
    )


@dataclass(frozen=True)
class ScaleCheck:
    """What the declared scales of a set of hydration columns say.

    ``scales`` maps each distinct ΔhydH(H+) value to the columns declared on it;
    ``undeclared`` lists the columns with no declared scale. ``mixed`` is True when two or
    more different scales are declared. ``message`` is a plain-words summary for a flag
    (None when there is nothing to say).
    """

    scales: Mapping[float, tuple[str, ...]]
    undeclared: tuple[str, ...]
    mixed: bool
    message: str | None


def check_scales(declared: Mapping[str, HydrationScale | float | None]) -> ScaleCheck:
    """Compare the scales declared for hydration columns (column name → scale or its
    ΔhydH(H+) value, None when the column does not say)."""
    by_h: dict[float, list[str]] = {}
    names: dict[float, str] = {}
    undeclared: list[str] = []
    for column, scale in declared.items():
        if scale is None:
            undeclared.append(column)
            continue
        h = scale.h_plus if isinstance(scale, HydrationScale) else float(scale)
        by_h.setdefault(h, []).append(column)
        if isinstance(scale, HydrationScale):
            names.setdefault(h, scale.name)
    mixed = len(by_h) > 1
    message: str | None = None

    def label(h: float) -> str:
        base = "conventional (ΔhydH(H+) = 0)" if h == 0 else f"ΔhydH(H+) = {h:g} kJ/mol"
        name = names.get(h)
        return f"{name}, {base}" if name and h != 0 else base

    if mixed:
        parts = [f"{', '.join(cols)} on the {label(h)} scale" for h, cols in by_h.items()]
        message = (
            "hydration enthalpies on different scales: " + "; ".join(parts)
            + ". Single-ion values must be on one scale before they are combined; sums over"
            " neutral salts agree on every scale"
        )  # fmt: skip
    elif undeclared and by_h:
        (h,) = by_h
        message = (
            f"hydration column(s) {', '.join(undeclared)} do not state their scale; read as "
            f"the {label(h)} scale of the other column(s)"
        )
    elif undeclared:
        message = (
            f"hydration column(s) {', '.join(undeclared)} do not state their scale: "
            "single-ion values cannot be compared with other sources until it is known"
        )
    frozen = {h: tuple(cols) for h, cols in by_h.items()}
    return ScaleCheck(frozen, tuple(undeclared), mixed, message)
