"""Formula parsing, checked against an independent parser (periodictable.formula, PyPI).

periodictable's formula syntax differs from ours in places: it writes hydrates with '+'
("CuSO4+5H2O"), has no square-bracket groups and no charge or state suffixes, so each case
below carries the periodictable spelling of the same neutral composition. Charges, states
and water counts are what the notation means by common practice (no source).
"""

from __future__ import annotations

import re
from collections.abc import Mapping
from types import MappingProxyType

import periodictable
import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st

from sheetcycle.chem import SYMBOLS, Formula, parse_formula
from sheetcycle.chem.elements import atomic_number
from sheetcycle.chem.formula import MAX_FORMULA_LENGTH
from sheetcycle.errors import FormulaSyntaxError


def reference_counts(pt_text: str) -> dict[str, float]:
    """Atoms per formula unit according to periodictable (independent parser)."""
    return {str(el): float(n) for el, n in periodictable.formula(pt_text).atoms.items()}


def assert_same_counts(ours: Mapping[str, float], reference: Mapping[str, float]) -> None:
    assert set(ours) == set(reference)
    for symbol, n in reference.items():
        assert ours[symbol] == pytest.approx(n, rel=1e-12), symbol


# -- element symbols ----------------------------------------------------------------------


def test_symbols_match_periodictable_by_atomic_number() -> None:
    # Source: periodictable's element table (symbol for each Z = 1..118).
    reference = {el.number: el.symbol for el in periodictable.elements if el.number >= 1}
    assert len(SYMBOLS) == 118 == max(reference)
    for z, symbol in enumerate(SYMBOLS, start=1):
        assert symbol == reference[z]
        assert atomic_number(symbol) == z


@pytest.mark.parametrize("text", ["", "X", "co", "CO", "Uuo", "NA"])
def test_atomic_number_of_non_symbols_is_none(text: str) -> None:
    # "CO" is carbon + oxygen, "co" and "NA" are mis-cased: none is one symbol (IUPAC).
    assert atomic_number(text) is None


# -- accepted spellings -------------------------------------------------------------------

