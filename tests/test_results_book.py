"""The results workbook, read back by two independent readers (openpyxl, python-calamine).

The readers and the raw xlsx package (zip + worksheet XML, ECMA-376) are the oracles: text
must come back as string cells, missing numbers as empty cells, numbers unchanged, and no
worksheet may contain a formula. The chemistry numbers are invented payloads, not physics
under test.
"""

from __future__ import annotations

import math
import re
import zipfile
from pathlib import Path
from typing import Any

import numpy as np
import openpyxl
import pytest
from python_calamine import CalamineWorkbook

from sheetcycle.errors import WriteError
from sheetcycle.io import results_book
from sheetcycle.io.results_book import (
    SEVERITY_FILLS,
    results_sheet_name,
    write_results_workbook,
)
from sheetcycle.model import (
    Column,
    ComputedValue,
    Flag,
    ReferenceUse,
    RowResult,
    RunResult,
    Severity,
    Table,
)

NAN = math.nan
INJECTIONS = ('=HYPERLINK("x")', "+1", "-2", "@SUM(A1)")
LONG_SHEET = "Oxides/measured in the second lab"
# A value whose shortest repr needs 17 significant digits (0.1 + 0.2 in binary64).
SEVENTEEN_DIGITS = 0.1 + 0.2


def _cv(value: float, u: float, method: str = "born-haber", *src: str) -> ComputedValue:
    return ComputedValue(value, u, "kJ/mol", method, src)


def sample_run(input_path: str = "lab/compounds.xlsx") -> RunResult:
    salts = Table(
        sheet="Salts",
        header_row=1,
        first_row=2,
        last_row=4,
        columns=(
            Column("Formula", 0, "formula", texts=("NaCl", "KBr", '=HYPERLINK("x")')),
            Column(
                "ΔfH / kJ mol⁻¹",
                1,
                "formation_enthalpy",
                unit="kJ mol-1",
                values=np.array([-411.2, -393.8, NAN]),
                uncertainties=np.array([0.1, NAN, NAN]),
                uncertainty_col=2,
            ),
            Column(
                "IE1 (eV)",
                3,
                "ionization_energy",
                index=1,
                unit="eV",
                values=np.array([495.8, 418.8, NAN]),
            ),
            Column("Lab note", 4, None, texts=("+1", "-2", None)),
        ),
    )
    oxides = Table(
        sheet=LONG_SHEET,
        header_row=3,
        first_row=4,
        last_row=5,
        columns=(
            Column("Formula", 0, "formula", texts=("MgO", "CaO")),
            Column("dHf", 1, "formation_enthalpy", unit="kJ/mol", values=np.array([-601.6, NAN])),
        ),
    )
    rows = [
        RowResult(
            "Salts",
            2,
            "NaCl",
            values={"lattice_enthalpy": _cv(787.4, 2.0, "born-haber", "tab A", "tab B")},
            flags=[Flag("conv-applied", Severity.NOTE, "@SUM(A1)", "Salts", "B2")],
        ),
        RowResult(
            "Salts",
            3,
            "KBr",
            values={"lattice_enthalpy": _cv(SEVENTEEN_DIGITS, NAN)},
            flags=[Flag("odd-range", Severity.WARNING, "+1 looks high", "Salts", "B3")],
        ),
        RowResult(
            "Salts",
            4,
            '=HYPERLINK("x")',
            values={"lattice_enthalpy": _cv(NAN, NAN)},
            flags=[
                Flag("formula-bad", Severity.ERROR, '=HYPERLINK("x")', "Salts", "A4"),
                Flag("value-missing", Severity.ERROR, "-2", "Salts", "B4"),
            ],
        ),
        RowResult(
            LONG_SHEET,
            4,
            "MgO",
            values={
                "lattice_enthalpy": _cv(3791.0, 20.0),
                "kapustinskii_lattice_energy": _cv(3929.5, NAN, "kapustinskii"),
            },
        ),
        RowResult(LONG_SHEET, 5, "CaO", values={"lattice_enthalpy": _cv(NAN, NAN)}),
    ]
    refs = [
        ReferenceUse("Na", "ionization_energy", 1, 495.8, NAN, "kJ/mol", "source one, table 3"),
        ReferenceUse("Cl", "electron_gain_enthalpy", 1, -349.0, 0.1, "kJ/mol", "@SUM(A1)"),
    ]
    return RunResult(
        version="0.1.0",
        input=input_path,
        tables=[salts, oxides],
        rows=rows,
        references=refs,
        settings={"lattice_convention": "dissociation", "tolerance": 5.0, "label": "-2"},
        file_flags=[
            Flag("sheet-skipped", Severity.NOTE, '=HYPERLINK("x")', "Notes", None),
            Flag("header-unknown", Severity.WARNING, "+1 unknown header", "Salts", "E1"),
        ],
    )


