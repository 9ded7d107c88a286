"""Reaction equation parser: spellings people type, exact balances, errors that say where.

Balance checks rest on conservation of atoms and charge (common practice, no source); the
equations are standard chemistry written several ways.
"""

from __future__ import annotations

from fractions import Fraction

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from sheetcycle.chem.reactions import Reaction, parse_reaction, species_key
from sheetcycle.errors import FormulaSyntaxError


def terms(side: tuple) -> list[tuple[Fraction, str]]:
    return [(sp.exact, sp.key) for sp in side]


THERMITE = [
    "2 Al(s) + Fe2O3(s) -> Al2O3(s) + 2 Fe(s)",
    "2Al(s)+Fe2O3(s)→Al2O3(s)+2Fe(s)",
    "2 Al (s) + Fe2O3 (s) = Al2O3 (s) + 2 Fe (s)",
    "2 Al(s) + Fe2O3(s) => Al2O3(s) + 2 Fe(s)",
    "2 Al(s) + Fe2O3(s) ⟶ Al2O3(s) + 2 Fe(s)",
    "2 Al(s) + Fe2O3(s) --> Al2O3(s) + 2 Fe(s)",
    "2 Al(S) + Fe₂O₃(s) -> Al₂O₃(s) + 2 Fe(s)",
]


@pytest.mark.parametrize("text", THERMITE)
def test_arrows_and_spacing_give_the_same_reaction(text: str) -> None:
    r = parse_reaction(text)
    assert terms(r.reactants) == [(2, "Al(s)"), (1, "Fe2O3(s)")]
    assert terms(r.products) == [(1, "Al2O3(s)"), (2, "Fe(s)")]
    assert r.is_balanced
    assert not r.reversible


@pytest.mark.parametrize("arrow", ["<->", "<=>", "⇌"])
def test_equilibrium_arrows(arrow: str) -> None:
    r = parse_reaction(f"N2(g) + 3 H2(g) {arrow} 2 NH3(g)")
    assert r.reversible
    assert terms(r.products) == [(2, "H3N(g)")]
    assert r.is_balanced


@pytest.mark.parametrize(
    "half",
    ["1/2 O2(g)", "½ O2(g)", "0.5 O2(g)", "1/2O2(g)", "½O2(g)", "0.5O2(g)", "1 / 2 O2(g)"],
)
def test_fractional_coefficients(half: str) -> None:
    r = parse_reaction(f"H2(g) + {half} -> H2O(l)")
    assert terms(r.reactants) == [(1, "H2(g)"), (Fraction(1, 2), "O2(g)")]
    assert r.reactants[1].coefficient == 0.5
    assert r.is_balanced


def test_mixed_vulgar_fraction() -> None:
    r = parse_reaction("2 Fe(s) + 1½ O2(g) -> Fe2O3(s)")
    assert r.reactants[1].exact == Fraction(3, 2)
    assert r.is_balanced


def test_balance_is_exact_with_thirds() -> None:
    # 1/3 is not a binary float; the balance is still exactly zero.
    r = parse_reaction("1/3 Al(s) + 1/4 O2(g) -> 1/6 Al2O3(s)")
    assert r.balance().elements == {}
    assert r.is_balanced
    r2 = parse_reaction("1/3 Al(s) + 1/4 O2(g) -> 1/5 Al2O3(s)")
    imb = r2.balance()
    assert imb.elements == {
        "Al": Fraction(2, 5) - Fraction(1, 3),
        "O": Fraction(3, 5) - Fraction(1, 2),
    }


@pytest.mark.parametrize(
    ("text", "reactants", "products"),
    [
        ("Na+(aq) + Cl-(aq) -> NaCl(s)", [(1, "Na+(aq)"), (1, "Cl-(aq)")], [(1, "ClNa(s)")]),
        ("Fe3+ + e- -> Fe2+", [(1, "Fe3+"), (1, "e-")], [(1, "Fe2+")]),
        ("Fe+3 + e− = Fe+2", [(1, "Fe3+"), (1, "e-")], [(1, "Fe2+")]),
        ("Na++Cl- -> NaCl(s)", [(1, "Na+"), (1, "Cl-")], [(1, "ClNa(s)")]),
        ("Cu(s)+2Ag+(aq) -> Cu2+(aq)+2Ag(s)", [(1, "Cu(s)"), (2, "Ag+(aq)")],
         [(1, "Cu2+(aq)"), (2, "Ag(s)")]),
        ("Ba2+(aq) + SO4 2-(aq) -> BaSO4(s)", [(1, "Ba2+(aq)"), (1, "O4S2-(aq)")],
         [(1, "BaO4S(s)")]),
        ("NH4+(aq) + OH-(aq) -> NH3(aq) + H2O(l)", [(1, "H4N+(aq)"), (1, "HO-(aq)")],
         [(1, "H3N(aq)"), (1, "H2O(l)")]),
        ("Fe+++ + e- -> Fe++", [(1, "Fe3+"), (1, "e-")], [(1, "Fe2+")]),
        ("H2+Cl2->2HCl", [(1, "H2"), (1, "Cl2")], [(2, "ClH")]),
    ],
)  # fmt: skip
def test_plus_in_charges_is_not_a_separator(text: str, reactants: list, products: list) -> None:
    r = parse_reaction(text)
    assert terms(r.reactants) == reactants
    assert terms(r.products) == products
    assert r.is_balanced  # atoms and charge both conserved


def test_charge_imbalance_is_reported() -> None:
    r = parse_reaction("Fe3+(aq) -> Fe2+(aq)")
    imb = r.balance()
    assert imb.elements == {}
    assert imb.charge == -1
    assert not r.is_balanced
    assert imb.describe() == "charge: 1 more on the reactant side"


