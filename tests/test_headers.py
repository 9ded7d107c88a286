"""Header recognition, checked against the spelling table in docs/headers.md.

The spellings are the symbols and words of the trade: IUPAC "Quantities, Units and Symbols
in Physical Chemistry" (Green Book, 3rd ed., 2007) §2.11 for ΔfH°, Δlatt H, ΔsolH, ΔhydH,
ΔatH, Ei / Eea and the standard-state marks ° and ⦵ (from memory); the rest (dHf, IE1,
BDE, r+, U for the lattice energy …) is common practice, no source. The Shomate
coefficient units (A–E and G in J/(mol K), F and H in kJ/mol, with t = T/1000) follow the
NIST Chemistry WebBook's Shomate equation (from memory).
"""

from __future__ import annotations

import re
from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from sheetcycle import units
from sheetcycle.errors import UnitError
from sheetcycle.io import headers
from sheetcycle.io.headers import HeaderMatch, explain, recognise, split_header

DOC = Path(__file__).resolve().parents[1] / "docs" / "headers.md"
COLUMNS = ["Header as typed", "Quantity", "Index", "Convention", "Unit part"]
GENERIC = "' is not a header sheetcycle knows; see docs/headers.md for the spellings it reads"


def _cells(line: str) -> list[str]:
    return [c.strip() for c in line.strip().strip("|").split("|")]


def _unquote(cell: str) -> str:
    if cell == "(empty)":
        return ""
    m = re.fullmatch(r"`(.*)`", cell)
    assert m, f"header cell must be in backticks: {cell!r}"
    return m.group(1)


def doc_rows() -> list[tuple[str, str, str, str, str]]:
    lines = DOC.read_text(encoding="utf-8").splitlines()
    start = next(i for i, line in enumerate(lines) if _cells(line) == COLUMNS)
    assert set(lines[start + 1].replace("|", "").strip()) <= set("-: ")
    rows = []
    for line in lines[start + 2 :]:
        if not line.strip().startswith("|"):
            break
        cells = _cells(line)
        assert len(cells) == 5, line
        rows.append((_unquote(cells[0]), cells[1], cells[2], cells[3], cells[4]))
    return rows


ROWS = doc_rows()


def test_the_doc_table_is_substantial_and_has_no_duplicates() -> None:
    assert len(ROWS) > 200
    texts = [r[0] for r in ROWS]
    assert len(texts) == len(set(texts))


def test_every_quantity_has_a_row_in_the_doc() -> None:
    documented = {r[1] for r in ROWS}
    missing = set(headers.QUANTITIES) - documented
    assert not missing, f"quantities without a spelling in docs/headers.md: {sorted(missing)}"


@pytest.mark.parametrize("row", ROWS, ids=[repr(r[0]) for r in ROWS])
def test_doc_row(row: tuple[str, str, str, str, str]) -> None:
    header, quantity, index, convention, unit = row
    match = recognise(header)
    if quantity == "rejected":
        assert match is None, f"{header!r} should be rejected, got {match}"
        why = explain(header)
        assert why != f"'{header}{GENERIC}", f"{header!r}: explain() should say why: {why}"
        return
    assert match is not None, f"{header!r} not recognised: {explain(header)}"
    m = re.fullmatch(r"uncertainty(?:\((\w+)\))?", quantity)
    if m:
        assert match.uncertainty and match.quantity == headers.UNCERTAINTY
        assert match.target == m.group(1)
    else:
        assert not match.uncertainty and match.target is None
        assert match.quantity == quantity
        assert match.kind == headers.QUANTITIES[quantity]
    assert match.index == int(index)
    assert match.convention == (None if convention == "—" else convention)
    assert match.unit_text == (None if unit == "—" else _unquote(unit))


@pytest.mark.parametrize("row", ROWS, ids=[repr(r[0]) for r in ROWS])
def test_doc_row_matches_one_quantity_only(row: tuple[str, str, str, str, str]) -> None:
    # No spelling is claimed by two quantities: the registry order must never decide.
    label = headers._normalise_label(split_header(row[0])[0])
    keys = [m.quantity.key for m in headers._match_spellings(label)]
    assert len(keys) <= 1, f"{row[0]!r} matches {keys}"