# (text, periodictable spelling, charge, state, waters of crystallisation)
ACCEPTED: list[tuple[str, str, int, str | None, float]] = [
    ("NaCl", "NaCl", 0, None, 0),
    ("Co", "Co", 0, None, 0),
    ("CO", "CO", 0, None, 0),
    ("Na2O", "Na2O", 0, None, 0),
    ("Fe0.95O", "Fe0.95O", 0, None, 0),
    ("Li0.5CoO2", "Li0.5CoO2", 0, None, 0),
    ("Ca(OH)2", "Ca(OH)2", 0, None, 0),
    ("Mg3(PO4)2", "Mg3(PO4)2", 0, None, 0),
    ("[Co(NH3)6]Cl3", "(Co(NH3)6)Cl3", 0, None, 0),
    ("K4[Fe(CN)6]", "K4(Fe(CN)6)", 0, None, 0),
    ("Al2(SO4)3", "Al2(SO4)3", 0, None, 0),
    ("H₂O", "H2O", 0, None, 0),
    ("  NaCl  ", "NaCl", 0, None, 0),
    # hydrates, every dot
    ("CuSO4·5H2O", "CuSO4+5H2O", 0, None, 5),
    ("CuSO4•5H2O", "CuSO4+5H2O", 0, None, 5),
    ("CuSO4∙5H2O", "CuSO4+5H2O", 0, None, 5),
    ("CuSO4⋅5H2O", "CuSO4+5H2O", 0, None, 5),
    ("CuSO4*5H2O", "CuSO4+5H2O", 0, None, 5),
    ("CuSO4.5H2O", "CuSO4+5H2O", 0, None, 5),
    ("CaCl2.6H2O", "CaCl2+6H2O", 0, None, 6),
    ("Na2CO3 * 10 H2O", "Na2CO3+10H2O", 0, None, 10),
    ("LiCl.H2O", "LiCl+H2O", 0, None, 1),
    ("CaSO4·0.5H2O", "CaSO4+0.5H2O", 0, None, 0.5),
    ("MgSO4 · 7H2O", "MgSO4+7H2O", 0, None, 7),
    ("CaCl2·8NH3", "CaCl2+8NH3", 0, None, 0),  # an adduct, not water: stays in core
    # charges
    ("Fe3+", "Fe", 3, None, 0),
    ("Fe+3", "Fe", 3, None, 0),
    ("Fe^3+", "Fe", 3, None, 0),
    ("Fe^{3+}", "Fe", 3, None, 0),
    ("Fe^+3", "Fe", 3, None, 0),
    ("Fe(3+)", "Fe", 3, None, 0),
    ("Fe 3+", "Fe", 3, None, 0),
    ("Fe³⁺", "Fe", 3, None, 0),
    ("Fe+++", "Fe", 3, None, 0),
    ("Cl-", "Cl", -1, None, 0),
    ("Cl−", "Cl", -1, None, 0),
    ("Cl⁻", "Cl", -1, None, 0),
    ("Cl^-", "Cl", -1, None, 0),
    ("O2-", "O", -2, None, 0),
    ("O²⁻", "O", -2, None, 0),
    ("O2−", "O", -2, None, 0),
    ("N3-", "N", -3, None, 0),
    ("Hg2+", "Hg", 2, None, 0),
    ("SO4 2-", "SO4", -2, None, 0),
    ("SO4^2-", "SO4", -2, None, 0),
    ("SO4^{2-}", "SO4", -2, None, 0),
    ("SO4-2", "SO4", -2, None, 0),
    ("[SO4]2-", "SO4", -2, None, 0),
    ("(SO4)2-", "SO4", -2, None, 0),
    ("SO42-", "SO4", -2, None, 0),
    ("SO₄²⁻", "SO4", -2, None, 0),
    ("SO4--", "SO4", -2, None, 0),
    ("CO32-", "CO3", -2, None, 0),
    ("PO43-", "PO4", -3, None, 0),
    ("Cr2O72-", "Cr2O7", -2, None, 0),
    ("Hg22+", "Hg2", 2, None, 0),
    ("O22-", "O2", -2, None, 0),
    ("C60-", "C60", -1, None, 0),
    ("NH4+", "NH4", 1, None, 0),
    ("NO3-", "NO3", -1, None, 0),
    ("MnO4-", "MnO4", -1, None, 0),
    ("H3O+", "H3O", 1, None, 0),
    ("OH-", "OH", -1, None, 0),
    ("Fe(OH)2+", "Fe(OH)2", 1, None, 0),
    ("[Fe(CN)6]4-", "Fe(CN)6", -4, None, 0),
    ("[Co(NH3)6]3+", "Co(NH3)6", 3, None, 0),
    ("O2^-", "O2", -1, None, 0),
    ("[O2]-", "O2", -1, None, 0),
    ("Cl2 -", "Cl2", -1, None, 0),
    # states
    ("NaCl(s)", "NaCl", 0, "s", 0),
    ("NaCl (s)", "NaCl", 0, "s", 0),
    ("NaCl(S)", "NaCl", 0, "s", 0),
    ("Cl2 (g)", "Cl2", 0, "g", 0),
    ("Na+(aq)", "Na", 1, "aq", 0),
    ("SO4 2- (aq)", "SO4", -2, "aq", 0),
    ("H2O(l)", "H2O", 0, "l", 0),
    ("NaCl(cr)", "NaCl", 0, "cr", 0),
    ("SiO2(am)", "SiO2", 0, "am", 0),
    ("C(graphite)", "C", 0, "graphite", 0),
    ("C(diamond)", "C", 0, "diamond", 0),
    ("P(white)", "P", 0, "white", 0),
    ("CuSO4·5H2O(s)", "CuSO4+5H2O", 0, "s", 5),
]


@pytest.mark.parametrize(("text", "pt_text", "charge", "state", "hydrate"), ACCEPTED)
def test_accepted_spellings(
    text: str, pt_text: str, charge: int, state: str | None, hydrate: float
) -> None:
    f = parse_formula(text)
    assert_same_counts(f.elements, reference_counts(pt_text))
    assert f.charge == charge
    assert f.state == state
    assert f.hydrate == hydrate
    assert f.text == text.strip()
    assert f.atom_count() == pytest.approx(sum(reference_counts(pt_text).values()))


@pytest.mark.parametrize(
    ("text", "pt_core"),
    [
        ("CuSO4·5H2O", "CuSO4"),
        ("CaCl2.6H2O", "CaCl2"),
        ("Na2CO3 * 10 H2O", "Na2CO3"),
        ("CaCl2·8NH3", "CaCl2(NH3)8"),
        ("CuSO4·H2O·4H2O", "CuSO4"),
        ("NaCl", "NaCl"),
    ],
)
def test_core_leaves_out_water_of_crystallisation(text: str, pt_core: str) -> None:
    assert_same_counts(parse_formula(text).core, reference_counts(pt_core))


