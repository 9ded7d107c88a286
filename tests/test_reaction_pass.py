"""End to end: reaction tables in workbooks, ΔrH by Hess's law, through sheetcycle.api.annotate.

Reference numbers, each named beside its check:

* standard combustion enthalpy of methane to CO2(g) and H2O(l): −890.3 kJ/mol, from the
  NBS tables / NIST-JANAF formation enthalpies (ΔfH CH4(g) −74.87, CO2(g) −393.51,
  H2O(l) −285.83; from memory);
* thermite, 2 Al + Fe2O3 → Al2O3 + 2 Fe: −851.5 kJ/mol from the NBS tables (ΔfH Al2O3
  −1675.7, Fe2O3 −824.2; from memory);
* n-octane: ΔfH°(l) −250.1 kJ/mol and ΔcH°(l) −5470 kJ/mol, NIST Chemistry WebBook (from
  memory);
* NaOH(s) → Na+(aq) + OH−(aq): −44.51 kJ/mol, CRC Handbook "Enthalpy of Solution of
  Electrolytes" (from memory);
* at 1000 K: NIST-JANAF ΔfH°(1000 K) of CH4(g) −89.849, CO2(g) −394.623, H2O(g) −247.857,
  CO(g) −111.983 kJ/mol (from memory); as ΔrH(T) = Σ ν ΔfH(T) for a balanced reaction, these
  give ΔrH(1000 K) = −800.49 for CH4 + 2 O2 → CO2 + 2 H2O(g) and −282.64 for CO + ½ O2 → CO2;
* molar masses from the IUPAC standard atomic weights (Al 26.982, Fe 55.845, O 15.999).
"""

from __future__ import annotations

import json
import re
from pathlib import Path

import openpyxl
import pytest

from sheetcycle.api import annotate
from sheetcycle.cli import main
from sheetcycle.model import RowResult, RunResult
from sheetcycle.pipeline import Settings

METHANE = "CH4(g) + 2 O2(g) -> CO2(g) + 2 H2O(l)"
THERMITE = "2 Al(s) + Fe2O3(s) → Al2O3(s) + 2 Fe(s)"


def reaction_book(path: Path, rows: list[list[object]],
                  header: tuple[str, ...] = ("Reaction", "ΔrH / kJ mol-1", "T / K"),
                  compounds: list[list[object]] | None = None) -> Path:
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Reactions"
    ws.append(list(header))
    for r in rows:
        ws.append(r)
    if compounds is not None:
        ws2 = wb.create_sheet("Data")
        ws2.append(["Formula", "State", "ΔfH° / kJ mol-1", "u(ΔfH)"])
        for r in compounds:
            ws2.append(r)
    wb.save(path)
    return path


def reaction_rows(run: RunResult) -> list[RowResult]:
    return [r for r in run.rows if r.sheet == "Reactions"]


def codes(r: RowResult) -> list[str]:
    return [f.code for f in r.flags]


def test_combustion_and_thermite_match_the_formation_tables(tmp_path: Path) -> None:
    src = reaction_book(tmp_path / "r.xlsx", [[METHANE, None, None], [THERMITE, None, None]])
    methane, thermite = reaction_rows(annotate(src))
    assert methane.formula == METHANE and methane.row == 2
    v = methane.values["reaction_enthalpy"]
    assert v.value == pytest.approx(-890.3, abs=0.5)  # NBS / NIST-JANAF, from memory
    assert 0 < v.uncertainty < 2  # CODATA / JANAF uncertainties are a few tenths of a kJ
    assert any("CH4(g)" in s and "built-in" in s for s in v.sources)
    assert thermite.values["reaction_enthalpy"].value == pytest.approx(-851.5, abs=0.5)  # NBS


def test_thermite_caution_per_mole_and_per_kilogram_of_reactants(tmp_path: Path) -> None:
    src = reaction_book(tmp_path / "r.xlsx", [[THERMITE, None, None]])
    (row,) = reaction_rows(annotate(src))
    (caution,) = [f for f in row.flags if f.code == "heat-release-caution"]
    m = re.search(r"about ([0-9.]+) kJ per mol \(([0-9.]+) kJ per kg of reactants\)",
                  caution.message)
    assert m is not None, caution.message
    reactants = 2 * 26.982 + 2 * 55.845 + 3 * 15.999  # g, IUPAC standard atomic weights
    assert float(m.group(1)) == pytest.approx(851.5, rel=5e-3)  # NBS, from memory
    assert float(m.group(2)) == pytest.approx(851.5 / reactants * 1000, rel=5e-3)
    for words in ("estimate", "calorimetry", "hazard assessment", "scale-up",
                  "local codes and licensed practice govern"):
        assert words in caution.message


