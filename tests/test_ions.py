"""Ion assignment for binary ionic compounds.

The expected ions of each salt are the textbook-standard ones of inorganic chemistry
(common practice, no source). The cation charge lists below stand in for the reference data
the caller will pass; they are common oxidation states from memory (as listed in
N. N. Greenwood, A. Earnshaw, Chemistry of the Elements, 2nd ed., from memory).
"""

from __future__ import annotations

import re

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from sheetcycle.chem import USUAL_ANION_CHARGES, assign_ions, parse_formula
from sheetcycle.chem.ions import IonAssignment
from sheetcycle.errors import ChemistryError

# Common positive oxidation states, from memory (see module docstring).
COMMON = {
    "Li": (1,), "Na": (1,), "K": (1,), "Rb": (1,), "Cs": (1,),
    "Be": (2,), "Mg": (2,), "Ca": (2,), "Sr": (2,), "Ba": (2,),
    "Al": (3,), "Ga": (3,), "In": (1, 3), "Tl": (1, 3),
    "Fe": (2, 3), "Co": (2, 3), "Ni": (2,), "Cu": (1, 2), "Zn": (2,), "Ag": (1,),
    "Mn": (2, 3, 4, 7), "Cr": (2, 3, 6), "Ti": (2, 3, 4), "Sn": (2, 4), "Pb": (2, 4),
    "Cd": (2,), "Hg": (1, 2), "Sc": (3,), "Y": (3,), "La": (3,),
}  # fmt: skip


def assign(text: str, **kwargs: int) -> IonAssignment:
    return assign_ions(parse_formula(text), cation_charges=COMMON.get, **kwargs)  # type: ignore[arg-type]


# (formula, cation, p, a, anion, q, b): standard ions (common practice, no source)
SALTS = [
    ("NaCl", "Na", 1, 1, "Cl", -1, 1),
    ("MgCl2", "Mg", 2, 1, "Cl", -1, 2),
    ("Na2O", "Na", 1, 2, "O", -2, 1),
    ("Al2O3", "Al", 3, 2, "O", -2, 3),
    ("FeCl3", "Fe", 3, 1, "Cl", -1, 3),
    ("FeCl2", "Fe", 2, 1, "Cl", -1, 2),
    ("Fe2O3", "Fe", 3, 2, "O", -2, 3),
    ("FeO", "Fe", 2, 1, "O", -2, 1),
    ("CuCl", "Cu", 1, 1, "Cl", -1, 1),
    ("CuCl2", "Cu", 2, 1, "Cl", -1, 2),
    ("Cu2O", "Cu", 1, 2, "O", -2, 1),
    ("CuO", "Cu", 2, 1, "O", -2, 1),
    ("LiH", "Li", 1, 1, "H", -1, 1),
    ("CaH2", "Ca", 2, 1, "H", -1, 2),
    ("Li3N", "Li", 1, 3, "N", -3, 1),
    ("Mg3N2", "Mg", 2, 3, "N", -3, 2),
    ("CaF2", "Ca", 2, 1, "F", -1, 2),
    ("K2S", "K", 1, 2, "S", -2, 1),
    ("ZnSe", "Zn", 2, 1, "Se", -2, 1),
    ("AgBr", "Ag", 1, 1, "Br", -1, 1),
    ("TlCl", "Tl", 1, 1, "Cl", -1, 1),
    ("PbI2", "Pb", 2, 1, "I", -1, 2),
    ("SnCl4", "Sn", 4, 1, "Cl", -1, 4),
    ("CsI", "Cs", 1, 1, "I", -1, 1),
    ("BaTe", "Ba", 2, 1, "Te", -2, 1),
    ("Ca3P2", "Ca", 2, 3, "P", -3, 2),
    ("ClNa", "Na", 1, 1, "Cl", -1, 1),  # anion written first: still Na+ Cl-
    ("NaCl(s)", "Na", 1, 1, "Cl", -1, 1),
    ("Cl2Mg", "Mg", 2, 1, "Cl", -1, 2),
]


@pytest.mark.parametrize(("text", "cation", "p", "a", "anion", "q", "b"), SALTS)
def test_standard_salts(text: str, cation: str, p: int, a: int, anion: str, q: int, b: int) -> None:
    ions = assign(text)
    assert (ions.cation, ions.cation_charge, ions.n_cation) == (cation, p, a)
    assert (ions.anion, ions.anion_charge, ions.n_anion) == (anion, q, b)
    assert "electroneutrality" in ions.basis and anion in ions.basis


