"""sheetcycle's own worksheet functions (sheetcycle.io.functions), evaluated in cells.

Reference numbers, each with its source beside it: lattice enthalpies from the CRC Handbook
table of lattice energies (from memory); 1 eV and 1 cm⁻¹ per particle from the CODATA
constants as scipy.constants gives them; the thermochemical calorie 4.184 J (its
definition); the thermite enthalpy as in tests/test_hess.py; Kapustinskii energies computed
here by hand from Shannon's radii (Acta Cryst. A32 (1976) 751; from memory).
"""

from __future__ import annotations

from pathlib import Path

import openpyxl
import pytest
import scipy.constants as sc

from sheetcycle.io.cells import read_cells
from sheetcycle.io.evaluate import CellError, evaluate_cells
from sheetcycle.io.functions import (
    REGISTRY,
    CacheEntry,
    ValueEntry,
    cells_to_cache,
    uses_own_functions,
)

ROOT = Path(__file__).resolve().parents[1]


def one(formula: str, grid: list[list[object]] | None = None) -> object:
    grid = grid if grid is not None else [[]]
    row = len(grid)
    return evaluate_cells({"S": grid}, [("S", row, 0, formula)])[("S", row, 0)]


# ----------------------------------------------------------------------------- values


def test_latticeh_against_handbook_values() -> None:
    # CRC Handbook, "Lattice Energies" (Born-Haber values): NaCl 787, KCl 717 kJ/mol (from
    # memory); ΔfH° NaCl −411.2, KCl −436.5 kJ/mol (NBS tables 1982, from memory).
    assert one('=LATTICEH("NaCl", -411.2)') == pytest.approx(787, abs=4)
    assert one('=LATTICEH("KCl", -436.5)') == pytest.approx(717, abs=4)


def test_latticeh_units_convert_in_and_out() -> None:
    kj = one('=LATTICEH("NaCl", -411.2)')
    kcal = one(f'=LATTICEH("NaCl", {-411.2 / 4.184!r}, "kcal/mol")')  # 1 kcal = 4.184 kJ
    assert kcal == pytest.approx(kj / 4.184, rel=1e-12)


def test_latticeu_is_kapustinskii_with_shannon_radii() -> None:
    # U = 1.2025e5 kJ pm/mol · ν |z+ z−| / r0 · (1 − 34.5 pm / r0) (Kapustinskii 1956, as
    # in docs/lattice-models.md); Shannon CN 6: Na+ 102, Cl− 181, Mg2+ 72, O2− 140 pm.
    def kap(nu: int, z: int, r0: float) -> float:
        return 1.2025e5 * nu * z / r0 * (1 - 34.5 / r0)

    assert one('=LATTICEU("NaCl")') == pytest.approx(kap(2, 1, 102 + 181), rel=1e-9)
    assert one('=LATTICEU("MgO")') == pytest.approx(kap(2, 4, 72 + 140), rel=1e-9)
    # and within 10 % of the handbook's cycle value 787 (Kapustinskii's usual accuracy)
    assert abs(one('=LATTICEU("NaCl")') - 787) / 787 < 0.10


def test_unitconv_against_codata() -> None:
    ev = sc.e * sc.N_A / 1000  # kJ/mol per eV per particle (CODATA via scipy)
    assert one('=UNITCONV(1, "eV", "kJ/mol")') == pytest.approx(ev, rel=1e-9)
    assert ev == pytest.approx(96.485, abs=1e-3)
    wavenumber = sc.h * sc.c * 100 * sc.N_A / 1000  # 1 cm−1 per particle in kJ/mol
    assert one('=UNITCONV(1, "cm-1", "kJ/mol")') == pytest.approx(wavenumber, rel=1e-9)
    assert one('=UNITCONV(1, "kcal/mol", "kJ/mol")') == pytest.approx(4.184, rel=1e-12)
    assert one('=UNITCONV(25, "°C", "K")') == pytest.approx(298.15, rel=1e-12)
    assert one('=UNITCONV(1, "Å", "pm")') == pytest.approx(100.0, rel=1e-12)