def test_unbalanced_equation_is_flagged_and_gets_no_value(tmp_path: Path) -> None:
    src = reaction_book(tmp_path / "r.xlsx", [["CH4(g) + O2(g) -> CO2(g) + H2O(l)", None, None]])
    (row,) = reaction_rows(annotate(src))
    assert row.values == {}
    (flag,) = [f for f in row.flags if f.code == "reaction-unbalanced"]
    assert flag.severity.value == "error" and flag.cell == "A2"
    assert "H" in flag.message and "O" in flag.message


def test_species_without_data_is_named(tmp_path: Path) -> None:
    src = reaction_book(tmp_path / "r.xlsx", [["C8H18(l) + 25/2 O2(g) -> 8 CO2(g) + 9 H2O(l)",
                                               None, None]])
    (row,) = reaction_rows(annotate(src))
    assert "reaction_enthalpy" not in row.values
    (flag,) = [f for f in row.flags if f.code == "species-data-missing"]
    assert "C8H18(l)" in flag.message and "CO2" not in flag.message


def test_given_enthalpy_yields_the_missing_formation_enthalpy(tmp_path: Path) -> None:
    src = reaction_book(tmp_path / "r.xlsx", [["C8H18(l) + 25/2 O2(g) -> 8 CO2(g) + 9 H2O(l)",
                                               -5470, None]])  # NIST WebBook, from memory
    (row,) = reaction_rows(annotate(src))
    v = row.values["species_formation_enthalpy"]
    assert v.value == pytest.approx(-250.1, abs=2.0)  # NIST WebBook ΔfH°(l), from memory
    assert "C8H18(l)" in v.method


def test_species_come_from_the_workbook_compound_tables(tmp_path: Path) -> None:
    src = reaction_book(
        tmp_path / "r.xlsx",
        [["C8H18(l) + 12.5 O2(g) => 8 CO2(g) + 9 H2O(l)", None, None]],
        compounds=[["C8H18", "liquid", -250.1, 0.5]],  # NIST WebBook, from memory
    )
    (row,) = reaction_rows(annotate(src))
    v = row.values["reaction_enthalpy"]
    assert v.value == pytest.approx(-5470, abs=3)  # NIST WebBook ΔcH°, from memory
    assert any(s.startswith("ΔfH(C8H18(l)): workbook Data!C2") for s in v.sources)


def test_given_enthalpy_far_from_hess_is_flagged(tmp_path: Path) -> None:
    # −802.3 is methane burnt to water vapour (NBS/JANAF, from memory), given for H2O(l)
    src = reaction_book(tmp_path / "r.xlsx", [[METHANE, -802.3, None], [METHANE, -890.3, None]])
    wrong, right = reaction_rows(annotate(src))
    assert "reaction-differs" in codes(wrong)
    assert "reaction-differs" not in codes(right)


def test_dissolution_written_as_a_reaction(tmp_path: Path) -> None:
    src = reaction_book(tmp_path / "r.xlsx", [["NaOH(s) -> Na+(aq) + OH-(aq)", None, None]])
    (row,) = reaction_rows(annotate(src))
    assert row.values["reaction_enthalpy"].value == pytest.approx(-44.51, abs=1.0)  # CRC
    (caution,) = [f for f in row.flags if f.code == "heat-release-caution"]
    assert "dissolution" in caution.message and "per kg of salt" in caution.message


def test_reversed_equations_give_the_negative(tmp_path: Path) -> None:
    forward = [METHANE, THERMITE, "H2(g) + 1/2 O2(g) = H2O(l)", "CaCO3(s) -> CaO(s) + CO2(g)",
               "NH3(g) + HCl(g) -> NH4Cl(s)"]
    backward = ["CO2(g) + 2 H2O(l) -> CH4(g) + 2 O2(g)", "Al2O3(s) + 2 Fe(s) = 2 Al(s) + Fe2O3(s)",
                "H2O(l) -> H2(g) + 1/2 O2(g)", "CaO(s) + CO2(g) -> CaCO3(s)",
                "NH4Cl(s) -> NH3(g) + HCl(g)"]
    src = reaction_book(tmp_path / "r.xlsx", [[e, None, None] for e in forward + backward])
    rows = reaction_rows(annotate(src))
    n = len(forward)
    for f, b in zip(rows[:n], rows[n:], strict=True):
        vf, vb = f.values["reaction_enthalpy"], b.values["reaction_enthalpy"]
        assert vb.value == pytest.approx(-vf.value, abs=1e-9), (f.formula, b.formula)
    # CaCO3 decomposition +178.3 kJ/mol from the NBS tables (from memory): no caution
    assert rows[3].values["reaction_enthalpy"].value == pytest.approx(178.3, abs=0.5)
    assert "heat-release-caution" not in codes(rows[3])


