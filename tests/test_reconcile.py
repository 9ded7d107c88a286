"""Workbook-wide reconciliation: weighted least squares, normalised residuals, culprits.

The synthetic networks are invented: made-up metals M0..M5 and non-metals X0..X3 whose
"true" term values are drawn at random in plausible ranges, each salt's formation enthalpy
made to close its cycle exactly, then every input measured once with Gaussian noise.
"""

from __future__ import annotations

import math
import statistics
from collections.abc import Hashable

import numpy as np
import pytest
import scipy.sparse as sp
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.stats import chi2 as chi2_dist

from sheetcycle.engine.reconcile import (
    RowCycle,
    _dense,
    _woodbury,
    build_cycle_constraints,
    critical_value,
    default_sigma,
    reconcile,
)
from sheetcycle.errors import UsageError

SIGMA = 2.0  # kJ/mol, every input of the synthetic networks


def _bh_row(metal: str, nonmetal: str, formation: Hashable, lattice: Hashable) -> RowCycle:
    return RowCycle.from_born_haber(
        {
            "formation_enthalpy": formation,
            "lattice_enthalpy": lattice,
            "atomization_metal": ("atomization_enthalpy", metal, 0),
            "ionization": ("ionization_sum", metal, 1),
            "atomization_nonmetal": ("atomization_enthalpy", nonmetal, 0),
            "electron_gain_1": ("electron_gain_enthalpy", nonmetal, 1),
        },
        n_cation=1,
        n_anion=1,
        anion_charge=1,
        label=metal + nonmetal,
    )


def network(
    n_metals: int = 6,
    n_nonmetals: int = 4,
    *,
    seed: int = 7,
    bond_rows: bool = True,
    second_lattice_for: str | None = None,
) -> tuple[list[Hashable], np.ndarray, np.ndarray, sp.csr_array, dict[Hashable, float]]:
    """A consistent network of n_metals × n_nonmetals 1:1 salts, measured with noise.

    ``bond_rows`` adds one closure per non-metal, 2·ΔatH(X) = D(X–X) (the atomization of a
    diatomic element is half its bond dissociation enthalpy; common practice, no source),
    which makes the electron gain distinguishable from the atomization.
    ``second_lattice_for`` gives that salt a second row with an independent lattice value
    sharing the one formation-enthalpy cell.
    """
    rng = np.random.default_rng(seed)
    metals = [f"M{i}" for i in range(n_metals)]
    nonmetals = [f"X{j}" for j in range(n_nonmetals)]
    true: dict[Hashable, float] = {}
    for m in metals:
        true["atomization_enthalpy", m, 0] = rng.uniform(70, 180)
        true["ionization_sum", m, 1] = rng.uniform(370, 530)
    for x in nonmetals:
        true["atomization_enthalpy", x, 0] = rng.uniform(80, 250)
        true["electron_gain_enthalpy", x, 1] = -rng.uniform(290, 350)
    rows: list[RowCycle] = []
    for m in metals:
        for x in nonmetals:
            salt = m + x
            lat = rng.uniform(600, 1000)
            true["lattice", salt] = lat
            true["formation", salt] = (
                true["atomization_enthalpy", m, 0]
                + true["ionization_sum", m, 1]
                + true["atomization_enthalpy", x, 0]
                + true["electron_gain_enthalpy", x, 1]
                - lat
            )
            rows.append(_bh_row(m, x, ("formation", salt), ("lattice", salt)))
            if salt == second_lattice_for:
                true["lattice-2", salt] = lat
                rows.append(_bh_row(m, x, ("formation", salt), ("lattice-2", salt)))
    if bond_rows:
        for x in nonmetals:
            true["bond_dissociation", x, 0] = 2 * true["atomization_enthalpy", x, 0]
            rows.append(
                RowCycle(
                    ((("atomization_enthalpy", x, 0), 2.0), (("bond_dissociation", x, 0), -1.0)),
                    label="D" + x,
                )
            )
    keys, c = build_cycle_constraints(rows)
    t = np.array([true[k] for k in keys])
    s = np.full(len(keys), SIGMA)
    measured = t + rng.normal(0.0, 1.0, len(keys)) * s
    return list(keys), measured, s, c, true


def is_own_input_of_a_salt(key: Hashable) -> bool:
    return isinstance(key, tuple) and key[0] in ("formation", "lattice", "lattice-2")


# --- known analytic solutions -------------------------------------------------------------


