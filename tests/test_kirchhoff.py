"""Kirchhoff's law and Shomate polynomials against NIST-JANAF tables.

Coefficients: sheetcycle/data/shomate.csv (NIST Chemistry WebBook Shomate sets; N2 read
from the WebBook page, the others from memory; every row names its source). Worked values:
NIST-JANAF Thermochemical Tables, 4th ed. (Chase 1998), as printed in the WebBook's "View
table" pages; from memory.
"""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from sheetcycle.data.thermo import shomate_sets, shomate_table
from sheetcycle.engine.kirchhoff import (
    ShomateTable,
    delta_cp,
    delta_h_at,
    delta_h_constant_cp,
    shomate_cp,
    shomate_h_minus_h298,
)

# species: {T: (Cp° J/(mol·K), H° − H°298 kJ/mol)}, NIST-JANAF (Chase 1998); from memory.
JANAF: dict[str, dict[float, tuple[float, float]]] = {
    "N2(g)": {500: (29.580, 5.911), 1000: (32.697, 21.463)},
    "O2(g)": {500: (31.091, 6.084), 1000: (34.870, 22.707)},
    "H2O(g)": {500: (35.226, 6.925), 1000: (41.268, 26.000)},
    "CO2(g)": {500: (44.627, 8.305), 1000: (54.308, 33.397)},
    "H2(g)": {500: (29.260, 5.883), 1000: (30.205, 20.680)},
    "CH4(g)": {500: (46.342, 8.200), 1000: (71.795, 38.179)},
}


def one(species: str, T: float) -> tuple[float, float]:
    sets = [s for s in shomate_sets(species) if s.t_min <= T <= s.t_max]
    A, B, C, D, E, F, _G, H = sets[0].coefficients
    return float(shomate_cp(T, A, B, C, D, E)), float(shomate_h_minus_h298(T, A, B, C, D, E, F, H))


@pytest.mark.parametrize(("species", "T"), [(s, T) for s, rows in JANAF.items() for T in rows])
def test_shomate_against_janaf(species: str, T: float) -> None:
    cp_ref, h_ref = JANAF[species][T]
    cp, h = one(species, T)
    # The WebBook fits reproduce JANAF to a few hundredths (common practice, no source).
    assert cp == pytest.approx(cp_ref, abs=0.06)
    assert h == pytest.approx(h_ref, abs=0.02)


def test_table_class_agrees_with_the_scalar_functions() -> None:
    keys = list(JANAF)
    table = ShomateTable.from_sets([shomate_sets(k) for k in keys])
    h, oor = table.h_minus_h298([500.0, 1000.0])
    cp, _ = table.cp([500.0, 1000.0])
    assert not oor.any()
    for j, k in enumerate(keys):
        for i, T in enumerate([500.0, 1000.0]):
            c1, h1 = one(k, T)
            assert cp[i, j] == pytest.approx(c1)
            assert h[i, j] == pytest.approx(h1)


def test_coefficient_sets_join_up_at_their_boundaries() -> None:
    # Guards the table against a mistyped coefficient: adjacent sets of one species give
    # the same H° − H°298 (within 0.02 kJ/mol) and Cp (within 0.2 J/(mol·K)) at the boundary.
    for key, sets in shomate_table().items():
        for lo, hi in itertools.pairwise(sets):
            assert lo.t_max == hi.t_min, key
            T = lo.t_max
            a, b = lo.coefficients, hi.coefficients
            h_lo = shomate_h_minus_h298(T, *a[:6], a[7])
            h_hi = shomate_h_minus_h298(T, *b[:6], b[7])
            assert float(h_lo) == pytest.approx(float(h_hi), abs=0.02), key
            assert float(shomate_cp(T, *a[:5])) == pytest.approx(
                float(shomate_cp(T, *b[:5])), abs=0.2
            )


def test_water_vapour_formation_at_1000_k() -> None:
    # H2 + 1/2 O2 -> H2O(g): ΔfH°(298.15) = −241.826 (CODATA); JANAF gives ΔfH°(H2O, g,
    # 1000 K) = −247.857 kJ/mol (Chase 1998; from memory).
    table = ShomateTable.from_sets([shomate_sets("H2(g)"), shomate_sets("O2(g)"),
                                    shomate_sets("H2O(g)")])  # fmt: skip
    res = delta_h_at(1000.0, -241.826, [[-1.0, -0.5, 1.0]], table, sigma_ref=0.04)
    assert res.value[0] == pytest.approx(-247.857, abs=0.03)
    assert res.sigma[0] == pytest.approx(0.04)
    assert not res.out_of_range.any() and not res.missing.any()


