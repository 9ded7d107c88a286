"""End to end: user-defined cycle tables (steps, ΔH, multiplier) through sheetcycle.api.annotate.

Reference numbers, each named beside its check (all from memory):

* NaCl Born-Haber steps, kJ/mol: ΔatH(Na) 107.3 (NIST-JANAF ΔfH Na(g)), IE1(Na) 495.8 (NIST
  ASD, 5.139 eV), ½D(Cl2) 121.3 (CODATA key value ΔfH Cl(g)), electron gain of Cl −348.6
  (EA 3.613 eV, NIST), ΔfH(NaCl, s) −411.2 (CODATA / NBS). The cycle gives the lattice
  formation enthalpy −787 kJ/mol, the CRC Handbook's 787 kJ/mol lattice enthalpy of NaCl;
* Hess's law for CO: ΔfH CO2(g) −393.5 (CODATA key value), ΔcH CO(g) −283.0 and hence ΔfH
  CO(g) −110.5 (NBS tables);
* MgCl2: ΔatH(Mg) 147.1 (NIST-JANAF ΔfH Mg(g)), IE1 737.7 and IE2 1450.7 (NIST ASD),
  ΔfH(MgCl2, s) −641.3 (NBS tables), with the Cl values above; the CRC Handbook lattice
  enthalpy of MgCl2 is 2526 kJ/mol;
* uncertainties combine in quadrature, u² = Σ (m·u_k)² for independent inputs: the GUM's law
  of propagation of uncertainty (JCGM 100:2008, §5.1.2).
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import openpyxl
import pytest

from sheetcycle.api import annotate
from sheetcycle.cli import main
from sheetcycle.model import RowResult, RunResult
from sheetcycle.pipeline import Settings

HEADER = ("Step", "ΔH (step) / kJ mol-1", "Multiplier")
LATTICE = "Na+(g) + Cl-(g) -> NaCl(s)"
NACL: list[list[object]] = [
    ["Na(s) -> Na(g)", 107.3, None],  # NIST-JANAF, from memory
    ["Na(g) -> Na+(g) + e-", 495.8, None],  # NIST ASD, from memory
    ["1/2 Cl2(g) -> Cl(g)", 121.3, None],  # CODATA, from memory
    ["Cl(g) + e- -> Cl-(g)", -348.6, None],  # electron gain, NIST, from memory
    [LATTICE, None, None],
    ["Na(s) + 1/2 Cl2(g) -> NaCl(s)", -411.2, -1],  # CODATA / NBS, from memory
]
CO: list[list[object]] = [
    ["C(graphite) + O2(g) -> CO2(g)", -393.5, -1],  # CODATA key value, from memory
    ["CO(g) + 1/2 O2(g) -> CO2(g)", -283.0, None],  # NBS, from memory
    ["C(graphite) + 1/2 O2(g) -> CO(g)", None, None],
]


def cycle_book(
    path: Path, rows: list[list[object]], header: tuple[str, ...] = HEADER, sheet: str = "Cycle"
) -> Path:
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = sheet
    ws.append(list(header))
    for r in rows:
        ws.append(r)
    wb.save(path)
    return path


def cycle_rows(run: RunResult, sheet: str = "Cycle") -> list[RowResult]:
    return [r for r in run.rows if r.sheet == sheet]


def codes(r: RowResult) -> list[str]:
    return [f.code for f in r.flags]


def all_codes(rows: list[RowResult]) -> list[str]:
    return [c for r in rows for c in codes(r)]


def test_nacl_born_haber_steps_give_the_lattice_enthalpy(tmp_path: Path) -> None:
    rows = cycle_rows(annotate(cycle_book(tmp_path / "c.xlsx", NACL)))
    assert [r.formula for r in rows] == [r[0] for r in NACL]
    assert [r.row for r in rows] == [2, 3, 4, 5, 6, 7]
    lattice = rows[4]
    v = lattice.values["step_enthalpy"]
    assert v.value == pytest.approx(-787.0, abs=1.0)  # CRC lattice enthalpy 787, from memory
    assert v.unit == "kJ/mol"
    assert v.method == "user-defined cycle solved for this step"
    assert math.isnan(v.uncertainty)  # no step gave one: none is made up
    # The other steps' cells are the sources; the formation step enters backwards.
    assert set(v.sources) == {"Cycle!B2", "Cycle!B3", "Cycle!B4", "Cycle!B5", "Cycle!B7 × -1"}
    (note,) = [f for f in lattice.flags if f.code == "term-derived"]
    assert note.cell == "B6" and "-787.0" in note.message
    assert all(not r.values for k, r in enumerate(rows) if k != 4)
    assert "cycle-residual" not in all_codes(rows)


def test_states_written_differently_still_chain(tmp_path: Path) -> None:
    # 'cr' and 's' are the same state (IUPAC Green Book symbols, from memory).
    rows = [list(r) for r in NACL]
    rows[5][0] = "Na(cr) + 1/2 Cl2(g) -> NaCl(cr)"
    got = cycle_rows(annotate(cycle_book(tmp_path / "c.xlsx", rows)))
    assert got[4].values["step_enthalpy"].value == pytest.approx(-787.0, abs=1.0)  # CRC


def test_uncertainties_combine_in_quadrature(tmp_path: Path) -> None:
    header = (*HEADER, "u(ΔH step)")
    rows = [[*r, u] for r, u in zip(NACL, (0.7, 0.1, 0.1, 0.2, None, 0.5), strict=True)]
    (lattice,) = [
        r
        for r in cycle_rows(annotate(cycle_book(tmp_path / "c.xlsx", rows, header)))
        if "step_enthalpy" in r.values
    ]
    v = lattice.values["step_enthalpy"]
    assert v.value == pytest.approx(-787.0, abs=1.0)  # CRC, from memory
    # GUM law of propagation (JCGM 100:2008): independent inputs, |m| = 1 each.
    assert v.uncertainty == pytest.approx(math.sqrt(0.7**2 + 0.1**2 + 0.1**2 + 0.2**2 + 0.5**2))


def test_hess_cycle_for_carbon_monoxide(tmp_path: Path) -> None:
    rows = cycle_rows(annotate(cycle_book(tmp_path / "c.xlsx", CO)))
    v = rows[2].values["step_enthalpy"]
    assert v.value == pytest.approx(-110.5, abs=0.2)  # NBS ΔfH CO(g), from memory
    assert not [c for c in all_codes(rows) if c.startswith("cycle-")]


def test_steps_written_as_two_routes_are_unchained_with_the_species_named(
    tmp_path: Path,
) -> None:
    # Every step written forwards (two routes to CO2, not a loop): nothing cancels.
    rows = [[r[0], r[1], None] for r in CO]
    got = cycle_rows(annotate(cycle_book(tmp_path / "c.xlsx", rows)))
    assert not any(r.values for r in got)
    (flag,) = [f for f in got[0].flags if f.code == "cycle-steps-unchained"]
    assert flag.severity.value == "error" and flag.cell == "A2"
    # Net over the loop, by hand: C 2 used, O2 2 used, CO2 2 formed; CO cancels.
    assert "C(graphite): 2 more used than formed" in flag.message
    assert "O2(g): 2 more used than formed" in flag.message
    assert "CO2(g): 2 more formed than used" in flag.message
    assert "CO(g)" not in flag.message.split("do not chain")[1].split(". Around")[0]
    # Reversing the first step is the one single change that closes it.
    assert "row 2 with multiplier -1 instead of 1 (the step run backwards)" in flag.message


def test_a_missing_step_names_the_fractional_leftover(tmp_path: Path) -> None:
    rows = [r for r in NACL if not r[0].startswith("Na(s) + ")]  # the formation step left out
    got = cycle_rows(annotate(cycle_book(tmp_path / "c.xlsx", rows)))
    (flag,) = [f for f in got[0].flags if f.code == "cycle-steps-unchained"]
    assert "Na(s): 1 more used than formed" in flag.message
    assert "Cl2(g): 1/2 more used than formed" in flag.message
    assert "NaCl(s): 1 more formed than used" in flag.message
    assert "step_enthalpy" not in got[4].values


def test_two_unknowns_are_flagged_on_both_rows(tmp_path: Path) -> None:
    rows = [list(r) for r in NACL]
    rows[3][1] = None  # the electron gain blank as well as the lattice step
    got = cycle_rows(annotate(cycle_book(tmp_path / "c.xlsx", rows)))
    assert not any(r.values for r in got)
    flagged = [(r.row, f) for r in got for f in r.flags if f.code == "cycle-unknowns"]
    assert [(row, f.cell) for row, f in flagged] == [(5, "B5"), (6, "B6")]
    assert all("rows 5, 6" in f.message and f.severity.value == "error" for _, f in flagged)


def mgcl2_rows(cl_multiplier: object = 2) -> list[list[object]]:
    return [
        ["Mg(s) -> Mg(g)", 147.1, None],  # NIST-JANAF, from memory
        ["Mg(g) -> Mg+(g) + e-", 737.7, None],  # NIST ASD, from memory
        ["Mg+(g) -> Mg2+(g) + e-", 1450.7, None],  # NIST ASD, from memory
        ["1/2 Cl2(g) -> Cl(g)", 121.3, 2],  # CODATA, from memory
        ["Cl(g) + e- -> Cl-(g)", -348.6, cl_multiplier],  # NIST, from memory
        ["Mg2+(g) + 2 Cl-(g) -> MgCl2(s)", None, None],
        ["MgCl2(s) -> Mg(s) + Cl2(g)", 641.3, None],  # NBS ΔfH −641.3 reversed, from memory
    ]


def test_multiplier_two_for_magnesium_chloride(tmp_path: Path) -> None:
    got = cycle_rows(annotate(cycle_book(tmp_path / "c.xlsx", mgcl2_rows())))
    v = got[5].values["step_enthalpy"]
    # Hess's law over the inputs above, by hand: −(147.1 + 737.7 + 1450.7 + 2·121.3
    # − 2·348.6 + 641.3) = −2522.2 kJ/mol.
    assert v.value == pytest.approx(-2522.2, abs=0.05)
    assert v.value == pytest.approx(-2526, rel=0.005)  # CRC lattice enthalpy, from memory
    assert "Cycle!B5 × 2" in v.sources and "Cycle!B6 × 2" in v.sources


def test_a_forgotten_multiplier_is_pointed_at(tmp_path: Path) -> None:
    got = cycle_rows(annotate(cycle_book(tmp_path / "c.xlsx", mgcl2_rows(cl_multiplier=None))))
    (flag,) = [f for f in got[0].flags if f.code == "cycle-steps-unchained"]
    assert "Cl-(g): 1 more used than formed" in flag.message
    assert "row 6 with multiplier 2 instead of 1" in flag.message


def test_closed_cycle_reports_its_residual(tmp_path: Path) -> None:
    rows = [list(r) for r in NACL]
    rows[4][1] = -787.0  # CRC lattice enthalpy, from memory
    got = cycle_rows(annotate(cycle_book(tmp_path / "c.xlsx", rows)))
    v = got[0].values["cycle_residual"]
    # 107.3 + 495.8 + 121.3 − 348.6 − 787.0 + 411.2 = 0.0, by hand
    assert v.value == pytest.approx(0.0, abs=0.05)
    assert "cycle-residual" not in all_codes(got)
    assert all("cycle_residual" not in r.values for r in got[1:])


def test_a_sign_slip_does_not_close_and_is_named(tmp_path: Path) -> None:
    rows = [list(r) for r in NACL]
    rows[4][1] = -787.0  # CRC, from memory
    rows[3][1] = 348.6  # the electron affinity (released) typed where the gain belongs
    got = cycle_rows(annotate(cycle_book(tmp_path / "c.xlsx", rows)))
    assert got[0].values["cycle_residual"].value == pytest.approx(697.2, abs=0.05)  # 2 × 348.6
    (flag,) = [f for f in got[0].flags if f.code == "cycle-residual"]
    assert flag.severity.value == "warning" and flag.cell == "B2"
    assert "+697.2" in flag.message and "Cl(g) + e- -> Cl-(g)" in flag.message


def test_the_residual_is_judged_against_the_run_tolerance(tmp_path: Path) -> None:
    rows = [list(r) for r in NACL]
    rows[4][1] = -782.0  # 5 kJ/mol away from the CRC value 787 (from memory)
    src = cycle_book(tmp_path / "c.xlsx", rows)
    loose = cycle_rows(annotate(src, settings=Settings(tolerance=10.0)))
    assert loose[0].values["cycle_residual"].value == pytest.approx(5.0, abs=0.05)
    assert "cycle-residual" not in all_codes(loose)
    tight = cycle_rows(annotate(src, settings=Settings(tolerance=2.0)))
    assert "cycle-residual" in codes(tight[0])


def test_several_cycles_in_one_table(tmp_path: Path) -> None:
    header = (*HEADER, "Cycle")
    rows = [[*r, "NaCl" if k == 0 else None] for k, r in enumerate(NACL)]
    rows += [[*r, "CO"] for r in CO]  # an id on every row works as well as on the first
    got = cycle_rows(annotate(cycle_book(tmp_path / "c.xlsx", rows, header)))
    solved = {r.formula: r.values["step_enthalpy"].value for r in got if r.values}
    assert solved[LATTICE] == pytest.approx(-787.0, abs=1.0)  # CRC, from memory
    assert solved[CO[2][0]] == pytest.approx(-110.5, abs=0.2)  # NBS, from memory
    assert not [c for c in all_codes(got) if c.startswith("cycle-")]


def test_without_a_cycle_column_the_whole_table_is_one_cycle(tmp_path: Path) -> None:
    got = cycle_rows(annotate(cycle_book(tmp_path / "c.xlsx", NACL + CO)))
    assert "cycle-unknowns" in all_codes(got)  # two blanks in one loop
    assert not any(r.values for r in got)


def test_an_unreadable_step_is_flagged_and_its_cycle_not_checked(tmp_path: Path) -> None:
    rows = [list(r) for r in NACL]
    rows[0][0] = "Na(s) Na(g)"  # no arrow
    got = cycle_rows(annotate(cycle_book(tmp_path / "c.xlsx", rows)))
    (flag,) = [f for f in got[0].flags if f.code == "cycle-step-unreadable"]
    assert flag.cell == "A2" and "arrow" in flag.message
    assert not any(r.values for r in got)
    assert "cycle-steps-unchained" not in all_codes(got)


def test_a_multiplier_that_is_not_a_number(tmp_path: Path) -> None:
    rows = [list(r) for r in NACL]
    rows[5][2] = "backwards"
    got = cycle_rows(annotate(cycle_book(tmp_path / "c.xlsx", rows)))
    assert any(f.code == "cycle-step-unreadable" and f.cell == "C7" for f in got[5].flags)
    assert not any(r.values for r in got)


def test_steps_without_electrons_warn_but_still_solve(tmp_path: Path) -> None:
    rows = [list(r) for r in NACL]
    rows[1][0] = "Na(g) -> Na+(g)"
    rows[3][0] = "Cl(g) -> Cl-(g)"
    got = cycle_rows(annotate(cycle_book(tmp_path / "c.xlsx", rows)))
    assert codes(got[1]).count("cycle-step-unbalanced") == 1
    assert codes(got[3]).count("cycle-step-unbalanced") == 1
    assert got[4].values["step_enthalpy"].value == pytest.approx(-787.0, abs=1.0)  # CRC


def test_a_bare_delta_h_header_is_explained(tmp_path: Path) -> None:
    run = annotate(cycle_book(tmp_path / "c.xlsx", NACL, ("Step", "ΔH / kJ mol-1", "Multiplier")))
    got = cycle_rows(run)
    assert len(got) == 6 and not any(r.values for r in got)
    (flag,) = [f for f in run.file_flags if f.code == "cycle-enthalpy-column"]
    assert flag.cell == "B1" and "ΔH (step)" in flag.message
    assert "cycle-unknowns" not in all_codes(got)  # the header is the problem, said once


def test_json_report_names(tmp_path: Path) -> None:
    src = cycle_book(tmp_path / "c.xlsx", NACL)
    out = tmp_path / "report.json"
    assert main(["annotate", str(src), "--json", str(out)]) == 0
    data = json.loads(out.read_text(encoding="utf-8"))
    cyc = [r for r in data["rows"] if r["sheet"] == "Cycle"]
    assert [r["formula"] for r in cyc][4] == LATTICE
    v = cyc[4]["values"]["step_enthalpy"]
    assert v["value"] == pytest.approx(-787.0, abs=1.0)  # CRC, from memory
    assert v["unit"] == "kJ/mol" and v["uncertainty"] is None

    closed = [list(r) for r in NACL]
    closed[4][1] = -787.0  # CRC, from memory
    src2 = cycle_book(tmp_path / "c2.xlsx", closed)
    out2 = tmp_path / "report2.json"
    assert main(["annotate", str(src2), "--json", str(out2)]) == 0
    data2 = json.loads(out2.read_text(encoding="utf-8"))
    first = next(r for r in data2["rows"] if r["sheet"] == "Cycle")
    assert first["values"]["cycle_residual"]["value"] == pytest.approx(0.0, abs=0.05)


def test_cycle_table_beside_a_compound_table(tmp_path: Path) -> None:
    # A compound sheet in the same workbook keeps its own results; the cycle sheet adds rows.
    path = cycle_book(tmp_path / "c.xlsx", NACL)
    wb = openpyxl.load_workbook(path)
    ws = wb.create_sheet("Salts")
    ws.append(["Formula", "ΔfH° / kJ mol-1"])
    ws.append(["NaCl", -411.2])  # CODATA / NBS, from memory
    wb.save(path)
    run = annotate(path)
    salt = next(r for r in run.rows if r.sheet == "Salts")
    assert salt.values["lattice_enthalpy"].value == pytest.approx(787, abs=3)  # CRC, from memory
    step = cycle_rows(run)[4].values["step_enthalpy"]
    assert step.value == pytest.approx(-787.0, abs=1.0)  # CRC, from memory