def test_two_measurements_of_one_quantity_give_the_weighted_mean() -> None:
    # Inverse-variance weighted mean and its variance 1/Σσ⁻² (e.g. Bevington & Robinson,
    # "Data Reduction and Error Analysis for the Physical Sciences", ch. 4, from memory).
    m1, s1, m2, s2 = 10.0, 1.0, 12.0, 2.0
    r = reconcile(["first", "second"], [m1, m2], [s1, s2], np.array([[1.0, -1.0]]))
    w1, w2 = 1 / s1**2, 1 / s2**2
    mean = (w1 * m1 + w2 * m2) / (w1 + w2)
    assert r.adjusted == pytest.approx([mean, mean], abs=1e-12)
    assert r.adjusted_sigma == pytest.approx([math.sqrt(1 / (w1 + w2))] * 2, abs=1e-12)
    # χ² of the difference of two measurements: (m1 − m2)²/(σ1² + σ2²), one degree of freedom
    chi2 = (m1 - m2) ** 2 / (s1**2 + s2**2)
    assert r.chi2 == pytest.approx(chi2) and r.dof == 1
    assert r.p_value == pytest.approx(chi2_dist.sf(chi2, 1))
    # each normalised residual is the standardised difference, with the sign of its adjustment
    zd = (m1 - m2) / math.sqrt(s1**2 + s2**2)
    assert r.normalised_residual == pytest.approx([-zd, zd])
    assert r.culprits == () and r.consistent


def test_unmeasured_lattice_enthalpy_of_nacl_is_estimated_from_its_cycle() -> None:
    # NaCl terms, kJ/mol, from memory (NIST-JANAF / CODATA key values): ΔfH −411.2,
    # ΔatH(Na) 107.3, IE1(Na) 495.8, ΔatH(Cl) 121.3, ΔegH(Cl) −348.6; the handbook cycle
    # value of the lattice enthalpy is 787 kJ/mol (CRC Handbook, "Lattice energies", from memory).
    row = _bh_row("Na", "Cl", "dfH", "lattice")
    keys, c = build_cycle_constraints([row])
    given_ = {
        "dfH": -411.2,
        ("atomization_enthalpy", "Na", 0): 107.3,
        ("ionization_sum", "Na", 1): 495.8,
        ("atomization_enthalpy", "Cl", 0): 121.3,
        ("electron_gain_enthalpy", "Cl", 1): -348.6,
    }
    m = np.array([given_.get(k, np.nan) for k in keys])
    r = reconcile(keys, m, np.full(len(keys), np.nan), c)
    assert r.adjusted[keys.index("lattice")] == pytest.approx(787.0, abs=1.0)
    assert r.dof == 0 and r.culprits == () and r.free[keys.index("lattice")]
    # nothing redundant: the given values are not moved and cannot be tested
    assert r.adjustment[~r.free] == pytest.approx(np.zeros(len(keys) - 1), abs=1e-9)
    assert np.isnan(r.normalised_residual).all()


def test_missing_sigma_defaults_to_one_percent_with_a_floor_of_one_kj() -> None:
    # The documented default (docs/reconciliation.md): max(0.01·|m|, 1 kJ/mol).
    out = default_sigma([-411.2, 50.0, 0.0, 300.0], [np.nan, np.nan, np.nan, 4.0])
    assert out == pytest.approx([4.112, 1.0, 1.0, 4.0])


def test_sidak_critical_value_matches_the_normal_quantile() -> None:
    # Šidák: β = 1 − (1 − α)^(1/n); z = Φ⁻¹(1 − β/2). The quantile from the standard library.
    n, alpha = 60, 0.05
    beta = 1 - (1 - alpha) ** (1 / n)
    expected = statistics.NormalDist().inv_cdf(1 - beta / 2)
    assert critical_value(n, alpha, threshold=0.0) == pytest.approx(expected, rel=1e-9)
    assert critical_value(n, alpha, threshold=5.0) == 5.0
    assert critical_value(1, alpha, threshold=3.0) == 3.0


# --- synthetic networks ---------------------------------------------------------------------


def test_consistent_network_names_no_culprit_and_passes_the_global_test() -> None:
    keys, m, s, c, _ = network()
    r = reconcile(keys, m, s, c)
    assert c.shape == (28, len(keys))
    assert r.culprits == ()
    assert r.dof == 28
    assert r.p_value > 0.05 and r.consistent
    assert np.nanmax(np.abs(r.normalised_residual)) < 3.0
    assert np.abs(c @ r.adjusted).max() < 1e-9