def test_methane_combustion_at_1000_k() -> None:
    # CH4 + 2 O2 -> CO2 + 2 H2O(g). JANAF ΔfH° at 298.15 K: CH4 −74.873, CO2 −393.522,
    # H2O(g) −241.826; at 1000 K: CH4 −89.849, CO2 −394.623, H2O(g) −247.857 (Chase 1998;
    # from memory). O2 is 0 at every temperature.
    dh298 = -393.522 + 2 * -241.826 + 74.873
    dh1000 = -394.623 + 2 * -247.857 + 89.849
    keys = ["CH4(g)", "O2(g)", "CO2(g)", "H2O(g)"]
    table = ShomateTable.from_sets([shomate_sets(k) for k in keys])
    nu = np.array([[-1.0, -2.0, 1.0, 2.0], [1.0, 2.0, -1.0, -2.0]])
    res = delta_h_at([1000.0, 1000.0], [dh298, -dh298], nu, table)
    assert res.value[0] == pytest.approx(dh1000, abs=0.05)
    assert res.value[1] == pytest.approx(-dh1000, abs=0.05)


def test_out_of_range_is_marked_and_gives_no_value_unless_asked() -> None:
    # The WebBook's water-vapour set starts at 500 K: 400 K is outside it.
    table = ShomateTable.from_sets([shomate_sets("H2(g)"), shomate_sets("O2(g)"),
                                    shomate_sets("H2O(g)")])  # fmt: skip
    nu = [[-1.0, -0.5, 1.0]]
    res = delta_h_at(400.0, -241.826, nu, table)
    assert math.isnan(res.value[0])
    assert res.out_of_range[0].tolist() == [False, False, True]
    ext = delta_h_at(400.0, -241.826, nu, table, extrapolate=True)
    # JANAF ΔfH°(H2O, g, 400 K) = −242.846 (from memory); the extrapolated fit is close.
    assert ext.value[0] == pytest.approx(-242.846, abs=0.1)
    assert ext.out_of_range[0].tolist() == [False, False, True]
    # At 298.15 K itself H° − H°298 is 0 by definition: no evaluation, no mark.
    ref = delta_h_at(298.15, -241.826, nu, table)
    assert ref.value[0] == pytest.approx(-241.826) and not ref.out_of_range.any()


def test_species_without_coefficients_is_missing() -> None:
    table = ShomateTable.from_sets([shomate_sets("H2(g)"), ()])
    res = delta_h_at(600.0, -100.0, [[-1.0, 1.0]], table)
    assert math.isnan(res.value[0])
    assert res.missing[0].tolist() == [False, True]


def test_constant_cp_against_janaf_at_400_k() -> None:
    # Cp°(298.15 K), JANAF: H2O(g) 33.590, H2 28.836, O2 29.376 J/(mol·K); ΔfH°(H2O, g,
    # 400 K) = −242.846 kJ/mol (Chase 1998; from memory).
    dcp = delta_cp([[-1.0, -0.5, 1.0]], [28.836, 29.376, 33.590])
    assert dcp[0] == pytest.approx(-9.934)
    value, outside = delta_h_constant_cp(400.0, -241.826, dcp[0], t_min=298.0, t_max=500.0)
    assert float(value) == pytest.approx(-242.846, abs=0.02)
    assert not bool(outside)
    _, far = delta_h_constant_cp(900.0, -241.826, dcp[0], t_min=298.0, t_max=500.0)
    assert bool(far)
    assert math.isnan(delta_cp([[1.0, -1.0]], [np.nan, 29.0])[0])


@settings(max_examples=100, deadline=None)
@given(st.floats(500, 1200), st.floats(500, 1200), st.floats(-1000, 1000))
def test_there_and_back_again(t1: float, t2: float, dh: float) -> None:
    keys = ["CH4(g)", "O2(g)", "CO2(g)", "H2O(g)"]
    table = ShomateTable.from_sets([shomate_sets(k) for k in keys])
    nu = [[-1.0, -2.0, 1.0, 2.0]]
    there = delta_h_at(t2, dh, nu, table, T0=t1)
    back = delta_h_at(t1, there.value, nu, table, T0=t2)
    assert back.value[0] == pytest.approx(dh, abs=1e-9)