def test_elements_keep_order_of_first_appearance() -> None:
    # Order of the symbols as written (common practice, no source).
    assert list(parse_formula("Ca(OH)2").elements) == ["Ca", "O", "H"]
    assert list(parse_formula("CuSO4·5H2O").elements) == ["Cu", "S", "O", "H"]
    assert list(parse_formula("[Co(NH3)6]Cl3").elements) == ["Co", "N", "H", "Cl"]


def test_formula_is_immutable_and_hashable() -> None:
    f = parse_formula("MgCl2")
    assert isinstance(f.elements, MappingProxyType)
    with pytest.raises(TypeError):
        f.elements["Mg"] = 2.0  # type: ignore[index]
    with pytest.raises(AttributeError):
        f.charge = 1  # type: ignore[misc]
    same = Formula("MgCl2", {"Mg": 1.0, "Cl": 2.0}, core={"Mg": 1.0, "Cl": 2.0})
    assert same == f and hash(same) == hash(f)
    assert isinstance(same.core, MappingProxyType)


# -- Hill order ---------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("text", "hill"),
    [
        # Hill system (E. A. Hill, J. Am. Chem. Soc. 22, 478 (1900); rule from memory):
        # C first, H second, then alphabetical; without C everything alphabetical.
        ("CH4", "CH4"),
        ("C2H5OH", "C2H6O"),
        ("CHCl3", "CHCl3"),
        ("CCl4", "CCl4"),
        ("H2O", "H2O"),
        ("HCl", "ClH"),
        ("NaCl", "ClNa"),
        ("Ca(OH)2", "CaH2O2"),
        ("CuSO4·5H2O", "CuO4S"),
        ("Na2CO3", "CNa2O3"),
        ("Fe0.95O", "Fe0.95O"),
        ("SO4 2-", "O4S"),
    ],
)
def test_hill_order(text: str, hill: str) -> None:
    assert parse_formula(text).hill() == hill


def test_hill_text_never_reads_back_as_a_hydrate() -> None:
    # "Ba2.5H2O" would read as Ba2·5H2O (module rule 2); the Hill text must not.
    f = parse_formula("Ba2.5(OH)2")
    back = parse_formula(f.hill())
    assert dict(back.core) == dict(f.core) == reference_counts("Ba2.5(OH)2")
    assert back.hydrate == 0


# -- rejections ---------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("text", "fragment"),
    [
        ("", "empty formula"),
        ("   ", "empty formula"),
        ("Ca(OH", "'(' at position 3 is never closed"),
        ("Ca(OH))2", "')' at position 7 has no matching '('"),
        ("[Co(NH3)6)Cl3", "')' at position 10 closes '[' at position 1"),
        ("Fe0O", "a count of zero at position 3"),
        ("Fe0.0O", "a count of zero at position 3"),
        ("Ca(OH)0", "a count of zero at position 7"),
        ("CuSO4·0H2O", "a count of zero at position 7"),
        ("NaCl!", "unexpected character '!' at position 5"),
        ("Na&Cl", "unexpected character '&' at position 3"),
        ("Xx", "unknown element symbol 'Xx' at position 1"),
        ("NaXy2", "unknown element symbol 'Xy' at position 3"),
        ("nacl", "lowercase 'n' at position 1"),
        ("Na Cl", "a space at position 3"),
        ("2NaCl", "a number at position 1 before the formula"),
        ("()", "empty brackets '()' at position 1"),
        ("(2)", "a number at position 2 that follows no element"),
        ("Fe.95O", "ambiguous '.' at position 3"),
        ("CuSO4·", "nothing after a dot at position 7"),
        ("·5H2O", "nothing before the first dot at position 1"),
        ("H2O·5", "a count with no formula after it at position 5"),
        ("Fe+0", "a charge of zero at position 3"),
        ("Fe^0+", "a charge of zero at position 3"),
        ("Fe^", "cannot read the charge '' at position 3"),
        ("Fe^3", "cannot read the charge '3' at position 3"),
        ("Fe+-", "mixed charge signs '+-' at position 3"),
        ("(s)", "no formula before the state '(s)'"),
        ("+", "no formula before the charge or state"),
        ("D2O", "unknown element symbol 'D' at position 1"),
        ("H²O", "unexpected character '²' at position 2"),
        ("Na" * 101, "202 characters long, more than the limit of 200"),
    ],
)
def test_rejections(text: str, fragment: str) -> None:
    with pytest.raises(FormulaSyntaxError) as info:
        parse_formula(text)
    assert fragment in str(info.value)
    assert info.value.found == text.strip()
    assert info.value.expected