def test_mistyped_electron_gain_is_the_culprit_not_the_salts_it_broke() -> None:
    keys, m, s, c, true = network()
    key = ("electron_gain_enthalpy", "X2", 1)
    m = m.copy()
    m[keys.index(key)] += 40.0
    before = reconcile(keys, m, s, c, max_culprits=0)
    assert not before.consistent and before.p_value < 1e-6
    r = reconcile(keys, m, s, c)
    assert r.culprits[0] == key
    assert r.confounded[0] == (key,)
    assert not any(is_own_input_of_a_salt(k) for k in r.culprits)
    assert r.consistent
    # with the culprit free, the six broken salts' own inputs are back below threshold
    broken = [i for i, k in enumerate(keys) if is_own_input_of_a_salt(k) and k[1].endswith("X2")]
    assert len(broken) == 12
    assert np.all(np.abs(r.normalised_residual[broken]) < 3.0)
    # and the value the closures imply for it is close to the true one (typed value is 40 off)
    assert r.adjusted[keys.index(key)] == pytest.approx(true[key], abs=4 * SIGMA)
    assert r.adjustment[keys.index(key)] == pytest.approx(-40.0, abs=4 * SIGMA)


def test_without_a_second_route_electron_gain_and_atomization_are_confounded() -> None:
    # Every Born-Haber cycle uses b·ΔatH(X) + b·ΔegH(X) together: closures alone cannot tell
    # which of the two is wrong, and the result says so.
    keys, m, s, c, _ = network(bond_rows=False)
    key = ("electron_gain_enthalpy", "X2", 1)
    m = m.copy()
    m[keys.index(key)] += 40.0
    r = reconcile(keys, m, s, c)
    assert set(r.confounded[0]) == {key, ("atomization_enthalpy", "X2", 0)}
    assert r.culprits[0] in r.confounded[0]
    assert not any(is_own_input_of_a_salt(k) for k in r.culprits)


def test_mistyped_formation_enthalpy_shared_by_two_rows_is_named() -> None:
    keys, m, s, c, _ = network(second_lattice_for="M3X1")
    key = ("formation", "M3X1")
    m = m.copy()
    m[keys.index(key)] -= 40.0
    r = reconcile(keys, m, s, c)
    assert r.culprits == (key,)
    assert r.confounded[0] == (key,)
    assert r.consistent


def test_mistyped_formation_enthalpy_of_one_row_names_that_row_only() -> None:
    # In a single cycle ΔfH and the lattice enthalpy both enter with coefficient −1: the pair
    # is named together, and nothing else.
    keys, m, s, c, _ = network()
    key = ("formation", "M3X1")
    m = m.copy()
    m[keys.index(key)] += 40.0
    r = reconcile(keys, m, s, c)
    assert len(r.culprits) == 1
    assert set(r.confounded[0]) == {key, ("lattice", "M3X1")}


def test_threshold_and_max_culprits_are_respected() -> None:
    keys, m, s, c, _ = network()
    m = m.copy()
    m[keys.index(("electron_gain_enthalpy", "X2", 1))] += 40.0
    assert reconcile(keys, m, s, c, max_culprits=0).culprits == ()
    assert reconcile(keys, m, s, c, threshold=1000.0).culprits == ()


def test_sidak_keeps_a_large_consistent_network_free_of_false_culprits() -> None:
    # 30 × 20 salts: about 1300 inputs tested; at |z| > 3 alone several would be named by
    # chance (P(|z| > 3) = 0.27 % each for a standard normal, common practice, no source).
    keys, m, s, c, _ = network(30, 20, seed=11)
    r = reconcile(keys, m, s, c)
    assert r.culprits == ()
    assert r.critical_value > 3.9
    plain = reconcile(keys, m, s, c, multiple_testing=False, max_culprits=50)
    assert len(plain.culprits) >= 1


@pytest.mark.slow
def test_a_thousand_rows_reconcile_to_the_planted_culprit() -> None:
    keys, m, s, c, _ = network(40, 25, seed=3)
    m = m.copy()
    m[keys.index(("electron_gain_enthalpy", "X2", 1))] += 40.0
    r = reconcile(keys, m, s, c)
    assert c.shape[0] == 1025
    assert r.culprits == (("electron_gain_enthalpy", "X2", 1),)


# --- input checks ---------------------------------------------------------------------------