def test_rxnh_against_published_reaction_enthalpies() -> None:
    # Thermite: −851.5 kJ/mol from NBS ΔfH of Al2O3 and Fe2O3 (from memory, as test_hess).
    assert one('=RXNH("2 Al(s) + Fe2O3(s) -> Al2O3(s) + 2 Fe(s)")') == pytest.approx(
        -851.5, abs=0.3
    )
    # States left out: each species has one tabulated state.
    assert one('=RXNH("2 Al + Fe2O3 -> Al2O3 + 2 Fe")') == pytest.approx(-851.5, abs=0.3)
    # ΔfH°(CO2, g) = −393.51 kJ/mol, CODATA Key Values 1989 (from memory).
    assert one('=RXNH("C(graphite) + O2(g) -> CO2(g)", "kcal/mol")') == pytest.approx(
        -393.51 / 4.184, abs=0.02
    )


# ----------------------------------------------------------------------------- errors


@pytest.mark.parametrize(
    "formula, code, words",
    [
        ('=RXNH("H2 + O2 -> H2O(l)")', "#VALUE!", "not balanced"),
        ('=RXNH("H2(g) + 1/2 O2(g) -> H2O")', "#N/A", "H2O(l), H2O(g)"),
        ('=RXNH("Xe(g) + 3 F2(g) -> XeF6(s)")', "#N/A", "no built-in enthalpy of formation"),
        ('=LATTICEH("XeF", -100)', "#N/A", "XeF"),
        ('=LATTICEH("NaCl", A1)', "#N/A", "formation_enthalpy is blank"),
        ('=LATTICEH("NaCl", "lots")', "#VALUE!", "not a number"),
        ('=LATTICEH("NaCl")', "#VALUE!", "takes 2 to 3 arguments"),
        ('=LATTICEU("NaCl", "furlongs")', "#VALUE!", "furlongs"),
        ('=LATTICEU("Xq2O")', "#VALUE!", "Xq2O"),
        ('=UNITCONV(1, "eV", "K")', "#VALUE!", "cannot convert"),
        ('=UNITCONV(1, "eV/atom", "kJ/mol")', "#VALUE!", "per-atom"),
    ],
)
def test_errors_carry_reasons(formula: str, code: str, words: str) -> None:
    got = one(formula, [[None]])
    assert isinstance(got, CellError), got
    assert got.code == code
    assert words in got.reason


def test_error_values_flow_and_spreadsheet_error_functions_see_them() -> None:
    assert one('=LATTICEH("NaCl", 1/0)') == CellError("#DIV/0!")
    assert one('=IFNA(LATTICEH("XeF", -100), -1)') == -1.0
    assert one('=ISNA(LATTICEH("XeF", -100))') is True
    assert one('=IFERROR(UNITCONV(1, "eV", "K"), "no")') == "no"
    got = one('=LATTICEH("XeF", -100)*2')  # the reason survives arithmetic
    assert got.code == "#N/A" and "XeF" in got.reason


def test_column_and_single_cell_paths_agree() -> None:
    salts = ["NaCl", "KCl", "KBr", "XeF", "LiF", None, "NaCl"]
    dhf = [-411.2, -436.5, -393.8, -100.0, -616.0, -1.0, None]
    pairs = enumerate(zip(salts, dhf, strict=True))
    grid: list[list[object]] = [[s, h, 1.0 + n] for n, (s, h) in pairs]
    shapes = ["=LATTICEH(A{r}, B{r})", "=LATTICEU(A{r})", '=UNITCONV(C{r}, "eV", "kJ/mol")']
    for shape in shapes:
        targets = [("S", r, 3, shape.format(r=r + 1)) for r in range(len(grid))]
        together = evaluate_cells({"S": [list(x) for x in grid]}, targets)
        for t in targets:
            alone = evaluate_cells({"S": [list(x) for x in grid]}, [t])
            assert together[t[:3]] == alone[t[:3]], t
    got = evaluate_cells({"S": grid}, [("S", r, 3, f'=UNITCONV(C{r + 1}, "eV", "kJ/mol")')
                                       for r in range(len(grid))])
    for r in range(len(grid)):
        assert got[("S", r, 3)] == pytest.approx((1.0 + r) * sc.e * sc.N_A / 1000, rel=1e-9)