def test_exact_messages() -> None:
    cases = {
        "Xx": "unknown element symbol 'Xx' at position 1: expected one of the 118 element "
        "symbols (case matters: 'Co' is cobalt, 'CO' is carbon and oxygen), found 'Xx'",
        "nacl": "lowercase 'n' at position 1 where an element symbol should start: expected "
        "an element symbol with a capital first letter (case matters: 'Co' is cobalt, "
        "'CO' is carbon and oxygen); did you mean 'NaCl'?, found 'nacl'",
        "Ca(OH": "'(' at position 3 is never closed: expected balanced brackets, found 'Ca(OH'",
        "NaCl!": "unexpected character '!' at position 5: expected element symbols, counts, "
        "brackets, a hydrate dot, a charge or a state, found 'NaCl!'",
    }
    for text, message in cases.items():
        with pytest.raises(FormulaSyntaxError) as info:
            parse_formula(text)
        assert str(info.value) == message


@pytest.mark.parametrize(
    ("text", "suggestions"),
    [
        ("nacl", ["'NaCl'"]),
        ("NACL", ["'NaCl'"]),
        ("co", ["'Co'", "'CO'"]),
        ("mgcl2(aq)", ["'MgCl2(aq)'"]),
    ],
)
def test_case_suggestions(text: str, suggestions: list[str]) -> None:
    # Symbols from IUPAC; "co" is Co or C+O, "nacl" can only be Na+Cl (no "A", "L" symbols).
    with pytest.raises(FormulaSyntaxError) as info:
        parse_formula(text)
    assert info.value.expected is not None
    for s in suggestions:
        assert s in info.value.expected