def test_bad_inputs_are_usage_errors_with_what_was_found() -> None:
    c = np.array([[1.0, -1.0]])
    with pytest.raises(UsageError, match="keys must be unique"):
        reconcile(["a", "a"], [1.0, 2.0], [1.0, 1.0], c)
    with pytest.raises(UsageError, match=r"uncertainty of 'b' is not positive.*found -1\.0"):
        reconcile(["a", "b"], [1.0, 2.0], [1.0, -1.0], c)
    with pytest.raises(UsageError, match="one column per key"):
        reconcile(["a", "b", "c"], [1.0, 2.0, 3.0], [1.0, 1.0, 1.0], c)
    missing = "row 'NaCl' has no key for 'lattice_enthalpy', 'atomization_metal'"
    with pytest.raises(UsageError, match=missing):
        RowCycle.from_born_haber(
            {"formation_enthalpy": "f"}, n_cation=1, n_anion=1, anion_charge=1, label="NaCl"
        )


def test_build_constraints_uses_the_cycle_coefficients_of_mgcl2() -> None:
    # MgCl2: ΔfH = ΔatH(Mg) + IE1+IE2(Mg) + 2ΔatH(Cl) + 2ΔegH(Cl) − ΔH_L (common practice,
    # no source); a key used twice in one row has its coefficients added.
    row = RowCycle.from_born_haber(
        {
            "formation_enthalpy": "f",
            "lattice_enthalpy": "L",
            "atomization_metal": "aM",
            "ionization": "ie",
            "atomization_nonmetal": "aX",
            "electron_gain_1": "eg",
        },
        n_cation=1,
        n_anion=2,
        anion_charge=1,
    )
    twice = RowCycle((("f", 1.0), ("f", 2.0), ("L", 0.0)))
    keys, c = build_cycle_constraints([row, twice])
    dense = c.toarray()
    assert dict(zip(keys, dense[0], strict=True)) == {
        "f": -1.0,
        "L": -1.0,
        "aM": 1.0,
        "ie": 1.0,
        "aX": 2.0,
        "eg": 2.0,
    }
    assert dense[1, keys.index("f")] == 3.0 and dense[1, keys.index("L")] == 0.0


# --- invariants -----------------------------------------------------------------------------


@st.composite
def problems(draw: st.DrawFn) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    n_rows = draw(st.integers(1, 12))
    n_shared = draw(st.integers(0, 6))
    seed = draw(st.integers(0, 2**32 - 1))
    rng = np.random.default_rng(seed)
    # each row: one or two private inputs, and a random subset of shared inputs
    n_priv = rng.integers(1, 3, n_rows)
    n = int(n_priv.sum()) + n_shared
    c = np.zeros((n_rows, n))
    first_shared = n - n_shared
    col = 0
    for i in range(n_rows):
        for _ in range(n_priv[i]):
            c[i, col] = rng.choice([-1.0, 1.0, 2.0, 3.0])
            col += 1
        if n_shared:
            use = rng.random(n_shared) < 0.6
            c[i, first_shared:][use] = rng.choice([-2.0, -1.0, 1.0, 2.0, 0.5], use.sum())
    m = rng.normal(0.0, 300.0, n)
    s = rng.uniform(0.5, 20.0, n)
    return c, m, s, rng.random(n) < 0.15


@settings(max_examples=150, deadline=None)
@given(problems())
def test_adjusted_values_satisfy_the_closures(
    prob: tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray],
) -> None:
    c, m, s, unmeasured = prob
    m = np.where(unmeasured, np.nan, m)
    keys = list(range(c.shape[1]))
    r = reconcile(keys, m, s, c, max_culprits=2)
    x = r.adjusted
    ok = np.isfinite(x)
    # rows whose every input has a value must close
    rows = np.all(ok | (c == 0), axis=1)
    resid = np.abs(c[rows][:, ok] @ x[ok])
    scale = np.abs(c[rows][:, ok]) @ np.abs(x[ok]) + 1.0
    assert np.all(resid <= 1e-8 * scale)
    # the global χ² is the weighted sum of squared adjustments of the measured inputs
    meas = ~r.free
    assert r.chi2 == pytest.approx(
        float(np.sum((r.adjustment[meas] / s[meas]) ** 2)), rel=1e-7, abs=1e-9
    )
    assert np.all((r.redundancy >= 0) & (r.redundancy <= 1))


@settings(max_examples=100, deadline=None)
@given(problems())
def test_woodbury_and_dense_solutions_agree(
    prob: tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray],
) -> None:
    c, m, s, _ = prob
    a = sp.csr_array(c)
    var = s * s
    r = a @ m
    lam_w, d_w, _ = _woodbury(a, var, r)
    lam_d, d_d, _ = _dense(a, var, r)
    assert lam_w == pytest.approx(lam_d, rel=1e-6, abs=1e-9)
    assert d_w == pytest.approx(d_d, rel=1e-6, abs=1e-9)