def test_kirchhoff_at_1000_kelvin_matches_janaf(tmp_path: Path) -> None:
    src = reaction_book(tmp_path / "r.xlsx", [
        ["CH4(g) + 2 O2(g) -> CO2(g) + 2 H2O(g)", None, None],
        ["CO(g) + ½ O2(g) -> CO2(g)", None, None],
    ])
    methane, co = reaction_rows(annotate(src, settings=Settings(temperature=1000.0)))
    # NIST-JANAF ΔfH°(1000 K) sums, from memory (see the module docstring)
    assert methane.values["reaction_enthalpy_at_T"].value == pytest.approx(-800.49, abs=0.5)
    assert co.values["reaction_enthalpy_at_T"].value == pytest.approx(-282.64, abs=0.5)
    assert "1000 K" in methane.values["reaction_enthalpy_at_T"].method
    assert any("Shomate" in s for s in co.values["reaction_enthalpy_at_T"].sources)


def test_temperature_column_and_range_checks(tmp_path: Path) -> None:
    src = reaction_book(tmp_path / "r.xlsx", [
        ["CO(g) + 1/2 O2(g) -> CO2(g)", None, 1000],
        [METHANE, None, 600],   # liquid water's Shomate set ends at 500 K (NIST WebBook)
        [THERMITE, None, 500],  # no built-in heat capacities for the solids
    ])
    co, methane, thermite = reaction_rows(annotate(src))
    assert co.values["reaction_enthalpy_at_T"].value == pytest.approx(-282.64, abs=0.5)  # JANAF
    assert "reaction_enthalpy_at_T" not in methane.values
    (oor,) = [f for f in methane.flags if f.code == "temperature-out-of-range"]
    assert "H2O(l)" in oor.message and "CO2" not in oor.message
    assert "reaction_enthalpy_at_T" not in thermite.values
    (miss,) = [f for f in thermite.flags if f.code == "heat-capacity-missing"]
    assert "Fe2O3(s)" in miss.message


def test_constant_heat_capacity_column(tmp_path: Path) -> None:
    # ΔrCp of H2(g) + ½ O2(g) → H2O(l) at 298.15 K from NBS Cp values (H2O(l) 75.29,
    # H2(g) 28.82, O2(g) 29.36 J/(mol K); from memory): 75.29 − 28.82 − 14.68 = 31.79.
    src = reaction_book(tmp_path / "r.xlsx", [["H2(g) + 1/2 O2(g) -> H2O(l)", 350, 31.79]],
                        header=("Reaction", "T / K", "Cp / J K-1 mol-1"))
    (row,) = reaction_rows(annotate(src))
    v = row.values["reaction_enthalpy_at_T"]
    # Kirchhoff with constant ΔrCp over 51.85 K, ΔfH(H2O, l) −285.83 (CODATA, from memory)
    assert v.value == pytest.approx(-285.83 + 31.79 * (350 - 298.15) / 1000, abs=0.05)


def test_json_report_names(tmp_path: Path) -> None:
    src = reaction_book(tmp_path / "r.xlsx", [[METHANE, None, 1000]])
    out = tmp_path / "report.json"
    assert main(["annotate", str(src), "--json", str(out)]) == 0
    data = json.loads(out.read_text(encoding="utf-8"))
    (row,) = [r for r in data["rows"] if r["sheet"] == "Reactions"]
    assert row["formula"] == METHANE
    assert row["values"]["reaction_enthalpy"]["value"] == pytest.approx(-890.3, abs=0.5)
    assert "heat-release-caution" in [f["code"] for f in row["flags"]]
    # the methane row asks for 1000 K, where H2O(l) has no data: flagged, not computed
    assert "temperature-out-of-range" in [f["code"] for f in row["flags"]]


def test_json_report_has_reaction_enthalpy_at_t(tmp_path: Path) -> None:
    src = reaction_book(tmp_path / "r.xlsx", [["CO(g) + 1/2 O2(g) -> CO2(g)", None, 1000]])
    out = tmp_path / "report.json"
    assert main(["annotate", str(src), "--json", str(out)]) == 0
    data = json.loads(out.read_text(encoding="utf-8"))
    (row,) = [r for r in data["rows"] if r["sheet"] == "Reactions"]
    at_t = row["values"]["reaction_enthalpy_at_T"]
    assert at_t["value"] == pytest.approx(-282.64, abs=0.5)  # NIST-JANAF, from memory
    assert at_t["unit"] == "kJ/mol"