@pytest.fixture(scope="module")
def book(tmp_path_factory: pytest.TempPathFactory) -> Path:
    out = tmp_path_factory.mktemp("book") / "results.xlsx"
    write_results_workbook(sample_run(), out)
    return out


@pytest.fixture(scope="module")
def wb(book: Path) -> Any:
    return openpyxl.load_workbook(book)


def _records(ws: Any, header_row: int) -> list[dict[str, Any]]:
    names = [c.value for c in ws[header_row]]
    return [
        dict(zip(names, (c.value for c in row), strict=True))
        for row in ws.iter_rows(min_row=header_row + 1)
    ]


SALTS = "Salts (results)"


# ------------------------------------------------------------------------------ layout


def test_sheet_list_is_about_results_flags_references(wb: Any) -> None:
    assert wb.sheetnames == [
        "About",
        SALTS,
        "Oxides_measured in t… (results)",
        "Flags",
        "References",
    ]
    assert all(len(n) <= 31 for n in wb.sheetnames)


def test_results_sheet_names_are_unique_valid_and_short() -> None:
    used: set[str] = set()
    names = [results_sheet_name(s, used) for s in ["A" * 40, "A" * 40, "x[1]:y*?", "Flags"]]
    assert len({n.lower() for n in names}) == 4
    assert all(len(n) <= 31 and not set(n) & set("[]:*?/\\") for n in names)
    assert names[1].endswith(" (results 2)")
    assert names[3] == "Flags (results)"


def test_results_sheet_headers_frozen_and_filtered(wb: Any) -> None:
    ws = wb[SALTS]
    names = [c.value for c in ws[2]]
    assert names == [
        "input row",
        "formula",
        "formula",
        "formation_enthalpy [kJ/mol]",
        "u(formation_enthalpy) [kJ/mol]",
        "ionization_energy_1 [kJ/mol]",
        "Lab note",
        "lattice_enthalpy [kJ/mol]",
        "u(lattice_enthalpy) [kJ/mol]",
        "method(lattice_enthalpy)",
        "flags",
    ]
    as_read = [c.value for c in ws[1]]
    assert as_read[2:7] == [
        "Formula",
        "ΔfH / kJ mol⁻¹",
        "u(ΔfH / kJ mol⁻¹)",
        "IE1 (eV)",
        "Lab note",
    ]
    assert ws.freeze_panes == "A3"
    assert ws.auto_filter.ref == "A2:K5"


def test_results_rows_follow_run_rows_and_carry_input_row(wb: Any) -> None:
    salts = _records(wb[SALTS], 2)
    assert [r["input row"] for r in salts] == [2, 3, 4]
    assert [r["formula"] for r in salts] == ["NaCl", "KBr", '=HYPERLINK("x")']
    oxides = _records(wb["Oxides_measured in t… (results)"], 2)
    assert [r["input row"] for r in oxides] == [4, 5]
    # a name present in only one row still gets a column; the other row is blank
    assert [r["kapustinskii_lattice_energy [kJ/mol]"] for r in oxides] == [3929.5, None]


def test_numbers_come_back_exactly_and_nan_is_blank(wb: Any) -> None:
    salts = _records(wb[SALTS], 2)
    assert [r["formation_enthalpy [kJ/mol]"] for r in salts] == [-411.2, -393.8, None]
    assert [r["u(formation_enthalpy) [kJ/mol]"] for r in salts] == [0.1, None, None]
    assert [r["ionization_energy_1 [kJ/mol]"] for r in salts] == [495.8, 418.8, None]
    lattice = [r["lattice_enthalpy [kJ/mol]"] for r in salts]
    assert lattice[0] == 787.4 and lattice[2] is None
    # xlsxwriter writes 16 significant digits (ECMA-376 numbers are doubles; spreadsheet
    # applications keep 15), so a 17-digit value comes back within one part in 1e15.
    assert lattice[1] == pytest.approx(SEVENTEEN_DIGITS, rel=1e-15)
    assert [r["u(lattice_enthalpy) [kJ/mol]"] for r in salts] == [2.0, None, None]
    assert 0 not in lattice  # missing is never written as zero


def test_unrecognised_column_is_copied_as_text(wb: Any) -> None:
    ws = wb[SALTS]
    cells = [ws.cell(row=r, column=7) for r in (3, 4, 5)]
    assert [c.value for c in cells] == ["+1", "-2", None]
    assert [c.data_type for c in cells[:2]] == ["s", "s"]


def test_method_column_names_method_and_sources(wb: Any) -> None:
    salts = _records(wb[SALTS], 2)
    assert salts[0]["method(lattice_enthalpy)"] == "born-haber; sources: tab A; tab B"
    assert salts[1]["method(lattice_enthalpy)"] == "born-haber"


