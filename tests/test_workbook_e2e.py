"""End to end: a lab-style workbook in, JSON report and results workbook out, via the CLI.

Workbooks are made in the tests with openpyxl (which writes no cached formula values) or
xlsxwriter (which writes 0 as every formula's cached value): both are the files that
scripts produce in real labs, and both must be read correctly.

Reference numbers: formation enthalpies from the NBS tables (Wagman et al. 1982, from
memory); handbook lattice enthalpies from the CRC Handbook "Lattice Energies" table (from
memory); unit factors from CODATA 2018 (1 eV = 96.485 kJ/mol) and the thermochemical
calorie (4.184 J).
"""

from __future__ import annotations

import hashlib
import json
import subprocess
import sys
from pathlib import Path

import openpyxl
import pytest
import xlsxwriter

from sheetcycle.cli import main


def sha(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def lab_book(path: Path) -> Path:
    """A workbook as labs keep them: title rows, notes, units in headers, mistakes inside."""
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Halides"
    ws["A1"] = "Group screening 2026 — halides and oxides"
    ws["A2"] = "values at 298.15 K"
    ws.append([])
    ws.append(["Compound", "ΔfH° / kJ mol⁻¹", "u(ΔfH)", "ΔLH lit. (kJ/mol)", "EA1 [eV]", "Remarks"])
    rows = [
        ("NaCl", -411.2, 0.1, 787, 3.6127, "ok"),  # row 5
        ("KCl", -436.5, 0.2, None, None, ""),  # row 6: lattice derived
        ("MgCl2", -641.3, 0.6, 2326, None, "lit. value off"),  # row 7: cycle open by 200
        ("CaF2", "−1228.0 ± 1.5", None, None, None, "Unicode minus text"),  # row 8
        ("Fe3O4", -1118.4, None, None, None, "mixed valence"),  # row 9
        ("SrO", None, None, None, None, "blank formation"),  # row 10
        ("FeCl3", -399.5, None, None, None, ""),  # row 11
    ]
    for r in rows:
        ws.append(list(r))
    ws["B12"] = "=-68.79*4.184"  # ΔfH(NaI) −287.8 kJ/mol as a formula; openpyxl caches no value
    ws["A12"] = "NaI"
    wb.save(path)
    return path


def run_cli(*args: str) -> int:
    return main(list(args))


def test_annotate_reads_lab_book_and_reports(tmp_path: Path) -> None:
    src = lab_book(tmp_path / "lab.xlsx")
    before = sha(src)
    out, rep = tmp_path / "lab.results.xlsx", tmp_path / "lab.json"
    assert run_cli("annotate", str(src), "-o", str(out), "--json", str(rep)) == 0
    assert sha(src) == before  # the input is never modified
    data = json.loads(rep.read_text(encoding="utf-8"))
    assert set(data) >= {"version", "input", "tables", "rows"}
    (table,) = data["tables"]
    assert table["sheet"] == "Halides" and table["header_row"] == 4
    quantities = {c["header"]: c["quantity"] for c in table["columns"]}
    assert quantities["ΔfH° / kJ mol⁻¹"] == "formation_enthalpy"
    assert quantities["EA1 [eV]"] == "electron_affinity"
    assert quantities["ΔLH lit. (kJ/mol)"] == "lattice_enthalpy"
    rows = {r["row"]: r for r in data["rows"]}

    nacl = rows[5]
    assert nacl["formula"] == "NaCl"
    lat = nacl["values"]["lattice_enthalpy"]
    assert lat["unit"] == "kJ/mol" and lat["value"] == pytest.approx(
        786, rel=0.01
    )  # CRC, from memory
    # the row's own EA (3.6127 eV, energy released) was used, converted with 96.485 kJ/mol/eV
    assert any("Halides!E5" in s for s in lat["sources"])
    assert "closure_residual" in nacl["values"]
    assert abs(nacl["values"]["closure_residual"]["value"]) < 10

    assert rows[6]["values"]["lattice_enthalpy"]["value"] == pytest.approx(715, rel=0.015)

    open_flags = [f for f in rows[7]["flags"] if f["code"] == "cycle-open"]
    assert open_flags and open_flags[0]["cell"] == "D7" and open_flags[0]["severity"] == "warning"

    # text with a Unicode minus and an uncertainty is a number with an uncertainty
    caf2 = rows[8]["values"]["lattice_enthalpy"]
    assert caf2["value"] == pytest.approx(2651, rel=0.015)  # CRC, from memory
    assert caf2["uncertainty"] >= 1.5

    assert [f["code"] for f in rows[9]["flags"]] == ["ions-unassigned"]
    assert rows[9]["values"] == {}
    missing = [f for f in rows[10]["flags"] if f["code"] == "inputs-missing"]
    assert missing and missing[0]["cell"] == "B10" and missing[0]["severity"] == "error"
    assert "lattice_enthalpy" not in rows[10]["values"]  # missing is never zero
    assert rows[11]["values"]["lattice_enthalpy"]["value"] > 5000  # Fe3+: three IEs, three Cl

    # the formula cell had no cached value: it was evaluated, not read as 0 or blank
    nai = rows[12]["values"]["lattice_enthalpy"]["value"]
    assert nai == pytest.approx(704, rel=0.015)  # CRC, from memory

    # -o hands back the user's own workbook with additions: our two sheets come last
    wb = openpyxl.load_workbook(out)
    assert wb.sheetnames == ["Halides", "sheetcycle method", "sheetcycle flags"]
    ws = wb["Halides"]
    assert ws["A1"].value == "Group screening 2026 — halides and oxides"  # nothing lost
    assert ws["B12"].value == "=-68.79*4.184"  # the user's formula is still a formula
    headers = [c.value for c in ws[4]]
    assert headers[6] is None and headers[7] == "ΔH_L cycle / kJ mol⁻¹"  # one blank column
    assert str(ws["H5"].value).startswith("=")  # computed values are formulas …
    assert ws["H8"].value == pytest.approx(caf2["value"])  # … except over text cells: a value
    assert ws["D7"].comment is not None and "cycle does not close" in ws["D7"].comment.text
    wb.close()


def test_cached_zero_from_a_non_calculating_writer_is_not_a_formation_enthalpy(
    tmp_path: Path,
) -> None:
    # regression: xlsxwriter caches <v>0</v> for every formula; a 0 kJ/mol formation
    # enthalpy would give NaCl a lattice enthalpy near 376 kJ/mol instead of 787.
    path = tmp_path / "scripted.xlsx"
    wb = xlsxwriter.Workbook(str(path))
    ws = wb.add_worksheet("Data")
    ws.write_row(0, 0, ["Formula", "dHf (kcal/mol)"])
    ws.write_string(1, 0, "NaCl")
    ws.write_formula(1, 1, "=-411.2/4.184")
    wb.close()
    rep = tmp_path / "r.json"
    assert run_cli("annotate", str(path), "--json", str(rep)) == 0
    (row,) = json.loads(rep.read_text(encoding="utf-8"))["rows"]
    assert row["values"]["lattice_enthalpy"]["value"] == pytest.approx(787, abs=3)


def test_kcal_and_ev_columns_are_converted(tmp_path: Path) -> None:
    path = tmp_path / "units.xlsx"
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.append(["Formula", "dHf (kcal/mol)", "IE1 [eV]"])
    ws.append(["NaCl", -411.2 / 4.184, 5.139076])
    wb.save(path)
    rep = tmp_path / "r.json"
    assert run_cli("annotate", str(path), "--json", str(rep)) == 0
    (row,) = json.loads(rep.read_text(encoding="utf-8"))["rows"]
    assert row["values"]["lattice_enthalpy"]["value"] == pytest.approx(787, abs=3)
    assert not [f for f in row["flags"] if f["severity"] != "note"]


def test_units_row_under_the_header(tmp_path: Path) -> None:
    path = tmp_path / "unitsrow.xlsx"
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.append(["Salt", "ΔfH", "Lattice enthalpy"])
    ws.append([None, "kcal/mol", "kJ/mol"])
    ws.append(["KCl", -436.5 / 4.184, None])
    wb.save(path)
    rep = tmp_path / "r.json"
    assert run_cli("annotate", str(path), "--json", str(rep)) == 0
    data = json.loads(rep.read_text(encoding="utf-8"))
    (row,) = data["rows"]
    assert row["row"] == 3
    assert row["values"]["lattice_enthalpy"]["value"] == pytest.approx(715, rel=0.015)


def test_column_override_from_the_command_line(tmp_path: Path) -> None:
    path = tmp_path / "odd.xlsx"
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.append(["Formula", "Heat (our lab)", "ΔfH / kJ mol-1"])
    ws.append(["NaCl", -98.28, None])
    wb.save(path)
    rep = tmp_path / "r.json"
    assert (
        run_cli(
            "annotate",
            str(path),
            "--json",
            str(rep),
            "--column",
            "B=formation_enthalpy:kcal/mol",
            "--column",
            "C=ignore",
        )
        == 0
    )
    (row,) = json.loads(rep.read_text(encoding="utf-8"))["rows"]
    assert row["values"]["lattice_enthalpy"]["value"] == pytest.approx(787, abs=3)


def test_exit_codes(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    bad = tmp_path / "notes.xlsx"
    bad.write_bytes(b"this is not a workbook")
    rep = tmp_path / "r.json"
    assert run_cli("annotate", str(bad), "--json", str(rep)) == 1
    err = capsys.readouterr().err
    assert "notes.xlsx" in err and "Traceback" not in err and len(err.strip().splitlines()) == 1
    assert not rep.exists()
    assert run_cli("annotate") == 2
    assert run_cli("annotate", str(bad), "--tolerance", "-3") == 2


def test_existing_output_is_kept_without_force(tmp_path: Path) -> None:
    src = lab_book(tmp_path / "lab.xlsx")
    rep = tmp_path / "r.json"
    rep.write_text("keep me", encoding="utf-8")
    assert run_cli("annotate", str(src), "--json", str(rep)) == 1
    assert rep.read_text(encoding="utf-8") == "keep me"
    assert run_cli("annotate", str(src), "--json", str(rep), "--force") == 0
    assert json.loads(rep.read_text(encoding="utf-8"))["rows"]


def test_inspect_prints_what_was_recognised(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    src = lab_book(tmp_path / "lab.xlsx")
    assert run_cli("inspect", str(src)) == 0
    out = capsys.readouterr().out
    assert "sheet 'Halides': header row 4" in out
    assert "B 'ΔfH° / kJ mol⁻¹': formation_enthalpy" in out
    assert "F 'Remarks'" in out


def test_python_module_entry_point(tmp_path: Path) -> None:
    src = lab_book(tmp_path / "lab.xlsx")
    proc = subprocess.run(
        [sys.executable, "-m", "sheetcycle", "inspect", str(src)],
        capture_output=True,
        text=True,
        check=False,
    )
    assert proc.returncode == 0 and "formation_enthalpy" in proc.stdout


def test_batch_of_files_in_parallel_with_one_bad(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    folder = tmp_path / "in"
    folder.mkdir()
    lab_book(folder / "a.xlsx")
    lab_book(folder / "b.xlsx")
    (folder / "c.xlsx").write_bytes(b"PK\x03\x04 truncated")
    out, reports = tmp_path / "out", tmp_path / "reports"
    code = run_cli("annotate", str(folder), "-o", str(out), "--json", str(reports), "-j", "2")
    assert code == 1  # one file failed
    captured = capsys.readouterr()
    assert "2 of 3 files done, 1 failed" in captured.out
    assert "c.xlsx" in captured.err and "Traceback" not in captured.err
    assert sorted(p.name for p in out.iterdir()) == ["a.annotated.xlsx", "b.annotated.xlsx"]
    assert sorted(p.name for p in reports.iterdir()) == ["a.report.json", "b.report.json"]
