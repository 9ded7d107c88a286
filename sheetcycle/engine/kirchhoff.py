"""Reaction enthalpies at other temperatures (Kirchhoff's law), vectorized.

    ΔrH(T) = ΔrH(T0) + ∫_{T0}^{T} ΔrCp dT,   ΔrCp = Σ_s ν_s Cp_s

From Shomate coefficients (the NIST Chemistry WebBook form, t = T/1000 K):

    Cp°        = A + B t + C t² + D t³ + E/t²                        J/(mol·K)
    H° − H°298 = A t + B t²/2 + C t³/3 + D t⁴/4 − E/t + F − H         kJ/mol

so ∫ Cp_s dT from T0 to T is [H°−H°298](T) − [H°−H°298](T0), with each temperature
evaluated in the coefficient set whose range holds it (a species may have several sets).
H° − H°298 is 0 at 298.15 K by definition and is not evaluated there, so a set that starts
at 500 K (water vapour on the WebBook) still serves T0 = 298.15 K.

A temperature outside every set of a species used by a reaction is marked in
``out_of_range`` and, unless ``extrapolate`` is asked for, leaves that reaction without a
value (NaN); with ``extrapolate`` the nearest set is used and the mark stays, for a flag.

With constant heat capacities: ΔrH(T) = ΔrH(T0) + ΔrCp·(T − T0)/1000 (ΔrCp in J/(mol·K)).

Uncertainty: σ(ΔrH(T0)) is carried over unchanged; the heat-capacity integral is taken as
exact (Shomate fits reproduce their source tables to well under 0.1 kJ/mol over a few
hundred K, far below the uncertainty of most formation enthalpies).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Protocol, runtime_checkable

import numpy as np
import numpy.typing as npt

__all__ = [
    "T_REF",
    "CoefficientSet",
    "KirchhoffResult",
    "ShomateTable",
    "delta_cp",
    "delta_h_at",
    "delta_h_constant_cp",
    "shomate_cp",
    "shomate_h_minus_h298",
]

FloatArray = npt.NDArray[np.float64]
BoolArray = npt.NDArray[np.bool_]

T_REF = 298.15


def shomate_cp(
    T: npt.ArrayLike,
    A: npt.ArrayLike,
    B: npt.ArrayLike,
    C: npt.ArrayLike,
    D: npt.ArrayLike,
    E: npt.ArrayLike,
) -> FloatArray:
    """Cp° in J/(mol·K) at T (K) from Shomate coefficients; broadcasts."""
    t = np.asarray(T, dtype=float) / 1000.0
    a, b, c, d, e = (np.asarray(x, dtype=float) for x in (A, B, C, D, E))
    with np.errstate(divide="ignore", invalid="ignore"):
        return a + b * t + c * t**2 + d * t**3 + e / t**2


def shomate_h_minus_h298(
    T: npt.ArrayLike,
    A: npt.ArrayLike,
    B: npt.ArrayLike,
    C: npt.ArrayLike,
    D: npt.ArrayLike,
    E: npt.ArrayLike,
    F: npt.ArrayLike,
    H: npt.ArrayLike,
) -> FloatArray:
    """H°(T) − H°(298.15 K) in kJ/mol from Shomate coefficients; broadcasts."""
    t = np.asarray(T, dtype=float) / 1000.0
    a, b, c, d, e, f, h = (np.asarray(x, dtype=float) for x in (A, B, C, D, E, F, H))
    with np.errstate(divide="ignore", invalid="ignore"):
        return a * t + b * t**2 / 2 + c * t**3 / 3 + d * t**4 / 4 - e / t + f - h


@runtime_checkable
class CoefficientSet(Protocol):
    """Anything with a range and eight coefficients A..H (such as
    :class:`sheetcycle.data.thermo.ShomateSet`)."""

    @property
    def t_min(self) -> float: ...
    @property
    def t_max(self) -> float: ...
    @property
    def coefficients(self) -> Sequence[float]: ...


_SetInput = CoefficientSet | tuple[float, float, Sequence[float]]


@dataclass(frozen=True)
class ShomateTable:
    """Coefficient sets for S species, up to R ranges each, padded with NaN.

    ``coefficients`` (S, R, 8) holds A..H; ``t_min``/``t_max`` (S, R) the range of each set.
    A species with no set at all has all-NaN rows (its ``has_data`` is False).
    """

    coefficients: FloatArray
    t_min: FloatArray
    t_max: FloatArray

    @classmethod
    def from_sets(cls, sets: Sequence[Sequence[_SetInput]]) -> ShomateTable:
        """Build from, per species, a list of (t_min, t_max, (A, B, C, D, E, F, G, H)).

        Objects with ``t_min``, ``t_max`` and ``coefficients`` attributes (such as
        :class:`sheetcycle.data.thermo.ShomateSet`) are accepted in place of the tuples.
        """
        s = len(sets)
        r = max((len(x) for x in sets), default=0) or 1
        coef = np.full((s, r, 8), np.nan)
        lo = np.full((s, r), np.nan)
        hi = np.full((s, r), np.nan)
        for i, species_sets in enumerate(sets):
            for j, item in enumerate(species_sets):
                if isinstance(item, CoefficientSet):
                    t0, t1, c = item.t_min, item.t_max, item.coefficients
                else:
                    t0, t1, c = item
                if len(c) != 8:
                    raise ValueError(
                        f"a Shomate set needs 8 coefficients A..H, got {len(c)} for species {i}"
                    )
                coef[i, j] = c
                lo[i, j] = t0
                hi[i, j] = t1
        return cls(coef, lo, hi)

    @property
    def has_data(self) -> BoolArray:
        return np.asarray(~np.isnan(self.t_min).all(axis=1), dtype=bool)

    def _select(self, T: FloatArray, extrapolate: bool) -> tuple[FloatArray, BoolArray]:
        """Coefficients (N, S, 8) for temperatures T (N,) and the out-of-range mask (N, S)."""
        t = T[:, None, None]
        inside = np.asarray((self.t_min[None] <= t) & (t <= self.t_max[None]), dtype=bool)
        has: BoolArray = np.asarray(inside.any(axis=2), dtype=bool)
        idx = np.argmax(inside, axis=2)
        if extrapolate:
            with np.errstate(invalid="ignore"):
                dist = np.where(
                    np.isnan(self.t_min[None]),
                    np.inf,
                    np.maximum(self.t_min[None] - t, t - self.t_max[None]),
                )
            idx = np.where(has, idx, np.argmin(dist, axis=2))
        s_idx = np.arange(self.coefficients.shape[0])[None, :]
        coef = self.coefficients[s_idx, idx]  # (N, S, 8)
        data = self.has_data[None, :]
        out_of_range = data & ~has
        if not extrapolate:
            coef = np.where(has[..., None], coef, np.nan)
        return coef, out_of_range

    def h_minus_h298(
        self, T: npt.ArrayLike, *, extrapolate: bool = False
    ) -> tuple[FloatArray, BoolArray]:
        """H° − H°298 (kJ/mol), (N, S), for T (N,), and the out-of-range mask (N, S).
        Exactly 0 at 298.15 K for every species with data (by definition)."""
        t = np.atleast_1d(np.asarray(T, dtype=float))
        coef, oor = self._select(t, extrapolate)
        c = np.moveaxis(coef, -1, 0)
        h = shomate_h_minus_h298(t[:, None], c[0], c[1], c[2], c[3], c[4], c[5], c[7])
        at_ref = (t == T_REF)[:, None] & self.has_data[None, :]
        return np.where(at_ref, 0.0, h), oor & ~at_ref

    def cp(self, T: npt.ArrayLike, *, extrapolate: bool = False) -> tuple[FloatArray, BoolArray]:
        """Cp° (J/(mol·K)), (N, S), for T (N,), and the out-of-range mask (N, S)."""
        t = np.atleast_1d(np.asarray(T, dtype=float))
        coef, oor = self._select(t, extrapolate)
        c = np.moveaxis(coef, -1, 0)
        return shomate_cp(t[:, None], c[0], c[1], c[2], c[3], c[4]), oor


@dataclass(frozen=True)
class KirchhoffResult:
    """ΔrH(T) per reaction with σ carried over from ΔrH(T0).

    ``out_of_range[r, s]``: species s of reaction r was evaluated outside its sets' ranges
    (at T or at T0). ``missing[r, s]``: species s is used by reaction r and has no
    heat-capacity data at all.
    """

    value: FloatArray
    sigma: FloatArray
    out_of_range: BoolArray
    missing: BoolArray


def delta_h_at(
    T: npt.ArrayLike,
    delta_h_ref: npt.ArrayLike,
    nu: npt.ArrayLike,
    table: ShomateTable,
    *,
    T0: npt.ArrayLike = T_REF,
    sigma_ref: npt.ArrayLike | None = None,
    extrapolate: bool = False,
) -> KirchhoffResult:
    """ΔrH(T) = ΔrH(T0) + Σ_s ν_s ([H°−H°298]_s(T) − [H°−H°298]_s(T0)) for N reactions.

    ``T``, ``delta_h_ref`` (kJ/mol), ``T0`` and ``sigma_ref`` are (N,) or scalars; ``nu`` is
    (N, S) with the columns of ``table``.
    """
    n = np.atleast_2d(np.asarray(nu, dtype=float))
    rows = n.shape[0]
    t = np.broadcast_to(np.asarray(T, dtype=float), (rows,)).copy()
    t0 = np.broadcast_to(np.asarray(T0, dtype=float), (rows,)).copy()
    h_t, oor_t = table.h_minus_h298(t, extrapolate=extrapolate)
    h_0, oor_0 = table.h_minus_h298(t0, extrapolate=extrapolate)
    used = n != 0.0
    missing = used & ~table.has_data[None, :]
    out_of_range = used & (oor_t | oor_0)
    d = np.where(used, n * (h_t - h_0), 0.0)
    bad = np.isnan(d).any(axis=1) | missing.any(axis=1)
    value = np.asarray(delta_h_ref, dtype=float) + np.where(np.isnan(d), 0.0, d).sum(axis=1)
    value = np.where(bad, np.nan, value)
    sig = np.broadcast_to(
        np.asarray(np.nan if sigma_ref is None else sigma_ref, dtype=float), (rows,)
    )
    sig = np.where(np.isnan(value), np.nan, sig)
    return KirchhoffResult(value, sig, out_of_range, missing)


def delta_cp(nu: npt.ArrayLike, cp: npt.ArrayLike) -> FloatArray:
    """ΔrCp = Σ ν Cp per reaction (J/(mol·K)); NaN where a used species has no Cp."""
    n = np.atleast_2d(np.asarray(nu, dtype=float))
    c = np.broadcast_to(np.asarray(cp, dtype=float), n.shape)
    used = n != 0.0
    out = np.where(used, n * np.where(np.isnan(c), 0.0, c), 0.0).sum(axis=1)
    return np.where((used & np.isnan(c)).any(axis=1), np.nan, out)


def delta_h_constant_cp(
    T: npt.ArrayLike,
    delta_h_ref: npt.ArrayLike,
    delta_cp_j: npt.ArrayLike,
    *,
    T0: npt.ArrayLike = T_REF,
    t_min: npt.ArrayLike | None = None,
    t_max: npt.ArrayLike | None = None,
) -> tuple[FloatArray, BoolArray]:
    """ΔrH(T) = ΔrH(T0) + ΔrCp·(T − T0)/1000 with ΔrCp in J/(mol·K), and a mask of
    temperatures outside [t_min, t_max] (the range the constant Cp is taken to hold for;
    no limit where not given or NaN)."""
    t = np.asarray(T, dtype=float)
    t0 = np.asarray(T0, dtype=float)
    value = (
        np.asarray(delta_h_ref, dtype=float)
        + np.asarray(delta_cp_j, dtype=float) * (t - t0) / 1000.0
    )
    lo = np.asarray(-np.inf if t_min is None else t_min, dtype=float)
    hi = np.asarray(np.inf if t_max is None else t_max, dtype=float)
    lo = np.where(np.isnan(lo), -np.inf, lo)
    hi = np.where(np.isnan(hi), np.inf, hi)
    outside = np.broadcast_to((t < lo) | (t > hi) | (t0 < lo) | (t0 > hi), np.shape(value))
    return np.asarray(value, dtype=float), np.asarray(outside, dtype=bool)