def test_element_imbalance_is_reported() -> None:
    r = parse_reaction("H2(g) + O2(g) -> H2O(l)")
    imb = r.balance()
    assert imb.elements == {"O": Fraction(-1)}
    assert imb.describe() == "O: 1 more on the reactant side"


def test_state_with_modification() -> None:
    r = parse_reaction("P(s, white) + 5/4 O2(g) -> 1/4 P4O10(s)")
    assert r.reactants[0].state == "s, white"
    assert r.is_balanced
    assert parse_reaction("C(graphite) + O2(g) -> CO2(g)").reactants[0].state == "graphite"


def test_hydrate_and_electron_count() -> None:
    r = parse_reaction("CuSO4·5H2O(s) -> CuSO4(s) + 5 H2O(l)")
    assert r.is_balanced
    r2 = parse_reaction("Cl2(g) + 2 e- -> 2 Cl-(g)")
    assert r2.is_balanced


def test_reversed_swaps_sides_and_negates_the_balance() -> None:
    r = parse_reaction("H2(g) + O2(g) -> H2O(l)")
    rev = r.reversed()
    assert terms(rev.reactants) == terms(r.products)
    assert terms(rev.products) == terms(r.reactants)
    assert rev.balance().elements == {"O": Fraction(1)}
    assert rev.reversed().net() == r.net()
    assert str(rev) == "H2O(l) -> H2(g) + O2(g)"


def test_net_counts_a_species_on_both_sides_once() -> None:
    r = parse_reaction("CH4(g) + 2 O2(g) + H2O(l) -> CO2(g) + 3 H2O(l)")
    assert r.net()["H2O(l)"] == 2
    assert r.is_balanced


def test_key_ignores_spelling() -> None:
    a = parse_reaction("H₂O (l) -> H2O(g)").reactants[0]
    b = parse_reaction("H2O(l) -> H2O(g)").reactants[0]
    assert a.key == b.key == species_key(b.formula, "l")
    assert parse_reaction("SO42-(aq) -> SO4^{2-}(aq)").net() == {"O4S2-(aq)": 0}


@pytest.mark.parametrize(
    ("text", "message"),
    [
        ("", "empty reaction equation"),
        ("H2 + O2", "no arrow between reactants and products"),
        ("A -> B -> C", "more than one arrow ('->' at position 3, '->' at position 8)"),
        (" -> H2O", "nothing on the reactant side"),
        ("H2 + -> H2O", "an empty term on the reactant side"),
        ("2 -> H2O", "the reactant term '2' has a coefficient but no formula"),
        ("0 H2 -> H2O", "a coefficient of zero in the reactant term '0 H2'"),
        ("1/0 H2 -> H2O", "the coefficient '1/0' of a reactant divides by zero"),
        ("H2 -> Xq2O", "cannot read the product 'Xq2O'"),
        ("H2 + O2 -> h2o", "cannot read the product 'h2o'"),
    ],
)
def test_errors_name_the_part_that_failed(text: str, message: str) -> None:
    with pytest.raises(FormulaSyntaxError) as info:
        parse_reaction(text)
    assert info.value.problem.startswith(message)
    if text.strip():
        assert info.value.found == text.strip()


def test_not_a_string() -> None:
    with pytest.raises(TypeError):
        parse_reaction(42)  # type: ignore[arg-type]


REACTION_ALPHABET = "HOClNaFe2345 +-=>→⇌()½/.·aqslg[]^e−"


@settings(max_examples=400, deadline=None)
@given(st.one_of(st.text(), st.text(alphabet=REACTION_ALPHABET, max_size=40)))
def test_parser_never_crashes(text: str) -> None:
    try:
        r = parse_reaction(text)
    except FormulaSyntaxError as exc:
        assert str(exc)
        return
    assert isinstance(r, Reaction)
    assert r.reactants and r.products


FORMULAS = ["H2(g)", "O2(g)", "H2O(l)", "CO2(g)", "CH4(g)", "Na+(aq)", "Cl-(aq)", "NaCl(s)",
            "Fe2O3(s)", "Al(s)", "SO4 2-(aq)", "e-", "Ca(OH)2(s)", "CuSO4·5H2O(s)"]  # fmt: skip
COEFFS = ["", "2 ", "3", "1/2 ", "½ ", "0.25 ", "3/2"]


@settings(max_examples=200, deadline=None)
@given(
    st.lists(st.tuples(st.sampled_from(COEFFS), st.sampled_from(FORMULAS)), min_size=1, max_size=4),
    st.lists(st.tuples(st.sampled_from(COEFFS), st.sampled_from(FORMULAS)), min_size=1, max_size=4),
    st.sampled_from(["->", " = ", "→", " <=> "]),
)
def test_written_reactions_read_back(left: list, right: list, arrow: str) -> None:
    text = " + ".join(c + f for c, f in left) + f" {arrow} " + " + ".join(c + f for c, f in right)
    r = parse_reaction(text)
    assert len(r.reactants) == len(left)
    assert len(r.products) == len(right)
    # Reversing twice is the identity, and reversing negates the imbalance.
    assert r.reversed().reversed().net() == r.net()
    imb, rimb = r.balance(), r.reversed().balance()
    assert {k: -v for k, v in imb.elements.items()} == dict(rimb.elements)
    assert rimb.charge == -imb.charge
    # The formatted text parses back to the same net change.
    assert parse_reaction(str(r.reversed().reversed())).net() == r.net()