def test_basis_text() -> None:
    assert assign("NaCl").basis == (
        "anion charge from the usual charge of Cl (−1), cation charge from electroneutrality"
    )


@pytest.mark.parametrize(
    ("text", "message"),
    [
        (
            "Fe3O4",  # mixed-valence Fe(II)Fe(III)2O4 (common practice, no source)
            "Fe3O4: electroneutrality gives Fe a charge of +2.67, which is not a whole "
            "number; give the charges in a charge column",
        ),
        (
            "CuO2",
            "CuO2: electroneutrality gives Cu a charge of +4, not among its common charges "
            "(+1, +2); give the charges in a charge column",
        ),
        (
            "Fe0.95O",  # wüstite, non-stoichiometric (common practice, no source)
            "Fe0.95O: is non-stoichiometric (counts Fe 0.95, O 1); ion assignment needs "
            "whole-number counts",
        ),
        (
            "NaNO3",
            "NaNO3: has 3 elements (Na, N, O); ion assignment needs a binary compound of "
            "exactly two elements",
        ),
        (
            "CuCl2·2H2O",
            "CuCl2·2H2O: a hydrate is not a binary ionic solid for a Born-Haber cycle; use "
            "the anhydrous salt (CuCl2)",
        ),
        ("HCl", "HCl: H with Cl is a molecular compound, not an ionic hydride"),
        ("ClF", "ClF: both Cl and F usually form anions, so neither can be taken as the cation"),
        ("NaK", "NaK: neither Na nor K has a usual anion charge, so no anion can be picked"),
    ],
)
def test_exact_refusals(text: str, message: str) -> None:
    with pytest.raises(ChemistryError) as info:
        assign(text)
    assert str(info.value) == message
    assert isinstance(info.value, ValueError)


@pytest.mark.parametrize(
    ("text", "fragment"),
    [
        ("H2O", "H with O is a molecular compound"),
        ("H2S", "H with S is a molecular compound"),
        ("NH3", "H with N is a molecular compound"),
        ("CH4", "H with C is a molecular compound"),
        ("OF2", "both O and F usually form anions"),
        ("NO", "both N and O usually form anions"),
        ("Cl2", "has 1 element (Cl)"),
        ("CuSO4·5H2O", "a hydrate is not a binary ionic solid"),
        ("Mg3(PO4)2", "has 3 elements (Mg, P, O)"),
        ("SO4 2-", "is an ion with charge −2, not a neutral compound"),
        ("Na+", "is an ion with charge +1"),
        ("AgF2", "gives Ag a charge of +2, not among its common charges (+1)"),
        ("KO2", "gives K a charge of +4, not among its common charges (+1)"),
        ("UCl4", "no common charges are known for U"),
        ("Li0.5Cl", "is non-stoichiometric"),
    ],
)
def test_refusals(text: str, fragment: str) -> None:
    with pytest.raises(ChemistryError, match=re.escape(fragment)):
        assign(text)


# -- user charges -------------------------------------------------------------------------


def test_user_charges_override_and_are_checked() -> None:
    # AgF2 is Ag(II) fluoride (common practice, no source): unusual but neutral -> accepted.
    ions = assign("AgF2", cation_charge=2)
    assert (ions.cation_charge, ions.anion_charge) == (2, -1)
    assert "given by the user" in ions.basis
    ions = assign("AgF2", cation_charge=2, anion_charge=-1)
    assert ions.basis == "charges given by the user (Ag +2, F −1), checked for electroneutrality"
    # Na2O2 is a peroxide, O2^2- i.e. -1 per O (common practice, no source).
    ions = assign("Na2O2", anion_charge=-1)
    assert (ions.cation, ions.cation_charge, ions.anion_charge) == ("Na", 1, -1)
    assert ions.basis.startswith("anion charge given by the user (O −1)")
    # Fe3O4 cannot be split into one cation charge even with the anion charge given.
    with pytest.raises(ChemistryError, match="not a whole number"):
        assign("Fe3O4", anion_charge=-2)


