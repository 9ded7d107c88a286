"""Lattice enthalpies from the whole pipeline against a handbook Born-Haber table.

Inputs: standard enthalpies of formation of the crystals, from the NBS tables of chemical
thermodynamic properties (Wagman et al., J. Phys. Chem. Ref. Data 11, Suppl. 2, 1982),
from memory. Everything else (atomization, ionization, electron gain) comes from
sheetcycle's built-in reference data, so the check covers the data, the ion assignment,
the stoichiometry and the engine together.

Expected: lattice enthalpies derived by thermochemical cycles, as tabulated in the CRC
Handbook of Chemistry and Physics, table "Lattice Energies" (H. D. B. Jenkins), from memory.

Tolerance: halides within 1.5 % (different compilations of the same terms differ by a few
kJ/mol); oxides within b × 50 kJ/mol + 1 %, the spread that the choice of the second
electron-gain enthalpy of oxygen causes (tabulated values range over about 50 kJ/mol,
because that term is itself derived from cycles; see docs/reference-data.md).
"""

from __future__ import annotations

import pytest

from sheetcycle.api import solve_cycles

# formula: (ΔfH° kJ/mol [NBS 1982, from memory],
#           handbook lattice enthalpy kJ/mol [CRC, from memory])
HALIDES = {
    "LiF": (-616.0, 1036),
    "LiCl": (-408.6, 853),
    "LiBr": (-351.2, 807),
    "NaF": (-576.6, 923),
    "NaCl": (-411.2, 786),
    "NaBr": (-361.1, 747),
    "NaI": (-287.8, 704),
    "KF": (-567.3, 821),
    "KCl": (-436.5, 715),
    "KBr": (-393.8, 682),
    "KI": (-327.9, 649),
    "RbCl": (-435.4, 689),
    "CsCl": (-443.0, 659),
    "CsI": (-346.6, 604),
    "MgCl2": (-641.3, 2526),
    "CaCl2": (-795.4, 2258),
    "CaF2": (-1228.0, 2651),
    "AgCl": (-127.0, 915),
    "CuCl": (-137.2, 996),
}
OXIDES = {
    # formula: (ΔfH°, handbook lattice enthalpy, number of oxide ions b)
    "MgO": (-601.6, 3791, 1),
    "CaO": (-634.9, 3401, 1),
    "SrO": (-592.0, 3223, 1),
    "BaO": (-548.0, 3054, 1),
    "Li2O": (-597.9, 2799, 1),
    "Na2O": (-414.2, 2481, 1),
}
# Al2O3 stands apart: its handbook cycle value (15916 kJ/mol, CRC, from memory) implies a
# second electron gain of oxygen near +990 kJ/mol, far outside the 744-844 range the other
# oxides imply; it is checked at 5 % (the ionic models of docs/lattice-models.md fall
# between 15300 and 16200 kJ/mol, bracketing both).
AL2O3 = (-1675.7, 15916)


def _lattice(formula: str, dfh: float) -> float:
    (row,) = solve_cycles([formula], formation_enthalpy=[dfh])
    assert "lattice_enthalpy" in row.values, [f.message for f in row.flags]
    return row.values["lattice_enthalpy"].value


@pytest.mark.parametrize("formula", sorted(HALIDES))
def test_halide_lattice_enthalpy_matches_handbook(formula: str) -> None:
    dfh, expected = HALIDES[formula]
    assert _lattice(formula, dfh) == pytest.approx(expected, rel=0.015)


@pytest.mark.parametrize("formula", sorted(OXIDES))
def test_oxide_lattice_enthalpy_within_second_electron_gain_spread(formula: str) -> None:
    dfh, expected, b = OXIDES[formula]
    got = _lattice(formula, dfh)
    assert abs(got - expected) <= b * 50 + 0.01 * expected


def test_corundum_within_five_percent() -> None:
    dfh, expected = AL2O3
    assert _lattice("Al2O3", dfh) == pytest.approx(expected, rel=0.05)


def test_at_least_fifteen_compounds_are_checked() -> None:
    assert len(HALIDES) + len(OXIDES) >= 15


def test_lattice_enthalpy_is_in_the_dissociation_convention_with_sources() -> None:
    (row,) = solve_cycles(["MgCl2"], formation_enthalpy=[-641.3])
    lat = row.values["lattice_enthalpy"]
    assert lat.value > 0 and lat.unit == "kJ/mol"
    # every term is traceable: Mg atomization, IE1+IE2, Cl atomization, Cl electron gain, ΔfH
    text = " | ".join(lat.sources)
    for part in ("ΔatH(Mg)", "IE1(Mg)", "IE2(Mg)", "ΔatH(Cl)", "ΔegH1(Cl)", "formation_enthalpy"):
        assert part in text, text