@pytest.mark.parametrize(
    ("text", "label", "unit"),
    [
        ("ΔfH° / kJ mol⁻¹", "ΔfH°", "kJ mol⁻¹"),
        ("dHf (kcal/mol)", "dHf", "kcal/mol"),
        ("IE1 [eV]", "IE1", "eV"),
        ("Hf, kJ·mol-1", "Hf", "kJ·mol-1"),
        ("ΔH_f (kJ/mol)", "ΔH_f", "kJ/mol"),
        ("EA1 in eV", "EA1", "eV"),
        ("Lattice enthalpy/kJ mol-1", "Lattice enthalpy", "kJ mol-1"),
        ("ΔfH°/(kJ mol⁻¹)", "ΔfH°", "kJ mol⁻¹"),  # ISO 80000 style: quantity/(unit)
        ("Cp (J/(mol K))", "Cp", "J/(mol K)"),
        ("T/K", "T", "K"),
        ("ΔfH°(298 K) (kJ/mol)", "ΔfH°(298 K)", "kJ/mol"),
        ("ΔatH(M)", "ΔatH(M)", None),  # brackets that are part of the label
        ("r(X)", "r(X)", None),
        ("Shomate (A)", "Shomate (A)", None),
        ("ΔhydH(M+)", "ΔhydH(M+)", None),
        ("ΔfH°(298 K)", "ΔfH°(298 K)", None),
        ("Formula", "Formula", None),
        ("  ΔfH°   /  kJ/mol ", "ΔfH°", "kJ/mol"),
        ("", "", None),
    ],
)
def test_split_header(text: str, label: str, unit: str | None) -> None:
    assert split_header(text) == (label, unit)


@pytest.mark.parametrize(
    ("text", "quantity", "index", "convention"),
    [
        ("ΔfH° / kJ mol⁻¹", "formation_enthalpy", 0, None),
        ("ΔfH⦵", "formation_enthalpy", 0, None),
        ("ΔFH", "formation_enthalpy", 0, None),  # case-insensitive
        ("∆fH°", "formation_enthalpy", 0, None),  # U+2206 increment sign for Δ
        ("Δ_{f}H^{o}", "formation_enthalpy", 0, None),  # LaTeX-ish
        ("ENTHALPY OF FORMATION", "formation_enthalpy", 0, None),
        ("ionization energy 1", "ionization_energy", 1, None),
        ("IONISATION ENERGY 2", "ionization_energy", 2, None),
        ("IE₃", "ionization_energy", 3, None),  # subscript digit
        ("atomization enthalpy of the metal", "atomization_metal", 0, None),
        ("atomisation enthalpy of non-metal", "atomization_nonmetal", 0, None),
        ("lattice energy (formation)", "lattice_energy", 0, "formation"),
        ("ΔH_L (dissociation)", "lattice_enthalpy", 0, "dissociation"),
        ("ΔhydH(M+), absolute", "hydration_cation", 0, "absolute"),
        ("ΔhydH (H+ = 0)", "hydration", 0, "conventional"),
        ("EA2 / kJ mol-1", "electron_affinity", 2, "released"),
        ("ΔegH2 / kJ mol-1", "electron_affinity", 2, "gain"),
        ("Shomate H", "shomate_h", 0, None),
    ],
)
def test_extra_spellings(text: str, quantity: str, index: int, convention: str | None) -> None:
    m = recognise(text)
    assert m is not None, explain(text)
    assert (m.quantity, m.index, m.convention) == (quantity, index, convention)


def test_case_carries_meaning_where_it_should() -> None:
    bond = recognise("D(X–X)")
    distance = recognise("d(M-X)")
    assert bond is not None and bond.quantity == "bond_dissociation"
    assert distance is not None and distance.quantity == "interionic_distance"
    assert recognise("u") == HeaderMatch("uncertainty", 0, "paired", None, None, True, None)
    lattice = recognise("U")
    assert lattice is not None and lattice.quantity == "lattice_energy"
    assert recognise("t") is None  # lower-case t is not the temperature
    assert recognise("z") is None


