"""Hess's law against published combustion, thermite and neutralization enthalpies.

Formation enthalpies come from the built-in table (sheetcycle/data/formation.csv: CODATA
Key Values 1989, the NBS tables 1982, NIST-JANAF 1998, the NIST WebBook; each row names its
source). The reaction enthalpies they are checked against are published independently.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from sheetcycle.chem.formula import parse_formula
from sheetcycle.chem.reactions import Reaction, parse_reaction
from sheetcycle.data.thermo import formation_enthalpy, formation_table
from sheetcycle.engine.cautions import REACTION, caution_for, caution_mask
from sheetcycle.engine.hess import (
    coefficient_matrix,
    reaction_enthalpy,
    solve_formation,
    standard_state_element,
)


def table_inputs(reactions: list[Reaction]) -> tuple:
    cm = coefficient_matrix(reactions)
    dfh, sig, std = [], [], []
    table = formation_table()
    for sp in cm.species:
        std.append(standard_state_element(sp.formula, sp.state))
        ref = table.get(sp.key)
        dfh.append(math.nan if ref is None else ref.value)
        sig.append(math.nan if ref is None else ref.uncertainty)
    return cm, np.array(dfh), np.array(sig), np.array(std)


def enthalpies(texts: list[str]) -> tuple:
    reactions = [parse_reaction(t) for t in texts]
    cm, dfh, sig, std = table_inputs(reactions)
    return reaction_enthalpy(cm.nu, dfh, sig, standard=std), cm


# (equation, published ΔrH° at 298.15 K in kJ/mol, tolerance, source)
PUBLISHED = [
    # ΔcH°(CH4, g) = −890.3 kJ/mol (NBS-based tables) and −890.6 (ATcT); from memory.
    ("CH4(g) + 2 O2(g) -> CO2(g) + 2 H2O(l)", -890.3, 0.6),
    # ΔcH°(C3H8, g) = −2219.2 ± 0.5 kJ/mol, NIST WebBook (Pittam & Pilcher 1972); from memory.
    ("C3H8(g) + 5 O2(g) -> 3 CO2(g) + 4 H2O(l)", -2219.2, 0.8),
    # ΔcH°(graphite) = ΔfH°(CO2, g) = −393.51 ± 0.13, CODATA Key Values 1989; from memory.
    ("C(graphite) + O2(g) -> CO2(g)", -393.51, 0.05),
    # ΔfH°(H2O, l) = −285.830 ± 0.040, CODATA Key Values 1989; from memory.
    ("H2(g) + 1/2 O2(g) -> H2O(l)", -285.83, 0.05),
    # Thermite, 2 Al + Fe2O3: −851.5 kJ/mol from NBS ΔfH of Al2O3 (−1675.7) and Fe2O3
    # (−824.2), as quoted throughout the thermite literature; from memory.
    ("2 Al(s) + Fe2O3(s) -> Al2O3(s) + 2 Fe(s)", -851.5, 0.3),
    # Enthalpy of neutralization of a strong acid by a strong base at infinite dilution,
    # −55.8 kJ/mol (e.g. Hepler & Woolley in Water, a Comprehensive Treatise, 1973); from memory.
    ("H+(aq) + OH-(aq) -> H2O(l)", -55.8, 0.2),
    # ΔcH°(CO, g) = −283.0 kJ/mol (CRC Handbook, heat of combustion table); from memory.
    ("CO(g) + ½ O2(g) -> CO2(g)", -283.0, 0.2),
    # Calcination of calcite, +178 kJ/mol (NBS-based value, widely quoted); from memory.
    ("CaCO3(s) -> CaO(s) + CO2(g)", 178.5, 0.6),
]


@pytest.mark.parametrize(("text", "published", "tol"), PUBLISHED)
def test_against_published_reaction_enthalpies(text: str, published: float, tol: float) -> None:
    result, _ = enthalpies([text])
    assert parse_reaction(text).is_balanced
    assert result.value[0] == pytest.approx(published, abs=tol)
    assert result.sigma[0] >= 0
    assert not result.missing.any()


def test_all_at_once_matches_one_at_a_time() -> None:
    texts = [t for t, _, _ in PUBLISHED]
    together, _ = enthalpies(texts)
    for i, t in enumerate(texts):
        alone, _ = enthalpies([t])
        assert together.value[i] == pytest.approx(alone.value[0], abs=1e-9)


def test_uncertainty_of_the_thermite_is_that_of_the_two_oxides() -> None:
    # Al2O3 ±1.3 (CODATA); Fe2O3 has no uncertainty in the NBS tables: the budget is
    # incomplete and says so; the known part is 1.3.
    result, _ = enthalpies(["2 Al(s) + Fe2O3(s) -> Al2O3(s) + 2 Fe(s)"])
    assert result.sigma[0] == pytest.approx(1.3)
    assert not result.sigma_complete[0]


def test_species_on_both_sides_counts_once_with_its_net_coefficient() -> None:
    plain, _ = enthalpies(["CH4(g) + 2 O2(g) -> CO2(g) + 2 H2O(l)"])
    padded, _ = enthalpies(["CH4(g) + 2 O2(g) + 5 H2O(l) -> CO2(g) + 7 H2O(l)"])
    assert padded.value[0] == pytest.approx(plain.value[0])
    # CODATA σ: CO2 0.13, H2O(l) 0.040 used twice (2·0.04), CH4 0.34 (JANAF): quadrature
    expected = math.sqrt(0.13**2 + (2 * 0.04) ** 2 + 0.34**2)
    assert plain.sigma[0] == pytest.approx(expected)
    assert padded.sigma[0] == pytest.approx(expected)


def test_missing_species_gives_nan_and_names_it() -> None:
    result, cm = enthalpies(
        ["CH4(g) + 2 O2(g) -> CO2(g) + 2 H2O(l)", "C2H6(g) + 7/2 O2(g) -> 2 CO2(g) + 3 H2O(l)"]
    )
    assert math.isfinite(result.value[0])
    assert math.isnan(result.value[1]) and math.isnan(result.sigma[1])
    names = [cm.keys[j] for j in np.nonzero(result.missing[1])[0]]
    assert names == ["C2H6(g)"]
    assert not result.missing[0].any()


def test_missing_is_nan_never_zero() -> None:
    nu = np.array([[-1.0, 1.0]])
    r = reaction_enthalpy(nu, [np.nan, -100.0], [1.0, 1.0])
    assert math.isnan(r.value[0])


def test_invalid_reaction_gets_no_value() -> None:
    texts = ["H2(g) + O2(g) -> H2O(l)", "H2(g) + 1/2 O2(g) -> H2O(l)"]
    reactions = [parse_reaction(t) for t in texts]
    cm, dfh, sig, std = table_inputs(reactions)
    valid = np.array([r.is_balanced for r in reactions])
    result = reaction_enthalpy(cm.nu, dfh, sig, standard=std, valid=valid)
    assert math.isnan(result.value[0])
    assert result.value[1] == pytest.approx(-285.83)


def test_standard_state_value_given_is_ignored_and_marked() -> None:
    nu = np.array([[-1.0, -0.5, 1.0]])
    r = reaction_enthalpy(nu, [0.0, 249.2, -285.83], [0, 0, 0.04], standard=[True, True, False])
    assert r.value[0] == pytest.approx(-285.83)
    assert r.standard_nonzero[0].tolist() == [False, True, False]


@pytest.mark.parametrize(
    ("formula", "state", "expected"),
    [
        # Reference states of the elements at 298.15 K and 1 bar (NBS tables 1982, CODATA
        # 1989; common practice, no source for the wording).
        ("O2", "g", True), ("N2", "g", True), ("H2", "g", True), ("Cl2", "g", True),
        ("F2", "g", True), ("Br2", "l", True), ("I2", "s", True), ("Hg", "l", True),
        ("C", "graphite", True), ("C", "s", True), ("S", "s", True), ("S8", "s", True),
        ("P", "s, white", True), ("P", "white", True), ("Fe", "s", True), ("Na", "s", True),
        ("Al", "cr", True), ("Ar", "g", True), ("O2", None, True), ("Fe", None, True),
        ("Na", "g", False), ("O", "g", False), ("Cl", "g", False), ("O3", "g", False),
        ("C", "diamond", False), ("P", "s, red", False), ("S", "monoclinic", False),
        ("Br2", "g", False), ("I2", "g", False), ("Hg", "g", False), ("H2", "l", False),
        ("Na+", "aq", False), ("H2O", "l", False), ("Fe", "l", False), ("O", None, False),
        ("Cl2", "aq", False), ("Fe", "aq", False), ("I", "s", False),
    ],
)  # fmt: skip
def test_standard_state_element(formula: str, state: str | None, expected: bool) -> None:
    assert standard_state_element(parse_formula(formula), state) is expected


def test_formation_from_a_measured_combustion_enthalpy() -> None:
    # ΔcH°(CH4, g) = −890.6 ± 0.4 kJ/mol (ATcT, from memory) gives back ΔfH°(CH4) within the
    # scatter of the tables: JANAF −74.87, NBS −74.81, ATcT −74.5 (from memory).
    r = parse_reaction("CH4(g) + 2 O2(g) -> CO2(g) + 2 H2O(l)")
    cm, dfh, sig, std = table_inputs([r])
    j = cm.keys.index("CH4(g)")
    dfh[j] = np.nan
    sol = solve_formation(cm.nu, dfh, sig, [-890.6], [0.4], standard=std)
    assert sol.index[0] == j
    assert sol.value[0] == pytest.approx(-74.6, abs=0.5)
    assert sol.sigma[0] == pytest.approx(math.sqrt(0.13**2 + 0.08**2 + 0.4**2))
    two_missing = dfh.copy()
    two_missing[cm.keys.index("CO2(g)")] = np.nan
    none = solve_formation(cm.nu, two_missing, sig, [-890.6], standard=std)
    assert none.index[0] == -1 and math.isnan(none.value[0]) and none.n_missing[0] == 2


BALANCED = [t for t, _, _ in PUBLISHED] + [
    "N2(g) + 3 H2(g) -> 2 NH3(g)",
    "NaCl(s) -> Na+(aq) + Cl-(aq)",
    "Ca2+(aq) + CO3 2-(aq) -> CaCO3(s)",
    "2 SO2(g) + O2(g) -> 2 SO3(g)",
]


@settings(max_examples=150, deadline=None)
@given(
    st.lists(st.sampled_from(BALANCED), min_size=1, max_size=6),
    st.lists(st.floats(-3000, 3000, allow_nan=False), min_size=40, max_size=40),
)
def test_reversed_equation_gives_minus_the_enthalpy(texts: list[str], values: list[float]) -> None:
    forward = [parse_reaction(t) for t in texts]
    assert all(r.is_balanced for r in forward)
    cm = coefficient_matrix(forward + [r.reversed() for r in forward])
    std = [standard_state_element(s.formula, s.state) for s in cm.species]
    dfh = np.array(values[: len(cm.keys)])
    res = reaction_enthalpy(cm.nu, dfh, np.ones(len(cm.keys)), standard=std)
    n = len(forward)
    np.testing.assert_allclose(res.value[n:], -res.value[:n], atol=1e-9)
    np.testing.assert_allclose(res.sigma[n:], res.sigma[:n])


def value_of(formula: str, state: str | None = None) -> float:
    ref = formation_enthalpy(formula, state)
    assert ref is not None, formula
    return ref.value


def test_the_built_in_table_is_keyed_by_formula_and_state() -> None:
    assert value_of("H2O(l)") == pytest.approx(-285.83)
    assert value_of("H₂O", "g") == pytest.approx(-241.826)
    assert value_of("SO42-(aq)") == pytest.approx(-909.34)
    assert value_of("NaCl", "cr") == pytest.approx(-411.153)
    assert formation_enthalpy("C2H6(g)") is None
    for ref in formation_table().values():
        assert ref.source


# -- cautions for reactions (screening thresholds of our own; docs/cautions.md) --------


def test_thermite_gets_a_caution_per_mol_and_per_kg() -> None:
    # Molar masses from IUPAC standard atomic weights (Al 26.982, Fe 55.845, O 15.999).
    mass = 2 * 26.982 + (2 * 55.845 + 3 * 15.999)
    text = caution_for(-851.5, mass, REACTION)
    assert text == (
        "strongly exothermic reaction: releases about 852 kJ per mol (3990 kJ per kg of "
        "reactants); this is an estimate from tabulated data; calorimetry and a hazard "
        "assessment come before any scale-up; local codes and licensed practice govern."
    )


def test_mild_or_endothermic_reactions_get_no_caution() -> None:
    # Calcination (+178.5) and a mildly exothermic step under both thresholds.
    assert caution_for(178.5, 100.09, REACTION) is None
    assert caution_for(-20.0, 200.0, REACTION) is None
    assert caution_for(float("nan"), 100.0, REACTION) is None
    # Per-kg trigger alone: −90 kJ/mol over 100 g of reactants is −900 kJ/kg.
    assert caution_mask([-90.0, -90.0], [100.0, 1000.0], REACTION).tolist() == [True, False]
