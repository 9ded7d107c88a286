"""The reconciliation pass names a planted error at its own cell and leaves good data alone.

Synthetic workbooks (invented for these tests): a 'Salts' sheet of alkali halides with their
enthalpies of formation and lattice enthalpies, and an 'Elements' sheet where each
halogen's electron affinity is typed once and used by every salt of that halogen.

Sources of the numbers:
- ΔfH°(298 K): NBS tables of chemical thermodynamic properties (Wagman et al., 1982), from
  memory;
- lattice enthalpies: CRC Handbook of Chemistry and Physics, table "Lattice Energies"
  (H. D. B. Jenkins), from memory;
- electron affinities: F 3.401 eV, Cl 3.613 eV, Br 3.364 eV (CRC Handbook, "Electron
  Affinities"; from memory), × 96.485 kJ/mol per eV (CODATA 2018) = 328.2, 348.6 and
  324.5 kJ/mol.
"""

from __future__ import annotations

from pathlib import Path

import openpyxl
import pytest

from sheetcycle.api import annotate
from sheetcycle.model import RunResult
from sheetcycle.pipeline import Settings

# formula: (ΔfH° kJ/mol [NBS 1982, from memory], lattice enthalpy kJ/mol [CRC, from memory])
SALTS = {
    "LiF": (-616.0, 1036),
    "LiCl": (-408.6, 853),
    "LiBr": (-351.2, 807),
    "NaF": (-576.6, 923),
    "NaCl": (-411.2, 786),
    "NaBr": (-361.1, 747),
    "KF": (-567.3, 821),
    "KCl": (-436.5, 715),
    "KBr": (-393.8, 682),
    "RbCl": (-435.4, 689),
    "CsCl": (-443.0, 659),
}
FIRST_ROW = 2  # sheet row of the first salt
# electron affinities, kJ/mol, energy-released convention (CRC, from memory, see above)
EA = {"F": 328.2, "Cl": 348.6, "Br": 324.5}
CL_CELL = "B3"  # Cl's row on the Elements sheet (F is B2, Br is B4)
CULPRIT_CODES = {"likely-culprit", "culprit-one-of"}


def workbook(path: Path, *, ea_cl: float = EA["Cl"], dfh: dict[str, float] | None = None) -> Path:
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Salts"
    ws.append(["Formula", "ΔfH / kJ mol-1", "Lattice enthalpy / kJ mol-1"])
    for f, (h, lat) in SALTS.items():
        ws.append([f, (dfh or {}).get(f, h), lat])
    el = wb.create_sheet("Elements")
    el.append(["Element", "EA1 (kJ/mol)"])
    for sym in ("F", "Cl", "Br"):
        el.append([sym, ea_cl if sym == "Cl" else EA[sym]])
    wb.save(path)
    return path


def all_flags(run: RunResult) -> list:
    return [f for r in run.rows for f in r.flags] + list(run.file_flags)


def row_of(run: RunResult, formula: str):
    (row,) = [r for r in run.rows if r.formula == formula]
    return row


def test_mistyped_shared_value_is_named_at_its_elements_cell(tmp_path: Path) -> None:
    # 394 typed for Cl's 348.6 (digits swapped): every chloride's cycle is off by ~45 kJ/mol
    run = annotate(workbook(tmp_path / "w.xlsx", ea_cl=394.0), settings=Settings(reconcile=True))
    named = [f for f in all_flags(run) if f.code in CULPRIT_CODES]
    assert [(f.code, f.sheet, f.cell) for f in named] == [("likely-culprit", "Elements", CL_CELL)]
    msg = named[0].message
    assert "electron-gain enthalpy of Cl" in msg and "−394.0 kJ/mol" in msg
    chlorides = [f for f in SALTS if f.endswith("Cl")]
    for f in chlorides:
        assert f in msg, f"{f} is not among the cycles the value breaks"
    # the value the other data imply is the published one, within a few kJ/mol
    adj = float(msg.split("put it at ")[1].split(" kJ/mol")[0].replace("−", "-"))
    assert adj == pytest.approx(-EA["Cl"], abs=4.0)
    # the salts it broke: no culprit flag, a note that they close once it is corrected
    for f in chlorides:
        row = row_of(run, f)
        assert not [g for g in row.flags if g.code in CULPRIT_CODES]
        assert any(g.code == "closes-once-corrected" for g in row.flags), f
        assert any(g.code == "cycle-open" for g in row.flags), f  # the per-row check saw it
        # the reconciled lattice enthalpy is the handbook one, not the broken cycle's
        rec = row.values["reconciled_lattice_enthalpy"].value
        assert rec == pytest.approx(SALTS[f][1], rel=0.015), f
    summary = [f for f in run.file_flags if f.code == "reconciliation"]
    assert len(summary) == 1 and "Elements!B3" in summary[0].message
    assert "the final set is consistent" in summary[0].message


def test_consistent_workbook_is_left_alone(tmp_path: Path) -> None:
    run = annotate(workbook(tmp_path / "w.xlsx"), settings=Settings(reconcile=True))
    assert not [f for f in all_flags(run) if f.code in CULPRIT_CODES | {"closes-once-corrected"}]
    (summary,) = [f for f in run.file_flags if f.code == "reconciliation"]
    assert "no input stands out" in summary.message
    assert "the final set is consistent" in summary.message
    for f, (_, lat) in SALTS.items():
        row = row_of(run, f)
        assert row.values["reconciled_lattice_enthalpy"].value == pytest.approx(lat, rel=0.015)
        assert abs(row.values["normalised_residual"].value) < 3.0


def test_row_value_mistyped_names_both_of_its_inseparable_cells(tmp_path: Path) -> None:
    # NaCl's ΔfH typed −511.2 for −411.2: only that row is off. Its ΔfH and its lattice
    # enthalpy enter only its own cycle, with the same coefficient: no closure can tell
    # which of the two is wrong, so both are named as "one of these".
    path = workbook(tmp_path / "w.xlsx", dfh={"NaCl": -511.2})
    run = annotate(path, settings=Settings(reconcile=True))
    named = sorted((f.code, f.sheet, f.cell) for f in all_flags(run) if f.code in CULPRIT_CODES)
    row = FIRST_ROW + list(SALTS).index("NaCl")
    assert named == [("culprit-one-of", "Salts", f"B{row}"), ("culprit-one-of", "Salts", f"C{row}")]
    (dfh_flag,) = [f for f in all_flags(run) if f.code == "culprit-one-of" and f.cell == f"B{row}"]
    implied = dfh_flag.message.split("put it at ")[1].split(" kJ/mol")[0].replace("−", "-")
    assert float(implied) == pytest.approx(-411.2, abs=3.0)  # the NBS value, from the cycle
    # no shared value is blamed: every other salt and the Elements sheet go unflagged
    assert not [f for f in all_flags(run) if f.code in CULPRIT_CODES and f.sheet == "Elements"]
    assert not [f for f in all_flags(run) if f.code == "closes-once-corrected"]


def test_off_by_default(tmp_path: Path) -> None:
    run = annotate(workbook(tmp_path / "w.xlsx", ea_cl=394.0))
    codes = {f.code for f in all_flags(run)}
    assert not codes & (CULPRIT_CODES | {"reconciliation", "closes-once-corrected"})
    assert not any("reconciled_lattice_enthalpy" in r.values for r in run.rows)