def test_electron_affinity_conventions() -> None:
    # FIELD: 'EA' (energy released, positive for Cl) vs electron-gain enthalpy (negative).
    for text in ("EA", "electron affinity", "E_ea", "Eea"):
        m = recognise(text)
        assert m is not None and m.convention == "released" and m.index == 1, text
    for text in ("ΔegH", "electron gain enthalpy", "ΔH_eg", "EGE"):
        m = recognise(text)
        assert m is not None and m.convention == "gain" and m.index == 1, text


def test_uncertainty_targets() -> None:
    m = recognise("u(ΔfH) / kJ mol-1")
    assert m == HeaderMatch(
        "uncertainty", 0, "energy", "kJ mol-1", None, True, "formation_enthalpy"
    )
    m = recognise("σ(r+)")
    assert m is not None and (m.target, m.kind) == ("radius_cation", "length")
    assert recognise("u(ΔfG°)") is None  # uncertainty of something not read


@pytest.mark.parametrize(
    ("text", "message"),
    [
        ("ΔfG°", "'ΔfG°' is a Gibbs energy, not an enthalpy; not used"),
        ("S°", "'S°' is an entropy, not an enthalpy; not used"),
        ("", "empty header: nothing to read"),
        ("IE", "'IE': which ionization? Write IE1, IE2 … (or 'IE1+IE2' for a sum)"),
        (
            "ΔH",
            "'ΔH' is ambiguous: which enthalpy? Add the process: ΔfH (formation), ΔH_L "
            "(lattice), ΔsolH (solution), ΔhydH (hydration), ΔatH (atomization), ΔrH (reaction)",
        ),
        (
            "A",
            "'A' is a single letter, not a quantity; for a Shomate coefficient write 'Shomate A'",
        ),
        ("ΔfG° / kJ mol-1", "'ΔfG°' is a Gibbs energy, not an enthalpy; not used"),
        (
            "Frobnication",
            "'Frobnication' is not a header sheetcycle knows; see docs/headers.md for the "
            "spellings it reads",
        ),
        (
            "IE1 [eV]",
            "'IE1 [eV]': ionization energy 1 (ionization_energy, energy), unit 'eV'",
        ),
        (
            "lattice enthalpy",
            "'lattice enthalpy': lattice enthalpy (lattice_enthalpy, energy), no unit in the "
            "header; the header does not say formation or dissociation",
        ),
        ("±", "'±': uncertainty of the column to its left, no unit in the header"),
    ],
)
def test_explain_messages(text: str, message: str) -> None:
    assert explain(text) == message


def test_kinds_fit_units_conversion() -> None:
    allowed = set(units.KINDS) | {"text"}
    assert set(headers.QUANTITIES.values()) <= allowed


@pytest.mark.parametrize(
    "row", [r for r in ROWS if r[4] != "—" and r[1] != "rejected"], ids=lambda r: repr(r[0])
)
def test_doc_units_convert_for_their_kind(row: tuple[str, str, str, str, str]) -> None:
    # The unit part of every documented header converts for the header's kind, except the
    # rows that document a wrong unit on purpose (the caller flags those).
    match = recognise(row[0])
    assert match is not None and match.unit_text is not None
    if match.kind == "paired":
        return
    wrong = {"ΔfH° / J K-1 mol-1", "ΔfH (kJ/mol-1)", "ΔatH(K)"}
    if row[0] in wrong:
        with pytest.raises(UnitError):
            units.conversion(match.unit_text, match.kind)
    else:
        conv = units.conversion(match.unit_text, match.kind)
        assert conv.factor > 0


@settings(max_examples=400, deadline=None)
@given(st.text(max_size=40))
def test_never_raise(text: str) -> None:
    m = recognise(text)
    assert m is None or isinstance(m, HeaderMatch)
    label, unit = split_header(text)
    assert isinstance(label, str) and (unit is None or isinstance(unit, str))
    assert isinstance(explain(text), str)


@settings(max_examples=300, deadline=None)
@given(st.text(alphabet="ΔdHfLIEA12()+-/ °⦵_kJmolcreVuσ±,", max_size=25))
def test_never_raise_on_header_like_text(text: str) -> None:
    recognise(text)
    split_header(text)
    assert explain(text)
