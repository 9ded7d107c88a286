"""End to end: solution enthalpies of salts from workbooks, through sheetcycle.api.annotate.

Reference numbers, each named beside its check:

* measured solution enthalpies at infinite dilution, 298.15 K: CRC Handbook of Chemistry and
  Physics, table "Enthalpy of Solution of Electrolytes" (from memory): NaCl +3.88,
  KCl +17.22, LiCl −37.03, NaOH −44.51, KNO3 +34.89 kJ/mol;
* formation enthalpies of the solids typed into the workbooks: the NBS tables (Wagman et
  al. 1982, from memory);
* lattice enthalpies: CRC Handbook table "Lattice Energies" (from memory): NaOH 887,
  KNO3 685 kJ/mol;
* molar masses from the IUPAC standard atomic weights (Na 22.990, O 15.999, H 1.008).

docs/solution-and-reactions.md gives the agreement to expect from single-ion hydration data:
about ±10–15 kJ/mol; the checks use 15 kJ/mol.
"""

from __future__ import annotations

import json
import math
import re
from pathlib import Path

import openpyxl
import pytest

from sheetcycle.api import annotate
from sheetcycle.cli import main
from sheetcycle.model import RowResult, RunResult
from sheetcycle.pipeline import Settings

SCATTER = 15.0  # kJ/mol, docs/solution-and-reactions.md "How close to expect"


def book(path: Path, header: list[str], rows: list[list[object]], sheet: str = "Salts") -> Path:
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = sheet
    ws.append(header)
    for r in rows:
        ws.append(r)
    wb.save(path)
    return path


def by_formula(run: RunResult) -> dict[str, RowResult]:
    return {r.formula: r for r in run.rows if r.formula}


def codes(r: RowResult) -> list[str]:
    return [f.code for f in r.flags]


def test_solution_enthalpies_of_alkali_chlorides_match_the_handbook(tmp_path: Path) -> None:
    src = book(tmp_path / "s.xlsx", ["Formula", "ΔfH° / kJ mol-1", "ΔsolH / kJ mol-1"], [
        ["NaCl", -411.153, None],  # NBS 1982, from memory
        ["KCl", -436.747, None],   # NBS 1982, from memory
        ["LiCl", -408.61, None],   # NBS 1982, from memory
    ])
    rows = by_formula(annotate(src))
    # CRC Handbook, Enthalpy of Solution of Electrolytes, infinite dilution (from memory)
    for formula, measured in (("NaCl", 3.88), ("KCl", 17.22), ("LiCl", -37.03)):
        v = rows[formula].values["solution_enthalpy"]
        assert v.unit == "kJ/mol"
        assert abs(v.value - measured) <= SCATTER, (formula, v.value)
        assert math.isfinite(v.uncertainty) and v.uncertainty > 0
        assert any("Born-Haber" in s for s in v.sources)
        assert any("built-in" in s and "Marcus" in s for s in v.sources)
    # none of these three passes the −40 kJ/mol dissolution threshold (docs/cautions.md)
    assert all("heat-release-caution" not in codes(r) for r in rows.values())


def test_sodium_hydroxide_gets_the_caution_per_mole_and_per_kilogram(tmp_path: Path) -> None:
    header = ["Formula", "ΔsolH / kJ mol-1", "ΔH_L (dissociation) / kJ mol-1"]
    # ΔH_L 887 kJ/mol: CRC Lattice Energies, from memory
    src = book(tmp_path / "s.xlsx", header, [["NaOH", None, 887]])
    row = by_formula(annotate(src))["NaOH"]
    v = row.values["solution_enthalpy"].value
    assert abs(v - (-44.51)) <= SCATTER  # CRC Enthalpy of Solution of Electrolytes, from memory
    assert "ions-from-hydration-table" in codes(row)  # Na+ and OH−, not a binary salt
    (caution,) = [f for f in row.flags if f.code == "heat-release-caution"]
    assert caution.severity.value == "warning"
    text = caution.message
    m = re.search(r"about ([0-9.]+) kJ per mol \(([0-9.]+) kJ per kg of salt\)", text)
    assert m is not None
    per_kg = -v / (22.990 + 15.999 + 1.008) * 1000  # IUPAC standard atomic weights
    assert float(m.group(1)) == pytest.approx(-v, rel=5e-3)  # three significant figures
    assert float(m.group(2)) == pytest.approx(per_kg, rel=5e-3)
    for words in ("estimate", "calorimetry", "hazard assessment", "scale-up",
                  "local codes and licensed practice govern"):
        assert words in text