def test_length_limit_is_inclusive() -> None:
    # 100 x "Na" = 200 characters: allowed; 100 Na atoms (count from the text itself).
    assert parse_formula("Na" * (MAX_FORMULA_LENGTH // 2)).elements["Na"] == 100


@pytest.mark.parametrize("value", [5, 1.5, None, b"NaCl", ["NaCl"], {"Na": 1}])
def test_non_str_input_is_type_error(value: object) -> None:
    with pytest.raises(TypeError):
        parse_formula(value)  # type: ignore[arg-type]


def test_huge_nested_counts_stay_finite() -> None:
    # 200 characters hold at most ~195 count digits, so the product stays below the
    # largest double (~1.8e308, IEEE 754): 1e110 * 1e40 * 1e40 = 1e190 by arithmetic.
    text = "((H" + "1" + "0" * 110 + ")" + "1" + "0" * 40 + ")1" + "0" * 40
    assert len(text) <= MAX_FORMULA_LENGTH
    assert parse_formula(text).elements["H"] == pytest.approx(1e190, rel=1e-12)


# -- speed --------------------------------------------------------------------------------


def test_parsing_100k_repeated_formulas_is_fast() -> None:
    # 500 distinct formulas (generated here), repeated 200 times: rows repeat formulas.
    distinct = [f"{a}{n}{b}{m}" for a in ("Na", "K", "Mg", "Ca", "Fe") for b in ("Cl", "O")
                for n in range(1, 11) for m in range(1, 6)]  # fmt: skip
    assert len(distinct) == 500
    parse_formula.cache_clear()
    texts = distinct * 200
    # speed is a benchmark's business, not a test's: here, that repeats hit the cache
    for t in texts:
        parse_formula(t)
    info = parse_formula.cache_info()
    assert info.misses == 500 and info.hits == len(texts) - 500


# -- properties ---------------------------------------------------------------------------

FORMULA_ALPHABET = list("HCONaClFeSPKMgxyz()[]{}0123456789.·•*+-−^ ₂²³⁺⁻sagl!")


@settings(max_examples=400, deadline=None)
@given(st.one_of(st.text(max_size=250), st.text(alphabet=FORMULA_ALPHABET, max_size=40)))
def test_any_text_gives_a_formula_or_a_formula_syntax_error(text: str) -> None:
    try:
        f = parse_formula(text)
    except FormulaSyntaxError as err:
        assert str(err)
        return
    assert f.elements and all(n > 0 for n in f.elements.values())
    assert set(f.core) <= set(f.elements)


COUNTS = st.one_of(
    st.none(), st.integers(1, 40), st.sampled_from(["0.5", "0.95", "1.5", "2.25", "0.125"])
)


def _count_text(c: int | str | None) -> str:
    return "" if c is None else str(c)


def _count_value(c: int | str | None) -> float:
    return 1.0 if c is None else float(c)


def _add(into: dict[str, float], counts: Mapping[str, float], k: float) -> dict[str, float]:
    for s, n in counts.items():
        into[s] = into.get(s, 0.0) + n * k
    return into


Piece = tuple[str, dict[str, float]]

LEAVES: st.SearchStrategy[Piece] = st.builds(
    lambda s, c: (s + _count_text(c), {s: _count_value(c)}), st.sampled_from(SYMBOLS), COUNTS
)


def _group(children: st.SearchStrategy[Piece]) -> st.SearchStrategy[Piece]:
    def build(items: list[Piece], bracket: str, c: int | str) -> Piece:
        inner: dict[str, float] = {}
        for _, counts in items:
            _add(inner, counts, 1.0)
        close = ")" if bracket == "(" else "]"
        text = bracket + "".join(t for t, _ in items) + close + str(c)
        return text, _add({}, inner, float(c))

    return st.builds(
        build,
        st.lists(children, min_size=1, max_size=3),
        st.sampled_from("(["),
        st.one_of(st.integers(2, 9), st.sampled_from(["0.5", "1.5"])),
    )


PIECES = st.lists(st.recursive(LEAVES, _group, max_leaves=6), min_size=1, max_size=3)


@st.composite
def formulas(draw: st.DrawFn) -> Piece:
    items = draw(PIECES)
    text = "".join(t for t, _ in items)
    counts: dict[str, float] = {}
    for _, c in items:
        _add(counts, c, 1.0)
    assume(len(text) <= MAX_FORMULA_LENGTH - 6)
    # Module rule 2: a decimal count right before a final H2O reads as a hydrate dot.
    assume(not re.search(r"[0-9]\.[0-9]+H2O$", text))
    return text, counts


@settings(max_examples=150, deadline=None)
@given(formulas())
def test_generated_formulas_match_the_generator_and_periodictable(piece: Piece) -> None:
    text, counts = piece
    f = parse_formula(text)
    assert_same_counts(f.elements, counts)
    assert_same_counts(f.elements, reference_counts(text.replace("[", "(").replace("]", ")")))
    assert f.charge == 0 and f.state is None and f.hydrate == 0
    assert dict(f.core) == dict(f.elements)


@settings(max_examples=150, deadline=None)
@given(formulas())
def test_hill_text_parses_back_to_the_same_core(piece: Piece) -> None:
    f = parse_formula(piece[0])
    back = parse_formula(f.hill())
    assert dict(back.core) == dict(f.core)  # exact: counts are written with repr digits


SUPER = str.maketrans("0123456789+-", "⁰¹²³⁴⁵⁶⁷⁸⁹⁺⁻")


@settings(max_examples=120, deadline=None)
@given(formulas(), st.integers(1, 9), st.sampled_from([1, -1]), st.sampled_from(["", "(aq)"]))
def test_explicit_charge_spellings_keep_the_counts(
    piece: Piece, k: int, sign: int, state: str
) -> None:
    text, counts = piece
    s = "+" if sign > 0 else "-"
    for spelled in (
        f"{text}^{k}{s}",
        f"{text}^{{{k}{s}}}",
        f"{text} {k}{s}",
        f"{text}{s}{k}",
        f"{text}({k}{s})",
        f"[{text}]{k}{s}",
        f"{text}{(str(k) + s).translate(SUPER)}",
    ):
        f = parse_formula(spelled + state)
        assert f.charge == sign * k, spelled
        assert f.state == (state.strip("()") or None)
        assert_same_counts(f.elements, counts)


@settings(max_examples=120, deadline=None)
@given(formulas(), st.integers(1, 12), st.sampled_from(["·", "•", "*", " · ", "."]))
def test_hydrate_spellings_add_water(piece: Piece, n: int, dot: str) -> None:
    text, counts = piece
    f = parse_formula(f"{text}{dot}{n}H2O")
    assert f.hydrate == n
    assert_same_counts(f.core, counts)
    assert_same_counts(f.elements, _add(dict(counts), {"H": 2.0, "O": 1.0}, n))