def test_flags_column_joins_messages_with_fill_of_worst_severity(wb: Any) -> None:
    ws = wb[SALTS]
    cell = ws.cell(row=5, column=11)
    assert cell.value.split("\n") == [
        'formula-bad (error): =HYPERLINK("x")',
        "value-missing (error): -2",
    ]
    assert cell.fill.fgColor.rgb == "FF" + SEVERITY_FILLS[Severity.ERROR][0][1:]
    assert ws.cell(row=4, column=11).fill.fgColor.rgb == "FF" + "FCE8B2"
    oxides = _records(wb["Oxides_measured in t… (results)"], 2)
    assert [r["flags"] for r in oxides] == [None, None]


# --------------------------------------------------------------------- output safety


def test_no_worksheet_contains_a_formula(book: Path) -> None:
    with zipfile.ZipFile(book) as z:
        sheets = [n for n in z.namelist() if n.startswith("xl/worksheets/sheet")]
        assert len(sheets) == 5
        for name in sheets:
            xml = z.read(name).decode("utf-8")
            assert re.search(r"<f[ >]", xml) is None, name


def test_injection_strings_are_string_cells_everywhere(wb: Any) -> None:
    found = 0
    for ws in wb.worksheets:
        for row in ws.iter_rows():
            for c in row:
                if isinstance(c.value, str):
                    assert c.data_type == "s", (ws.title, c.coordinate)
                    found += c.value in INJECTIONS
    # Formula text (2 cells), Lab note (2), Flags messages (4), References source, settings
    assert found >= 10


def test_injection_strings_read_back_by_calamine_as_text(book: Path) -> None:
    cw = CalamineWorkbook.from_path(str(book))
    flags = cw.get_sheet_by_name("Flags").to_python()
    messages = [r[4] for r in flags[1:]]
    assert messages == [
        "@SUM(A1)",
        "+1 looks high",
        '=HYPERLINK("x")',
        "-2",
        '=HYPERLINK("x")',
        "+1 unknown header",
    ]
    salts = cw.get_sheet_by_name(SALTS).to_python()
    assert [r[1] for r in salts[2:]] == ["NaCl", "KBr", '=HYPERLINK("x")']
    assert [r[6] for r in salts[2:]] == ["+1", "-2", ""]  # calamine: empty cell is ""
    assert [r[3] for r in salts[2:]] == [-411.2, -393.8, ""]


def test_calamine_sees_the_same_sheets(book: Path) -> None:
    cw = CalamineWorkbook.from_path(str(book))
    assert cw.sheet_names == [
        "About",
        SALTS,
        "Oxides_measured in t… (results)",
        "Flags",
        "References",
    ]


# ----------------------------------------------------------------------- Flags sheet


def test_flags_sheet_lists_every_flag_with_fill(wb: Any) -> None:
    ws = wb["Flags"]
    recs = _records(ws, 1)
    assert [(r["sheet"], r["cell"], r["code"], r["severity"]) for r in recs] == [
        ("Salts", "B2", "conv-applied", "note"),
        ("Salts", "B3", "odd-range", "warning"),
        ("Salts", "A4", "formula-bad", "error"),
        ("Salts", "B4", "value-missing", "error"),
        ("Notes", None, "sheet-skipped", "note"),
        ("Salts", "E1", "header-unknown", "warning"),
    ]
    for k, r in enumerate(recs, start=2):
        colour = SEVERITY_FILLS[Severity(r["severity"])][0][1:]
        assert ws.cell(row=k, column=4).fill.fgColor.rgb == "FF" + colour
    assert len({c for c, _ in SEVERITY_FILLS.values()}) == 3


def test_flag_links_point_at_the_flagged_value(wb: Any) -> None:
    ws = wb["Flags"]
    salts = wb[SALTS]
    link = ws.cell(row=3, column=6).hyperlink  # odd-range on Salts!B3 = ΔfH of KBr
    assert link is not None
    sheet, cell = link.location.rsplit("!", 1)
    assert sheet == f"'{SALTS}'"
    target = salts[cell]
    assert target.value == -393.8
    assert salts.cell(row=2, column=target.column).value == "formation_enthalpy [kJ/mol]"
    # a flag on the formula cell points at the formula column of the same row
    link = ws.cell(row=4, column=6).hyperlink
    assert salts[link.location.rsplit("!", 1)[1]].value == '=HYPERLINK("x")'
    # file flags outside any result row have no link
    assert ws.cell(row=6, column=6).hyperlink is None
    assert ws.cell(row=7, column=6).hyperlink is None


# ------------------------------------------------------------------ References, About


