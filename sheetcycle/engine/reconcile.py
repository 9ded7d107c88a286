"""Workbook-wide reconciliation of cycle closures by weighted least squares.

Many rows of a workbook share terms: one metal's atomization and ionization enthalpies, one
halogen's electron-gain enthalpy, a value typed once on an elements sheet. Each row whose
cycle is fully given is one linear constraint Σ_j c_ij x_j = 0 over the true values x_j of
its terms (the coefficients of :func:`sheetcycle.engine.born_haber.cycle_coefficients`).
Every input has a measured value m_j and a standard uncertainty σ_j; the reconciled set is

    minimise  Σ_j ((x_j − m_j)/σ_j)²   subject to   C x = 0,

    x̂ = m − V Cᵀ (C V Cᵀ)⁻¹ C m,   V = diag(σ²)                      (classic closed form)

Gross errors are found with the measurement test on the normalised ("maximum power")
residuals z_j = (x̂_j − m_j) / sqrt(var(x̂_j − m_j)), var(x̂ − m) = V Cᵀ (C V Cᵀ)⁻¹ C V, and
serial elimination: the input with the largest |z| above the threshold is named, made free
(treated as unmeasured) and the problem is solved again. The global test is
χ² = (Cm)ᵀ (C V Cᵀ)⁻¹ (Cm) with rank(C) degrees of freedom. The method, its formulas and
its references are written out in docs/reconciliation.md.

Conventions: NaN measured value = unmeasured (a free unknown, estimated when observable);
NaN σ = not given, replaced by :func:`default_sigma`; σ = +inf = free. Everything here is
pure: numpy/scipy arrays in, a frozen dataclass out.
"""

from __future__ import annotations

from collections.abc import Hashable, Mapping, Sequence
from dataclasses import dataclass

import numpy as np
import numpy.typing as npt
import scipy.linalg as sla
import scipy.sparse as sp
from scipy.stats import chi2 as chi2_dist
from scipy.stats import norm

from sheetcycle.engine.born_haber import TERMS, cycle_coefficients
from sheetcycle.errors import UsageError

__all__ = [
    "DEFAULT_SIGMA_FLOOR",
    "DEFAULT_SIGMA_RELATIVE",
    "Reconciliation",
    "RowCycle",
    "build_cycle_constraints",
    "critical_value",
    "default_sigma",
    "reconcile",
]

FloatArray = npt.NDArray[np.float64]
BoolArray = npt.NDArray[np.bool_]

#: A missing σ becomes max(DEFAULT_SIGMA_RELATIVE·|m|, DEFAULT_SIGMA_FLOOR) kJ/mol.
DEFAULT_SIGMA_RELATIVE = 0.01
DEFAULT_SIGMA_FLOOR = 1.0

# Measurements whose redundancy σ_j⁻²·var(x̂_j − m_j) is below this take part in no
# redundant constraint: they cannot be tested and their z is NaN.
_MIN_REDUNDANCY = 1e-9
# Candidates whose |z| is within this relative distance of the largest are indistinguishable.
_TIE_RTOL = 1e-6
# Matrix entries below this fraction of the largest are elimination round-off.
_ZERO_RTOL = 1e-12


@dataclass(frozen=True)
class RowCycle:
    """The cycle of one compound row: the (key, coefficient) pairs of Σ c_k T_k = 0."""

    terms: tuple[tuple[Hashable, float], ...]
    label: Hashable = None

    @classmethod
    def from_born_haber(
        cls,
        term_keys: Mapping[str, Hashable],
        *,
        n_cation: float,
        n_anion: float,
        anion_charge: float,
        label: Hashable = None,
    ) -> RowCycle:
        """The Born-Haber cycle of a row, given the key of each term (names from TERMS).

        Terms with a zero coefficient (the higher electron gain of a 1− anion) are left out;
        every term with a non-zero coefficient must have a key.
        """
        unknown = set(term_keys) - set(TERMS)
        if unknown:
            raise UsageError(
                "unknown cycle term names", found=sorted(unknown), expected=f"names from {TERMS}"
            )
        c = cycle_coefficients(
            np.array([n_cation], float), np.array([n_anion], float), np.array([anion_charge], float)
        )[0]
        needed = [name for name, coef in zip(TERMS, c, strict=True) if coef != 0.0]
        absent = [name for name in needed if name not in term_keys]
        if absent:
            raise UsageError(
                f"the cycle of row {label!r} has no key for " + ", ".join(map(repr, absent)),
                expected="a key for every term with a non-zero coefficient",
                found=sorted(term_keys),
            )
        coefs = dict(zip(TERMS, c, strict=True))
        return cls(terms=tuple((term_keys[k], float(coefs[k])) for k in needed), label=label)