def test_given_solution_enthalpy_gives_the_lattice_enthalpy(tmp_path: Path) -> None:
    # KNO3 is not a binary salt, so there is no Born-Haber value: the solution cycle gives it
    src = book(tmp_path / "s.xlsx", ["Formula", "ΔsolH / kJ mol-1"], [["KNO3", 34.89]])
    row = by_formula(annotate(src))["KNO3"]  # ΔsolH: CRC, from memory
    lat = row.values["lattice_enthalpy"]
    assert abs(lat.value - 685) <= SCATTER  # CRC Lattice Energies, from memory
    assert "solution cycle" in lat.method
    assert "term-derived" in codes(row)
    assert "solution_enthalpy" not in row.values


def test_given_solution_enthalpy_far_from_the_cycle_is_flagged(tmp_path: Path) -> None:
    # +38.8 is the CRC value of NaCl with a slipped decimal point (3.88 kJ/mol, from memory)
    src = book(tmp_path / "s.xlsx", ["Formula", "ΔfH° / kJ mol-1", "ΔsolH / kJ mol-1"],
               [["NaCl", -411.153, 38.8], ["KCl", -436.747, 17.22]])
    rows = by_formula(annotate(src))
    assert "solution-cycle-open" in codes(rows["NaCl"])
    assert "solution-cycle-open" not in codes(rows["KCl"])
    assert abs(rows["NaCl"].values["solution_enthalpy"].value - 3.88) <= SCATTER


def test_mixed_hydration_scales_are_converted_and_flagged(tmp_path: Path) -> None:
    # Na+ on the conventional scale (+687 = −416 + 1103) and Cl− on Marcus's absolute scale
    # (−367): Y. Marcus, Ion Properties (1997), from memory.
    src = book(tmp_path / "s.xlsx",
               ["Formula", "ΔfH° / kJ mol-1", "ΔhydH(M+) conventional / kJ mol-1",
                "ΔhydH(X-) absolute / kJ mol-1"],
               [["NaCl", -411.153, 687, -367]])
    run = annotate(src)
    mixed = [f for f in run.file_flags if f.code == "hydration-scales-mixed"]
    assert mixed and mixed[0].severity.value == "warning"
    v = by_formula(run)["NaCl"].values["solution_enthalpy"]
    assert abs(v.value - 3.88) <= SCATTER  # CRC, from memory; unconverted it would be ~ +1100


def test_run_setting_gives_the_scale_of_undeclared_columns(tmp_path: Path) -> None:
    # Marcus's absolute values (from memory), with the run told his ΔhydH(H+) = −1103 kJ/mol
    header = ["Formula", "ΔfH° / kJ mol-1", "ΔhydH (cation) / kJ mol-1",
              "ΔhydH (anion) / kJ mol-1"]
    src = book(tmp_path / "s.xlsx", header, [["KCl", -436.747, -334, None]])
    run = annotate(src, settings=Settings(hydration_scale=-1103.0))
    row = by_formula(run)["KCl"]
    assert abs(row.values["solution_enthalpy"].value - 17.22) <= SCATTER  # CRC, from memory
    assert not [f for f in run.file_flags if f.code == "hydration-scales-mixed"]
    # The same absolute value read as conventional is 1103 kJ/mol off: the tool says so.
    run2 = annotate(src)
    row2 = by_formula(run2)["KCl"]
    assert "hydration-scale-suspect" in codes(row2)


def test_json_report_carries_solution_enthalpy(tmp_path: Path) -> None:
    src = book(tmp_path / "s.xlsx", ["Formula", "ΔfH° / kJ mol-1", "ΔsolH / kJ mol-1"],
               [["NaCl", -411.153, None]])
    out = tmp_path / "report.json"
    assert main(["annotate", str(src), "--json", str(out)]) == 0
    data = json.loads(out.read_text(encoding="utf-8"))
    (row,) = [r for r in data["rows"] if r["formula"] == "NaCl"]
    sol = row["values"]["solution_enthalpy"]
    assert sol["unit"] == "kJ/mol" and sol["method"] and sol["sources"]
    assert sol["value"] == pytest.approx(3.88, abs=SCATTER)  # CRC, from memory


def test_tables_without_solution_columns_are_left_alone(tmp_path: Path) -> None:
    src = book(tmp_path / "s.xlsx", ["Formula", "ΔfH° / kJ mol-1"], [["NaCl", -411.153]])
    row = by_formula(annotate(src))["NaCl"]
    assert "lattice_enthalpy" in row.values  # the Born-Haber cycle ran
    assert "solution_enthalpy" not in row.values