# ----------------------------------------------------------------------------- workbooks


def function_book(tmp_path: Path) -> Path:
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Salts"
    ws.append(["Formula", "dHf (kJ/mol)", "lattice", "twice", "plain"])
    ws.append(["NaCl", -411.2, "=LATTICEH(A2,B2)", "=C2*2", "=B2*4.184"])
    ws.append(["KCl", -436.5, "=_xludf.LATTICEH(A3,B3)", "=C3*2", "=B3*4.184"])
    ws["F2"] = '=UNITCONV(1,"eV","kJ/mol")'
    path = tmp_path / "functions.xlsx"
    wb.save(path)
    return path


def test_functions_in_a_workbook_are_evaluated_on_read(tmp_path: Path) -> None:
    book = read_cells(function_book(tmp_path))
    rows = book.sheet("Salts").rows
    assert rows[1][2] == pytest.approx(787, abs=4)  # CRC, from memory (as above)
    assert rows[2][2] == pytest.approx(717, abs=4)
    assert rows[1][3] == pytest.approx(2 * rows[1][2], rel=1e-15)
    assert rows[1][5] == pytest.approx(sc.e * sc.N_A / 1000, rel=1e-9)


def test_cells_to_cache_and_replace_by_values(tmp_path: Path) -> None:
    book = read_cells(function_book(tmp_path))
    rows = book.sheet("Salts").rows
    entries = cells_to_cache(book)
    assert entries == [
        CacheEntry("Salts", "C2", rows[1][2]),
        CacheEntry("Salts", "F2", rows[1][5]),
        CacheEntry("Salts", "C3", rows[2][2]),
    ]
    replaced = cells_to_cache(book, replace_by_values=True)
    assert [(e.sheet, e.cell, e.value) for e in replaced] == [tuple(e) for e in entries]
    assert all(isinstance(e, ValueEntry) for e in replaced)
    assert "=LATTICEH(A2,B2)" in replaced[0].note
    assert "=_xludf.LATTICEH(A3,B3)" in replaced[2].note
    # every_formula adds the other formula cells whose cache is missing (all, here)
    everything = cells_to_cache(book, every_formula=True)
    assert {e.cell for e in everything} == {"C2", "D2", "E2", "F2", "C3", "D3", "E3"}
    assert next(e for e in everything if e.cell == "E2").value == pytest.approx(-411.2 * 4.184)


def test_uses_own_functions() -> None:
    assert uses_own_functions("=latticeh(A2,B2)")
    assert uses_own_functions("=1+_xludf.RXNH(A1)")
    assert not uses_own_functions('=CONCAT("LATTICEH(",A1)')
    assert not uses_own_functions("=MYLATTICEH(A1)")


# ----------------------------------------------------------------------------- registry


def test_every_registry_function_is_documented() -> None:
    doc = (ROOT / "docs" / "worksheet-functions.md").read_text(encoding="utf-8")
    assert REGISTRY, "the registry is empty"
    for name, spec in REGISTRY.items():
        assert f"## {spec.signature}" in doc, name
        assert spec.summary and spec.example and spec.returns
        for arg in spec.args:
            assert arg.name in doc, (name, arg.name)
            assert arg.kind in ("text", "number")


def test_registry_names_are_not_spreadsheet_builtins() -> None:
    import formulas

    # formulas' own table lists the functions of the common spreadsheet applications.
    from sheetcycle.io.functions import register

    builtin = set(formulas.get_functions())
    own = set(REGISTRY) | {"_XLUDF." + n for n in REGISTRY}
    register()
    assert not (set(REGISTRY) & (builtin - own))
    assert all(n.isupper() and n.isalpha() and len(n) <= 10 for n in REGISTRY)
