"""Solution enthalpies: the identity, a handbook table, hydration scales.

Handbook values (kJ/mol, 298.15 K, infinite dilution): CRC Handbook of Chemistry and
Physics, "Enthalpy of solution of electrolytes" table; from memory. Lattice enthalpies:
CRC Handbook, "Lattice energies" table (Born-Haber values at 298 K); from memory.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from sheetcycle.chem.reactions import parse_reaction
from sheetcycle.data.thermo import formation_table, hydration_enthalpy, hydration_table
from sheetcycle.engine.cautions import SOLUTION, caution_for, caution_mask
from sheetcycle.engine.hess import coefficient_matrix, reaction_enthalpy
from sheetcycle.engine.solution import (
    CONVENTIONAL,
    MARCUS,
    SOLUTION_TERMS,
    TISSANDIER,
    SolutionStatus,
    check_scales,
    convert_hydration,
    hydration_sum,
    solve_solution,
)

# salt: (ions with counts, CRC ΔsolH at infinite dilution, CRC lattice enthalpy)
SALTS = {
    "NaCl": ({"Na+": 1, "Cl-": 1}, 3.88, 787.0),
    "KCl": ({"K+": 1, "Cl-": 1}, 17.22, 715.0),
    "LiCl": ({"Li+": 1, "Cl-": 1}, -37.03, 853.0),
    "NaOH": ({"Na+": 1, "OH-": 1}, -44.51, 887.0),
    "KNO3": ({"K+": 1, "NO3-": 1}, 34.89, 685.0),
    "CaCl2": ({"Ca2+": 1, "Cl-": 2}, -81.3, 2258.0),
}


def salt_hydration(ions: dict[str, int], h_plus: float | None = None) -> tuple[float, float]:
    total, var = 0.0, 0.0
    for ion, n in ions.items():
        ref = hydration_enthalpy(ion, h_plus)
        assert ref is not None, ion
        total += n * ref.value
        var += (n * ref.uncertainty) ** 2
    return total, math.sqrt(var)


@pytest.mark.parametrize("salt", list(SALTS))
def test_lattice_plus_hydration_against_the_handbook(salt: str) -> None:
    ions, handbook, lattice = SALTS[salt]
    h, h_sigma = salt_hydration(ions)
    res = solve_solution(np.nan, lattice, h, hydration_sigma=h_sigma)
    assert res.status[0] == SolutionStatus.SOLVED
    assert res.solved[0] == SOLUTION_TERMS.index("solution_enthalpy")
    # Single-ion hydration data scatter by several kJ/mol per ion and ΔsolH is a small
    # difference of two large numbers: agreement within 12 kJ/mol is what the data allow
    # (common practice, no source).
    assert res.term("solution_enthalpy")[0] == pytest.approx(handbook, abs=12.0)


@pytest.mark.parametrize("salt", list(SALTS))
def test_hess_route_from_formation_tables_against_the_handbook(salt: str) -> None:
    # ΔsolH = Σ ΔfH(ions, aq) − ΔfH(salt, s): CODATA 1989 ions, NBS 1982 salts (the rows of
    # formation.csv); within 1.5 kJ/mol of the CRC table (mixing two compilations).
    ions, handbook, _ = SALTS[salt]
    products = " + ".join(f"{n} {ion}(aq)" for ion, n in ions.items())
    r = parse_reaction(f"{salt}(s) -> {products}")
    assert r.is_balanced
    cm = coefficient_matrix([r])
    table = formation_table()
    dfh = [table[k].value for k in cm.keys]
    res = reaction_enthalpy(cm.nu, dfh)
    assert res.value[0] == pytest.approx(handbook, abs=1.5)


def test_the_identity_on_exact_numbers() -> None:
    # ΔsolH = ΔH_L + Σ hyd, each of the three solved from the other two.
    sol, lat, hyd = 3.88, 787.0, -783.12
    r = solve_solution([np.nan, sol, sol, sol], [lat, np.nan, lat, lat], [hyd, hyd, np.nan, hyd])
    assert r.status.tolist() == [1, 1, 1, 2]
    assert r.solved.tolist() == [0, 1, 2, -1]
    assert r.completed[0, 0] == pytest.approx(sol)
    assert r.completed[1, 1] == pytest.approx(lat)
    assert r.completed[2, 2] == pytest.approx(hyd)
    assert r.residual[3] == pytest.approx(0.0, abs=1e-9)
    assert np.isnan(r.residual[:3]).all()


def test_two_missing_is_underdetermined_and_sigmas_combine() -> None:
    r = solve_solution(
        [np.nan, np.nan], [787.0, 787.0], [np.nan, -783.0],
        lattice_sigma=[2.0, 2.0], hydration_sigma=[np.nan, 3.0],
    )  # fmt: skip
    assert r.status.tolist() == [SolutionStatus.UNDERDETERMINED, SolutionStatus.SOLVED]
    assert math.isnan(r.completed[0, 0])
    assert r.term_sigma("solution_enthalpy")[1] == pytest.approx(math.sqrt(13.0))
    assert r.sigma_complete.tolist() == [False, True]


def test_hydration_sum_uses_one_ion_value_twice_as_correlated() -> None:
    # CaCl2: Ca2+ once, Cl- twice: σ = sqrt(σCa² + (2 σCl)²).
    ca = hydration_enthalpy("Ca2+")
    cl = hydration_enthalpy("Cl-")
    assert ca is not None and cl is not None
    hs = hydration_sum([[1, 2], [1, 0]], [ca.value, cl.value], [ca.uncertainty, cl.uncertainty],
                       charges=[2, -1])  # fmt: skip
    assert hs.value[0] == pytest.approx(ca.value + 2 * cl.value)
    assert hs.sigma[0] == pytest.approx(math.hypot(ca.uncertainty, 2 * cl.uncertainty))
    assert hs.scale_dependent.tolist() == [False, True]
    missing = hydration_sum([[1, 1]], [np.nan, -367.0])
    assert math.isnan(missing.value[0]) and missing.missing[0].tolist() == [True, False]


# ΔfH° of gaseous ions (NBS tables 1982, Wagman et al.; from memory), for the conventional
# scale: ΔhydH_conv(X) = ΔfH(X, aq) − ΔfH(X, g) + z·ΔfH(H+, g).
GAS_IONS = {"H+": 1536.202, "Li+": 685.783, "Na+": 609.358, "K+": 514.26,
            "Cl-": -233.13, "Br-": -219.07}  # fmt: skip


@pytest.mark.parametrize("ion", ["Li+", "Na+", "K+", "Cl-", "Br-"])
def test_table_on_the_conventional_scale_matches_formation_data(ion: str) -> None:
    # A check of the table's scale: converted with ΔhydH(H+) = −1103 kJ/mol to the
    # conventional scale, Marcus's values must agree with the conventional values that
    # follow from formation enthalpies of the aqueous (CODATA) and gaseous (NBS) ions.
    z = 1 if ion.endswith("+") else -1
    aq = formation_table()[f"{ion}(aq)"].value
    conventional = aq - GAS_IONS[ion] + z * GAS_IONS["H+"]
    ref = hydration_enthalpy(ion, CONVENTIONAL.h_plus)
    assert ref is not None
    assert ref.value == pytest.approx(conventional, abs=4.0)


def test_conversion_direction() -> None:
    # Conventional = absolute − z·ΔhydH(H+): Na+ −416 on Marcus's scale is +687
    # conventionally; Cl− −367 is −1470.
    assert convert_hydration(-416.0, 1, MARCUS.h_plus, 0.0) == pytest.approx(687.0)
    assert convert_hydration(-367.0, -1, MARCUS.h_plus, 0.0) == pytest.approx(-1470.0)
    to_t = convert_hydration([-416.0, -367.0], [1, -1], MARCUS.h_plus, TISSANDIER.h_plus)
    np.testing.assert_allclose(to_t, [-463.1, -319.9])
    assert hydration_enthalpy("H+", 0.0).value == pytest.approx(0.0)  # type: ignore[union-attr]


@settings(max_examples=200, deadline=None)
@given(
    st.floats(-5000, 5000, allow_nan=False),
    st.integers(-3, 3),
    st.floats(-1200, 0, allow_nan=False),
    st.floats(-1200, 0, allow_nan=False),
)
def test_scale_conversion_round_trips(v: float, z: int, h1: float, h2: float) -> None:
    there = convert_hydration(v, z, h1, h2)
    back = convert_hydration(there, z, h2, h1)
    assert float(back) == pytest.approx(v, abs=1e-9)


@settings(max_examples=200, deadline=None)
@given(
    st.sampled_from([(1, -1), (2, -1), (3, -1), (1, -2), (2, -2), (3, -2)]),
    st.floats(-5000, 0, allow_nan=False),
    st.floats(-5000, 0, allow_nan=False),
    st.floats(-1200, 0, allow_nan=False),
)
def test_sums_over_neutral_salts_do_not_depend_on_the_scale(
    charges: tuple[int, int], vc: float, va: float, h2: float
) -> None:
    zc, za = charges
    g = math.gcd(zc, -za)
    a, b = -za // g, zc // g  # M_a X_b is neutral
    on_marcus = hydration_sum([[a, b]], [vc, va]).value[0]
    moved = convert_hydration([vc, va], [zc, za], MARCUS.h_plus, h2)
    on_other = hydration_sum([[a, b]], moved, charges=[zc, za])
    assert on_other.value[0] == pytest.approx(on_marcus, abs=1e-6)
    assert not on_other.scale_dependent[0]


@settings(max_examples=200, deadline=None)
@given(
    st.floats(-200, 200, allow_nan=False),
    st.floats(500, 4000, allow_nan=False),
    st.integers(0, 2),
    st.floats(0, 10, allow_nan=False),
)
def test_solve_any_one_then_recompute(sol: float, lat: float, which: int, sigma: float) -> None:
    hyd = sol - lat
    terms = [sol, lat, hyd]
    given_terms = list(terms)
    given_terms[which] = math.nan
    r = solve_solution(*given_terms, solution_sigma=sigma, lattice_sigma=sigma,
                       hydration_sigma=sigma)  # fmt: skip
    assert r.solved[0] == which
    assert r.completed[0, which] == pytest.approx(terms[which], abs=1e-6)
    assert r.sigmas[0, which] == pytest.approx(math.sqrt(2) * sigma)
    closed = solve_solution(*r.completed[0])
    assert closed.status[0] == SolutionStatus.CLOSED
    assert closed.residual[0] == pytest.approx(0.0, abs=1e-6)


def test_mixed_scales_are_reported() -> None:
    check = check_scales({"ΔhydH cation": MARCUS, "ΔhydH anion": TISSANDIER, "notes": None})
    assert check.mixed
    assert check.scales == {-1103.0: ("ΔhydH cation",), -1150.1: ("ΔhydH anion",)}
    assert check.undeclared == ("notes",)
    assert check.message is not None and check.message.startswith(
        "hydration enthalpies on different scales: ΔhydH cation on the Marcus, "
        "ΔhydH(H+) = -1103 kJ/mol scale; ΔhydH anion on the Tissandier, "
        "ΔhydH(H+) = -1150.1 kJ/mol scale."
    )
    same = check_scales({"a": 0.0, "b": CONVENTIONAL})
    assert not same.mixed and same.message is None
    partly = check_scales({"a": -1103.0, "b": None})
    assert not partly.mixed
    assert partly.message == (
        "hydration column(s) b do not state their scale; read as the "
        "ΔhydH(H+) = -1103 kJ/mol scale of the other column(s)"
    )


def test_built_in_table_covers_the_common_ions_with_sources() -> None:
    wanted = ["Li+", "Na+", "K+", "Rb+", "Cs+", "Mg2+", "Ca2+", "Sr2+", "Ba2+", "Al3+", "Zn2+",
              "Cu2+", "Fe2+", "Fe3+", "Ag+", "NH4+", "F-", "Cl-", "Br-", "I-", "OH-", "NO3-",
              "SO4 2-", "CO3 2-"]  # fmt: skip
    for ion in wanted:
        ref = hydration_enthalpy(ion)
        assert ref is not None, ion
        assert ref.value < 0 and ref.source
    assert all(e.h_plus == -1103.0 for e in hydration_table().values())
    assert hydration_enthalpy("SO42-") == hydration_enthalpy("SO4^{2-}")
    assert hydration_enthalpy("Pb2+") is None


# -- cautions for dissolution (screening thresholds of our own; docs/cautions.md) ------


def test_dissolution_cautions() -> None:
    # NaOH −44.51 and CaCl2 −81.3 (CRC, from memory) pass the −40 kJ/mol threshold;
    # NaCl +3.88 and LiCl −37.03 do not. Molar masses from IUPAC atomic weights.
    assert caution_mask([-44.51, -81.3, 3.88, -37.03], [39.997, 110.98, 58.44, 42.39],
                        SOLUTION).tolist() == [True, True, False, False]  # fmt: skip
    text = caution_for(-44.51, 39.997, SOLUTION)
    assert text == (
        "strongly exothermic dissolution: releases about 44.5 kJ per mol (1110 kJ per kg of "
        "salt); this is an estimate from tabulated data; calorimetry and a hazard assessment "
        "come before any scale-up; local codes and licensed practice govern."
    )
    unknown_mass = caution_for(-81.3, float("nan"), SOLUTION)
    assert unknown_mass is not None and "(" not in unknown_mass