def build_cycle_constraints(
    rows: Sequence[RowCycle], keys: Sequence[Hashable] | None = None
) -> tuple[tuple[Hashable, ...], sp.csr_array]:
    """The (n_rows × n_keys) constraint matrix of the rows' cycles.

    Keys are numbered in the order given by ``keys`` or, without it, in order of first
    appearance. A key used twice in one row has its coefficients added.
    """
    index: dict[Hashable, int] = {}
    if keys is not None:
        for k in keys:
            if k in index:
                raise UsageError("duplicate key in the list of keys", found=k)
            index[k] = len(index)
    r_idx: list[int] = []
    c_idx: list[int] = []
    vals: list[float] = []
    for i, row in enumerate(rows):
        for key, coef in row.terms:
            if key not in index:
                if keys is not None:
                    raise UsageError(
                        f"row {row.label if row.label is not None else i!r} uses a key "
                        "that is not in the list of keys",
                        found=key,
                    )
                index[key] = len(index)
            r_idx.append(i)
            c_idx.append(index[key])
            vals.append(float(coef))
    shape = (len(rows), len(index))
    mat = sp.csr_array(sp.coo_array((vals, (r_idx, c_idx)), shape=shape))  # sums duplicates
    mat.eliminate_zeros()
    return tuple(index), mat


def default_sigma(measured: npt.ArrayLike, sigma: npt.ArrayLike) -> FloatArray:
    """σ with every NaN replaced by max(1 % of |m|, 1 kJ/mol)."""
    m = np.asarray(measured, dtype=float)
    s = np.asarray(sigma, dtype=float)
    fallback = np.maximum(DEFAULT_SIGMA_RELATIVE * np.abs(m), DEFAULT_SIGMA_FLOOR)
    return np.where(np.isnan(s), fallback, s)


@dataclass(frozen=True)
class Reconciliation:
    """The reconciled set and what the tests found.

    Arrays are aligned with ``keys``. ``free`` marks inputs treated as unknown (unmeasured,
    σ = inf, or named as a culprit); their ``adjusted`` value is estimated from the
    constraints when observable (NaN otherwise) and their ``normalised_residual`` is NaN.
    ``redundancy`` is var(x̂_j − m_j)/σ_j² in [0, 1] (0: the input takes part in no redundant
    constraint and cannot be tested; its z is NaN). ``adjusted_sigma`` is the standard
    uncertainty of the adjusted value (NaN for free inputs). ``chi2``/``dof``/``p_value`` are
    the global test of the final set (after culprits were freed); ``chi2_initial`` is the one
    of the data as given. ``culprits`` are the inputs named, in the order found, and
    ``confounded[i]`` the inputs that the closures cannot tell apart from ``culprits[i]``
    (equal |z|; the culprit itself included): any one of them may be the wrong one.
    ``critical_value`` is the |z| limit of the final test and ``consistent`` is True when no
    |z| exceeds it and the global test passes at level ``alpha``.
    """

    keys: tuple[Hashable, ...]
    measured: FloatArray
    sigma: FloatArray
    adjusted: FloatArray
    adjustment: FloatArray
    adjusted_sigma: FloatArray
    normalised_residual: FloatArray
    redundancy: FloatArray
    free: BoolArray
    chi2: float
    dof: int
    p_value: float
    chi2_initial: float
    dof_initial: int
    p_value_initial: float
    culprits: tuple[Hashable, ...]
    confounded: tuple[tuple[Hashable, ...], ...]
    consistent: bool
    critical_value: float
    alpha: float


@dataclass(frozen=True)
class _Solution:
    adjusted: FloatArray
    var_adjusted: FloatArray
    z: FloatArray
    redundancy: FloatArray
    chi2: float
    dof: int