def test_user_charges_that_do_not_balance() -> None:
    with pytest.raises(ChemistryError) as info:
        assign("FeCl3", cation_charge=2, anion_charge=-1)
    assert str(info.value) == (
        "FeCl3: the given charges Fe +2 and Cl −1 do not balance: 1 × (+2) + 3 × (−1) = −1, not 0"
    )
    with pytest.raises(ChemistryError, match=r"do not balance.*give the anion charge too"):
        assign("FeCl3", cation_charge=2)


@pytest.mark.parametrize(("kwargs", "fragment"), [
    ({"cation_charge": -2}, "a cation charge must be positive, got −2"),
    ({"cation_charge": 0}, "a cation charge must be positive"),
    ({"anion_charge": 1}, "an anion charge must be negative, got +1"),
])  # fmt: skip
def test_user_charge_signs(kwargs: dict[str, int], fragment: str) -> None:
    with pytest.raises(ChemistryError, match=re.escape(fragment)):
        assign("NaCl", **kwargs)


def test_user_charges_from_float_cells() -> None:
    # Sheet cells arrive as floats: 3.0 is the whole number 3; 2.5 and NaN are refused.
    ions = assign("FeCl3", cation_charge=3.0, anion_charge=-1.0)  # type: ignore[arg-type]
    assert ions.cation_charge == 3 and isinstance(ions.cation_charge, int)
    assert ions.anion_charge == -1 and isinstance(ions.anion_charge, int)
    for bad in (2.5, float("nan"), float("inf")):
        with pytest.raises(ChemistryError, match="is not a whole number"):
            assign("FeCl3", cation_charge=bad)  # type: ignore[arg-type]


def test_custom_anion_charge_callable() -> None:
    # A caller's table that knows only chloride: oxygen is then no anion.
    only_cl = {"Cl": -1}.get
    ions = assign_ions(parse_formula("KCl"), cation_charges=COMMON.get, anion_charge_of=only_cl)
    assert (ions.cation, ions.anion) == ("K", "Cl")
    with pytest.raises(ChemistryError, match="neither Na nor O"):
        assign_ions(parse_formula("Na2O"), cation_charges=COMMON.get, anion_charge_of=only_cl)


def test_usual_anion_charges_table() -> None:
    # Halide -1, chalcogenide -2, nitride/phosphide -3, hydride -1 (common practice).
    expected = {"F": -1, "Cl": -1, "Br": -1, "I": -1, "At": -1, "O": -2, "S": -2, "Se": -2,
                "Te": -2, "N": -3, "P": -3, "H": -1}  # fmt: skip
    assert dict(USUAL_ANION_CHARGES) == expected
    with pytest.raises(TypeError):
        USUAL_ANION_CHARGES["C"] = -4  # type: ignore[index]


# -- properties ---------------------------------------------------------------------------

CATIONS = sorted(COMMON)
ANIONS = sorted(USUAL_ANION_CHARGES)


def _text(cation: str, a: int, anion: str, b: int) -> str:
    return f"{cation}{a if a > 1 else ''}{anion}{b if b > 1 else ''}"


@settings(max_examples=300, deadline=None)
@given(
    st.sampled_from(CATIONS),
    st.integers(1, 6),
    st.sampled_from(ANIONS),
    st.integers(1, 6),
    st.one_of(st.none(), st.integers(1, 8)),
    st.one_of(st.none(), st.integers(-4, -1)),
)
def test_successful_assignments_are_electroneutral(
    cation: str, a: int, anion: str, b: int, p_user: int | None, q_user: int | None
) -> None:
    text = _text(cation, a, anion, b)
    try:
        ions = assign(text, cation_charge=p_user, anion_charge=q_user)  # type: ignore[arg-type]
    except ChemistryError:
        ions = None
    q_usual = USUAL_ANION_CHARGES[anion]
    # Independent expectation by brute force over the allowed charges.
    if p_user is None:
        qs = [q_user if q_user is not None else q_usual]
        ps = list(COMMON[cation])
    else:
        qs = [q_user if q_user is not None else q_usual]
        ps = [p_user]
    solutions = [(p, q) for p in ps for q in qs if a * p + b * q == 0]
    if not solutions:
        assert ions is None
        return
    assert ions is not None
    assert a * ions.cation_charge + b * ions.anion_charge == 0
    assert (ions.cation, ions.n_cation, ions.anion, ions.n_anion) == (cation, a, anion, b)
    assert (ions.cation_charge, ions.anion_charge) in solutions
