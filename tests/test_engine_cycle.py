"""The pure cycle engine: solving, closing, uncertainty, and its invariants."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from sheetcycle.engine.born_haber import TERMS, CycleStatus, CycleTerms, close_cycles
from sheetcycle.engine.conventions import (
    CellIssue,
    electron_gain_from_column,
    lattice_from_column,
    positive_quantity,
)
from sheetcycle.engine.diagnose import RATIO_SLIPS, ratio_slips, residual_slips

# NaCl terms in kJ/mol, from memory of the NIST-JANAF / CODATA key values that handbook
# Born-Haber tables use: ΔfH(NaCl,s) −411.2, ΔatH(Na) 107.3, IE1(Na) 495.8, ΔatH(Cl) 121.3,
# EA(Cl) 348.6. The lattice enthalpy these give, 787 kJ/mol, is the handbook cycle value
# (CRC Handbook of Chemistry and Physics, "Lattice energies" table, from memory).
NACL = dict(
    formation_enthalpy=-411.2,
    atomization_metal=107.3,
    ionization=495.8,
    atomization_nonmetal=121.3,
    electron_gain_1=-348.6,
)


def one_row(
    values: dict[str, float],
    sigmas: dict[str, float] | None = None,
    a: float = 1,
    b: float = 1,
    q: float = 1,
) -> CycleTerms:
    return CycleTerms.from_columns(
        n_cation=[a],
        n_anion=[b],
        anion_charge=[q],
        values={k: [v] for k, v in values.items()},
        sigmas={k: [v] for k, v in (sigmas or {}).items()},
    )


def test_nacl_lattice_enthalpy_matches_handbook_cycle_value() -> None:
    sol = close_cycles(one_row(NACL))
    assert sol.status[0] == CycleStatus.SOLVED
    assert TERMS[sol.solved[0]] == "lattice_enthalpy"
    assert sol.value[0] == pytest.approx(787.0, abs=1.0)


def test_mgcl2_uses_two_chlorines_and_two_ionizations() -> None:
    # MgCl2, from memory (NIST-JANAF key values): ΔfH −641.3, ΔatH(Mg) 147.1,
    # IE1+IE2(Mg) 737.7+1450.7, ΔatH(Cl) 121.3, EA(Cl) 348.6; handbook cycle value 2526
    # (CRC "Lattice energies", from memory).
    vals = dict(
        formation_enthalpy=-641.3,
        atomization_metal=147.1,
        ionization=737.7 + 1450.7,
        atomization_nonmetal=121.3,
        electron_gain_1=-348.6,
    )
    sol = close_cycles(one_row(vals, b=2))
    assert sol.value[0] == pytest.approx(2526, abs=5)


def test_oxide_needs_second_electron_gain() -> None:
    vals = dict(
        formation_enthalpy=-601.6,
        atomization_metal=147.1,
        ionization=2188.4,
        atomization_nonmetal=249.2,
        electron_gain_1=-141.0,
    )
    sol = close_cycles(one_row(vals, q=2))
    assert sol.status[0] == CycleStatus.UNDERDETERMINED
    assert list(np.array(TERMS)[sol.missing[0]]) == ["lattice_enthalpy", "electron_gain_higher"]
    # q = 1 for the same numbers: the higher gain is not needed at all
    assert close_cycles(one_row(vals, q=1)).status[0] == CycleStatus.SOLVED


def test_missing_is_never_zero() -> None:
    vals = dict(NACL)
    del vals["ionization"]
    sol = close_cycles(one_row(vals))
    assert sol.status[0] == CycleStatus.UNDERDETERMINED
    assert math.isnan(sol.value[0])


def test_closure_residual_and_verdict() -> None:
    vals = dict(NACL, lattice_enthalpy=700.0)
    sol = close_cycles(one_row(vals), tolerance=10.0)
    assert sol.status[0] == CycleStatus.CLOSED
    assert sol.residual[0] == pytest.approx(87.0, abs=1.0)
    assert sol.exceeds[0]
    ok = close_cycles(one_row(dict(NACL, lattice_enthalpy=786.0)), tolerance=10.0)
    assert not ok.exceeds[0]


def test_reference_value_used_n_times_contributes_n_sigma() -> None:
    # Al2O3: ΔatH(Al) enters twice. Its σ of 4 kJ/mol must add 2·4 = 8 (linear), while the
    # two independent terms add in quadrature (common practice, no source: GUM rules for a
    # fully correlated input used twice).
    vals = dict(
        formation_enthalpy=-1675.7,
        atomization_metal=330.0,
        ionization=5139.1,
        atomization_nonmetal=249.2,
        electron_gain_1=-141.0,
        electron_gain_higher=798.0,
    )
    sol = close_cycles(
        one_row(vals, {"atomization_metal": 4.0, "formation_enthalpy": 1.3}, a=2, b=3, q=2)
    )
    assert sol.sigma[0] == pytest.approx(math.hypot(2 * 4.0, 1.3))
    assert not sol.sigma_complete[0]  # other terms have no σ: the budget says so


def test_bad_tolerance_is_refused() -> None:
    with pytest.raises(ValueError, match="tolerance"):
        close_cycles(one_row(NACL), tolerance=-1)


finite = st.floats(min_value=-5000, max_value=5000, allow_nan=False)


@settings(max_examples=200, deadline=None)
@given(
    values=st.lists(finite, min_size=len(TERMS), max_size=len(TERMS)),
    a=st.integers(1, 3),
    b=st.integers(1, 3),
    q=st.integers(1, 2),
    drop=st.integers(0, len(TERMS) - 1),
)
def test_solving_any_term_then_closing_gives_zero_residual(values, a, b, q, drop) -> None:
    if TERMS[drop] == "electron_gain_higher" and q < 2:
        drop = 0
    known = dict(zip(TERMS, values, strict=True))
    del known[TERMS[drop]]
    sol = close_cycles(one_row(known, a=a, b=b, q=q))
    assert sol.status[0] == CycleStatus.SOLVED and sol.solved[0] == drop
    again = close_cycles(one_row(dict(zip(TERMS, sol.completed[0], strict=True)), a=a, b=b, q=q))
    assert again.status[0] == CycleStatus.CLOSED
    assert abs(again.residual[0]) <= 1e-9 * max(1.0, np.abs(sol.completed[0]).max())


@settings(max_examples=100, deadline=None)
@given(perm=st.permutations(list(range(len(TERMS) - 1))))
def test_order_of_terms_does_not_matter(perm) -> None:
    names = [n for n in TERMS if n != "electron_gain_higher"]
    base = dict(NACL, lattice_enthalpy=787.0)
    shuffled = {names[i]: base[names[i]] for i in perm}
    assert close_cycles(one_row(shuffled)).residual[0] == pytest.approx(
        close_cycles(one_row(base)).residual[0]
    )


def test_lattice_convention_from_signs_and_header() -> None:
    conv = lattice_from_column(np.array([-787.0, -3850.0, 700.0]), None)
    assert conv.convention == "formation" and conv.mixed
    assert list(conv.issues) == [CellIssue.OK, CellIssue.OK, CellIssue.MIXED_SIGN]
    assert list(conv.values) == [787.0, 3850.0, 700.0]
    stated = lattice_from_column(np.array([-787.0, 700.0]), "formation")
    assert stated.issues[1] == CellIssue.IMPOSSIBLE and math.isnan(stated.values[1])


def test_electron_affinity_sign_conventions() -> None:
    released = electron_gain_from_column(np.array([348.6, 328.2]), "released", 1)
    assert list(released.values) == [-348.6, -328.2]
    # a column headed 'EA' holding −349: the signs win, and the contradiction is reported
    gain = electron_gain_from_column(np.array([-348.6, -328.2]), "released", 1)
    assert gain.convention == "gain" and gain.contradicts_header
    assert list(gain.values) == [-348.6, -328.2]
    second = electron_gain_from_column(np.array([-798.0]), "released", 2)
    assert second.values[0] == 798.0


def test_negative_ionization_energy_is_impossible() -> None:
    vals, issues = positive_quantity(np.array([495.8, -5.1, np.nan]))
    assert math.isnan(vals[1]) and issues[1] == CellIssue.IMPOSSIBLE and issues[0] == 0


def test_ratio_slips_recognise_ev_and_kcal() -> None:
    # 1 eV = 96.485 kJ/mol (CODATA 2018); 1 kcal = 4.184 kJ (thermochemical calorie)
    idx = ratio_slips(
        np.array([5.139, 495.8 / 4.184, 495.8, 242.6]), np.array([495.8, 495.8, 495.8, 121.3])
    )
    names = [RATIO_SLIPS[i][0] if i >= 0 else None for i in idx]
    assert names == ["eV-as-kJ", "kcal-as-kJ", None, "full-bond"]


def test_residual_slips_name_the_left_out_term() -> None:
    _names, match = residual_slips(
        np.array([1450.7, 3.0, 500.0]), 10.0, {"ie_last": np.array([1450.7, 1450.7, 1450.7])}
    )
    assert list(match) == [0, -1, -1]