def reconcile(
    keys: Sequence[Hashable],
    measured: npt.ArrayLike,
    sigma: npt.ArrayLike,
    constraints: npt.ArrayLike | sp.sparray | sp.spmatrix,
    *,
    threshold: float = 3.0,
    max_culprits: int = 5,
    alpha: float = 0.05,
    multiple_testing: bool = True,
) -> Reconciliation:
    """Reconcile all closures at once and name the inputs most likely wrong.

    ``constraints`` is (n_constraints × n_keys), dense or scipy sparse, each row one closure
    Σ_j c_ij x_j = 0. An input is named when its |normalised residual| exceeds the critical
    value: ``threshold``, raised with ``multiple_testing`` to the Šidák-corrected value for
    the number of inputs tested at family level ``alpha`` when that is higher (see
    :func:`critical_value`). Serial elimination stops when no residual exceeds it, or after
    ``max_culprits`` names. ``alpha`` is also the level of the global chi-square test.
    """
    keys_t = tuple(keys)
    n = len(keys_t)
    if len(set(keys_t)) != n:
        raise UsageError("keys must be unique", found=n - len(set(keys_t)), expected="no repeats")
    m = np.asarray(measured, dtype=float).reshape(-1)
    s_in = np.asarray(sigma, dtype=float).reshape(-1)
    if m.shape != (n,) or s_in.shape != (n,):
        raise UsageError(
            "measured and sigma must have one value per key",
            expected=f"{n} values each",
            found=(m.shape[0], s_in.shape[0]),
        )
    c = sp.csr_array(constraints, dtype=float)
    if c.ndim != 2 or c.shape[1] != n:
        raise UsageError(
            "the constraint matrix must have one column per key",
            expected=f"(n_constraints, {n})",
            found=c.shape,
        )
    if not (np.isfinite(threshold) and threshold > 0):
        raise UsageError("threshold must be a positive number", found=threshold)
    if max_culprits < 0:
        raise UsageError("max_culprits must not be negative", found=max_culprits)
    if not 0.0 < alpha < 1.0:
        raise UsageError("alpha must lie between 0 and 1", found=alpha)
    if np.any(np.isinf(m)):
        raise UsageError("measured values must be finite or NaN (unmeasured)", found="inf")
    s = default_sigma(m, s_in)
    bad = ~np.isnan(m) & ~(s > 0)
    if bad.any():
        i = int(np.argmax(bad))
        raise UsageError(
            f"the uncertainty of {keys_t[i]!r} is not positive",
            expected="σ > 0 (NaN for the default, inf for a free value)",
            found=float(s[i]),
        )
    if not np.all(np.isfinite(c.data)):
        raise UsageError("constraint coefficients must be finite numbers", found="NaN or inf")

    free = np.isnan(m) | np.isinf(s)
    first = _solve(c, m, s, free)
    sol = first
    culprits: list[Hashable] = []
    confounded: list[tuple[Hashable, ...]] = []

    def crit(z: FloatArray) -> float:
        n_tests = int(np.isfinite(z).sum())
        return critical_value(n_tests, alpha, threshold) if multiple_testing else threshold

    while len(culprits) < max_culprits:
        az = np.abs(sol.z)
        if not np.any(az > crit(sol.z)):  # NaN compares False
            break
        j = int(np.nanargmax(az))
        tied = np.nonzero(az >= az[j] * (1.0 - _TIE_RTOL))[0]
        culprits.append(keys_t[j])
        confounded.append(tuple(keys_t[t] for t in tied))
        free = free.copy()
        free[j] = True
        sol = _solve(c, m, s, free)

    p_value = _p_value(sol.chi2, sol.dof)
    limit = crit(sol.z)
    above = bool(np.any(np.abs(sol.z) > limit))
    s_out = np.where(free, np.where(np.isnan(m), np.nan, s), s)
    adjusted_sigma = np.where(free, np.nan, np.sqrt(np.clip(sol.var_adjusted, 0.0, None)))
    return Reconciliation(
        keys=keys_t,
        measured=m,
        sigma=s_out,
        adjusted=sol.adjusted,
        adjustment=sol.adjusted - m,
        adjusted_sigma=adjusted_sigma,
        normalised_residual=sol.z,
        redundancy=sol.redundancy,
        free=free,
        chi2=sol.chi2,
        dof=sol.dof,
        p_value=p_value,
        chi2_initial=first.chi2,
        dof_initial=first.dof,
        p_value_initial=_p_value(first.chi2, first.dof),
        culprits=tuple(culprits),
        confounded=tuple(confounded),
        consistent=(not above) and p_value >= alpha,
        critical_value=float(limit),
        alpha=float(alpha),
    )


def critical_value(n_tests: int, alpha: float = 0.05, threshold: float = 3.0) -> float:
    """The |z| above which an input is named: max(threshold, z_Šidák).

    z_Šidák = Φ⁻¹(1 − β/2) with β = 1 − (1 − alpha)^(1/n_tests) keeps the chance of naming
    any input of a consistent data set at ``alpha`` when ``n_tests`` inputs are tested.
    """
    if n_tests <= 1:
        return float(threshold)
    beta = -np.expm1(np.log1p(-alpha) / n_tests)
    return float(max(threshold, norm.isf(beta / 2.0)))