def test_references_sheet_has_values_and_sources(wb: Any) -> None:
    recs = _records(wb["References"], 1)
    assert recs == [
        {
            "element": "Na",
            "quantity": "ionization_energy",
            "index": 1,
            "value": 495.8,
            "unit": "kJ/mol",
            "uncertainty": None,
            "source": "source one, table 3",
        },
        {
            "element": "Cl",
            "quantity": "electron_gain_enthalpy",
            "index": 1,
            "value": -349.0,
            "unit": "kJ/mol",
            "uncertainty": 0.1,
            "source": "@SUM(A1)",
        },
    ]


def test_about_sheet_states_tool_input_settings_conventions_legend(wb: Any) -> None:
    ws = wb["About"]
    pairs = {(r[0].value or "").strip(): r[1].value for r in ws.iter_rows(max_col=2) if r[0].value}
    assert pairs["tool"] == "sheetcycle"
    assert pairs["version"] == "0.1.0"
    assert pairs["input file"] == "lab/compounds.xlsx"
    assert pairs["lattice_convention"] == "dissociation"
    assert pairs["tolerance"] == 5.0
    assert pairs["label"] == "-2"
    text = "\n".join(str(c.value) for row in ws.iter_rows() for c in row if c.value)
    assert "dissociation convention" in text and "MaXb(s) → a M^p+(g) + b X^q−(g)" in text
    assert "negative means exothermic" in text
    for sev, (colour, name) in SEVERITY_FILLS.items():
        legend = next(r for r in ws.iter_rows() if r[0].value == f"  {sev.value}")
        assert legend[0].fill.fgColor.rgb == "FF" + colour[1:]
        assert legend[2].value == f"fill: {name} ({colour})"


# ------------------------------------------------------------------- determinism, safety


def test_same_run_gives_byte_identical_workbooks(tmp_path: Path) -> None:
    a, b = tmp_path / "a.xlsx", tmp_path / "b.xlsx"
    write_results_workbook(sample_run(), a)
    write_results_workbook(sample_run(), b)
    assert a.read_bytes() == b.read_bytes()
    with zipfile.ZipFile(a) as z:
        core = z.read("docProps/core.xml").decode()
    assert "2000-01-01T00:00:00Z" in core


def test_existing_output_untouched_without_force(tmp_path: Path) -> None:
    out = tmp_path / "results.xlsx"
    out.write_bytes(b"old")
    with pytest.raises(WriteError) as info:
        write_results_workbook(sample_run(), out)
    assert info.value.problem == "output exists; use --force to overwrite"
    assert out.read_bytes() == b"old"
    write_results_workbook(sample_run(), out, force=True)
    assert zipfile.is_zipfile(out)


def test_refuses_to_overwrite_the_input(tmp_path: Path) -> None:
    src = tmp_path / "compounds.xlsx"
    src.write_bytes(b"input")
    with pytest.raises(WriteError, match="overwrite an input"):
        write_results_workbook(sample_run(str(src)), src, force=True)
    assert src.read_bytes() == b"input"


def test_failure_while_writing_leaves_nothing(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    def broken(*args: object) -> None:
        raise RuntimeError("disk on fire")

    monkeypatch.setattr(results_book, "_write_references", broken)
    out = tmp_path / "results.xlsx"
    out.write_bytes(b"old")
    with pytest.raises(RuntimeError, match="disk on fire"):
        write_results_workbook(sample_run(), out, force=True)
    assert out.read_bytes() == b"old"
    assert [p.name for p in tmp_path.iterdir()] == ["results.xlsx"]


def test_too_many_rows_is_refused_before_writing(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.setattr(results_book, "_MAX_ROWS", 4)  # Salts needs 2 header rows + 3
    out = tmp_path / "results.xlsx"
    with pytest.raises(WriteError, match="too many rows for sheet 'Salts \\(results\\)'"):
        write_results_workbook(sample_run(), out)
    assert list(tmp_path.iterdir()) == []


def test_rows_outside_every_table_get_their_own_sheet(tmp_path: Path) -> None:
    run = sample_run()
    run.rows.append(RowResult("Loose", 9, "LiF", values={"lattice_enthalpy": _cv(1036.0, 5.0)}))
    out = tmp_path / "results.xlsx"
    write_results_workbook(run, out)
    book = openpyxl.load_workbook(out)
    assert book.sheetnames[3] == "Loose (results)"
    recs = _records(book["Loose (results)"], 2)
    assert recs == [
        {
            "input row": 9,
            "formula": "LiF",
            "lattice_enthalpy [kJ/mol]": 1036.0,
            "u(lattice_enthalpy) [kJ/mol]": 5.0,
            "method(lattice_enthalpy)": "born-haber",
            "flags": None,
        }
    ]