def _p_value(chi2: float, dof: int) -> float:
    return 1.0 if dof == 0 else float(chi2_dist.sf(chi2, dof))


def _solve(c: sp.csr_array, m: FloatArray, s: FloatArray, free: BoolArray) -> _Solution:
    """One weighted least-squares adjustment with the ``free`` inputs unmeasured."""
    n = m.shape[0]
    a, pivots = _eliminate_free(c, free)
    m0 = np.where(free, 0.0, m)
    var = np.where(free, 0.0, s * s)
    # Rows emptied by the elimination carry no information.
    a = a[np.diff(a.indptr) > 0]
    x = np.where(free, np.nan, m)
    var_x = np.where(free, np.nan, var)
    z = np.full(n, np.nan)
    red = np.zeros(n)
    chi2, dof = 0.0, 0
    if a.shape[0] > 0:
        r = a @ m0
        lam, d, dof = _woodbury(a, var, r) if _woodbury_applies(a, free) else _dense(a, var, r)
        adj = -var * (a.T @ lam)
        x = np.where(free, np.nan, m + adj)
        chi2 = float(max(r @ lam, 0.0))
        red = np.where(free, 0.0, np.clip(var * d, 0.0, 1.0))
        var_x = np.where(free, np.nan, var * (1.0 - red))
        testable = red > _MIN_REDUNDANCY
        z = np.where(testable, adj / np.sqrt(np.where(testable, var * red, 1.0)), np.nan)
    x = _back_substitute(x, pivots)
    return _Solution(adjusted=x, var_adjusted=var_x, z=z, redundancy=red, chi2=chi2, dof=dof)


def _eliminate_free(
    c: sp.csr_array, free: BoolArray
) -> tuple[sp.csr_array, list[tuple[int, npt.NDArray[np.intp], FloatArray]]]:
    """Remove the free inputs from the constraints by Gaussian elimination.

    Returns the reduced matrix (free columns all zero; the same number of rows, eliminated
    pivot rows emptied) and the pivot rows (free index, column indices, coefficients) for
    back-substitution, in elimination order.
    """
    a = sp.csr_array(c, copy=True)
    a.sum_duplicates()
    a.eliminate_zeros()
    pivots: list[tuple[int, npt.NDArray[np.intp], FloatArray]] = []
    if not free.any() or a.nnz == 0:
        return a, pivots
    scale = float(np.max(np.abs(a.data)))
    free_idx = np.nonzero(free)[0]
    while True:
        sub = sp.csc_array(a[:, free_idx])
        counts = np.diff(sub.indptr)
        if not counts.any():
            break
        if (counts == 1).any():
            # Free inputs in a single row: record that row as their pivot and drop it (no fill).
            drop: dict[int, int] = {}
            for k in np.nonzero(counts == 1)[0]:
                row = int(sub.indices[sub.indptr[k]])
                drop.setdefault(row, int(free_idx[k]))
            for row, f in drop.items():
                lo, hi = a.indptr[row], a.indptr[row + 1]
                pivots.append((f, a.indices[lo:hi].copy(), a.data[lo:hi].copy()))
            keep = np.ones(a.shape[0])
            keep[list(drop)] = 0.0
            a = sp.csr_array(sp.diags_array(keep) @ a)
        else:
            # A free input shared by several rows: eliminate it with its largest coefficient.
            used = np.nonzero(counts > 0)[0]
            kk = int(used[np.argmin(counts[used])])
            f = int(free_idx[kk])
            rows = sub.indices[sub.indptr[kk] : sub.indptr[kk + 1]]
            col = sub.data[sub.indptr[kk] : sub.indptr[kk + 1]]
            p = int(np.argmax(np.abs(col)))
            prow = int(rows[p])
            lo, hi = a.indptr[prow], a.indptr[prow + 1]
            pidx, pval = a.indices[lo:hi].copy(), a.data[lo:hi].copy()
            pivots.append((f, pidx, pval))
            u = np.zeros(a.shape[0])
            u[rows] = col / col[p]  # u[prow] = 1 empties the pivot row
            pivot_row = sp.csr_array((pval, pidx, [0, pval.size]), shape=(1, a.shape[1]))
            a = sp.csr_array(a - sp.csr_array(u[:, None]) @ pivot_row)
            a = _clean(a, scale, f)
        a = _clean(a, scale, None)
    return a, pivots


def _clean(a: sp.csr_array, scale: float, col: int | None) -> sp.csr_array:
    """Zero the round-off of an elimination (and the whole of column ``col``)."""
    a = sp.csr_array(a)
    a.sum_duplicates()
    a.data[np.abs(a.data) <= _ZERO_RTOL * scale] = 0.0
    if col is not None:
        a.data[a.indices == col] = 0.0
    a.eliminate_zeros()
    return a


def _back_substitute(
    x: FloatArray, pivots: list[tuple[int, npt.NDArray[np.intp], FloatArray]]
) -> FloatArray:
    """Free inputs from their pivot rows, last eliminated first (NaN when unobservable)."""
    x = x.copy()
    for f, idx, val in reversed(pivots):
        others = idx != f
        cf = val[~others]
        x[f] = -float(val[others] @ x[idx[others]]) / float(cf[0]) if cf.size else np.nan
    return x


def _woodbury_applies(a: sp.csr_array, free: BoolArray) -> bool:
    """True when every row has a private measured input and few inputs are shared."""
    csc = sp.csc_array(a)
    counts = np.diff(csc.indptr)
    private = (counts == 1) & ~free
    has_private = (np.diff(sp.csr_array(a[:, np.nonzero(private)[0]]).indptr) > 0).all()
    n_shared = int(((counts > 1) & ~free).sum())
    return bool(has_private) and n_shared < a.shape[0]


def _woodbury(
    a: sp.csr_array, var: FloatArray, r: FloatArray
) -> tuple[FloatArray, FloatArray, int]:
    """S⁻¹r and diag(Aᵀ S⁻¹ A) for S = A V Aᵀ = D + A_s V_s A_sᵀ by the Woodbury identity.

    D is diagonal (the inputs private to one row), A_s holds the n_s shared columns. With
    K = V_s⁻¹ + A_sᵀ D⁻¹ A_s = L Lᵀ and E = L⁻¹ A_sᵀ D⁻¹, S⁻¹ = D⁻¹ − EᵀE: the cost is
    O(m·n_s²) for m rows, instead of O(m³).
    """
    csc = sp.csc_array(a)
    counts = np.diff(csc.indptr)
    private = np.nonzero(counts == 1)[0]
    shared = np.nonzero(counts > 1)[0]
    a2 = sp.csc_array(csc.multiply(csc))
    dinv = 1.0 / (a2[:, private] @ var[private])
    first = a2.T @ dinv  # a_jᵀ D⁻¹ a_j for every column j
    if shared.size == 0:
        return dinv * r, first, a.shape[0]
    a_s = sp.csc_array(csc[:, shared])
    dinv_as = sp.csc_array(sp.diags_array(dinv) @ a_s)
    k = _dense_array(a_s.T @ dinv_as)
    k[np.diag_indices_from(k)] += 1.0 / var[shared]
    low = sla.cholesky(k, lower=True)
    e = sla.solve_triangular(low, _dense_array(dinv_as.T), lower=True)  # n_s × m
    diag_sinv = dinv - np.einsum("ij,ij->j", e, e)
    d = np.zeros(a.shape[1])
    first_entry = csc.indptr[private]
    d[private] = csc.data[first_entry] ** 2 * diag_sinv[csc.indices[first_entry]]
    ea = _dense_array(a_s.T @ e.T).T  # E A_s, n_s × n_s
    d[shared] = first[shared] - np.einsum("ij,ij->j", ea, ea)
    lam = dinv * r - e.T @ (e @ r)
    return lam, d, a.shape[0]


def _dense_array(x: object) -> FloatArray:
    return np.asarray(x.toarray() if sp.issparse(x) else x, dtype=float)  # type: ignore[attr-defined]


def _dense(a: sp.csr_array, var: FloatArray, r: FloatArray) -> tuple[FloatArray, FloatArray, int]:
    """S⁺r and diag(Aᵀ S⁺ A) from the eigen-decomposition of S = A V Aᵀ (any rank)."""
    av = sp.csr_array(a @ sp.diags_array(np.sqrt(var)))
    sm = av @ av.T
    smat = sm.toarray() if sp.issparse(sm) else np.asarray(sm)
    w, q = np.linalg.eigh(smat)
    tol = max(float(w.max(initial=0.0)), 1e-300) * smat.shape[0] * np.finfo(float).eps * 10
    keep = w > tol
    q = q[:, keep]
    w = w[keep]
    lam = q @ ((q.T @ r) / w)
    b = a.T @ q  # n × rank
    b = b.toarray() if sp.issparse(b) else np.asarray(b)
    d = np.einsum("ij,ij->i", b, b / w)
    return lam, d, int(keep.sum())
