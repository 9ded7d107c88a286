"""LibreOffice, an independent spreadsheet application, opens the annotated workbook.

LibreOffice headless (tests/lo.py) loads the input and the annotated copy with a profile
that recalculates every formula on load, and exports every sheet as CSV in one run.
Checks: LibreOffice's own value of every added formula equals the cached value the
writer stored (relative 1e-9); a probe column whose cached value is wrong on purpose comes
back recomputed (so the run really recalculated); and every original cell exports the
same in the annotated copy as in the input. If LibreOffice is missing the test fails.
"""

from __future__ import annotations

import math
from pathlib import Path

import lo
import pytest
from golden.make_golden import (
    FLAGS_SHEET,
    IONS,
    PREFIXED_ROWS,
    REF_OFFSET,
    REFS_SHEET,
    SALTS,
    SALTS_FIRST_ROW,
    SALTS_HEADER_ROW,
    SALTS_LAST_COL,
    make_rich,
    rich_annotation,
)

from sheetcycle.io.package import AddedCell, NewSheet, write_annotated

ORIGINAL_SHEETS = ["Salts", "Ions", "Pivot", "Prefixed"]
PICTURES_SHEET = "sheetcycle pictures"


def _png() -> bytes:
    import io

    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    fig = Figure(figsize=(3, 2))
    FigureCanvasAgg(fig)
    fig.add_subplot().plot([0, 1, 2], [2, 0, 1])
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=80)
    return buf.getvalue()


def _num(text: str) -> float:
    return float(text)


def _close(got: str, want: float) -> bool:
    return math.isclose(_num(got), want, rel_tol=1e-9, abs_tol=1e-12)


@pytest.fixture(scope="module")
def exported(tmp_path_factory: pytest.TempPathFactory) -> dict[str, dict[str, list[list[str]]]]:
    lo.soffice()  # fail early, with instructions, when LibreOffice is missing
    folder = tmp_path_factory.mktemp("lo")
    src = make_rich(folder / "input.xlsm")
    additions, notes, new_sheets = rich_annotation(probe=True)
    dst = folder / "annotated.xlsm"
    pictures = NewSheet(PICTURES_SHEET, [[AddedCell("picture below")]], images=[(1, 0, _png())])
    write_annotated(src, dst, additions=additions, notes=notes, new_sheets=[*new_sheets, pictures])
    out = folder / "csv"
    lo.convert_to_csv([src, dst], out)
    sheets = [*ORIGINAL_SHEETS, REFS_SHEET, FLAGS_SHEET, PICTURES_SHEET]
    return {
        "input": lo.sheets_csv(out, "input", ORIGINAL_SHEETS),
        "annotated": lo.sheets_csv(out, "annotated", sheets),
    }


def test_added_formulas_recalculate_to_the_cached_values(exported: dict) -> None:
    got = exported["annotated"]
    salts = got["Salts"]
    first = SALTS_LAST_COL + 2
    assert salts[SALTS_HEADER_ROW - 1][first : first + 5] == [
        "lattice est (kJ/mol)",
        "dHf (kcal/mol)",
        "check",
        "label",
        "probe",
    ]
    for i, (f, a, b, c, d) in enumerate(SALTS):
        row = salts[SALTS_FIRST_ROW - 1 + i]
        assert _close(row[first], a - b - c + REF_OFFSET), (i, row)
        assert _close(row[first + 1], a / 4.184), (i, row)
        assert row[first + 2] == ("=not a formula" if i == 0 else "ok")
        assert row[first + 3] == f"{f}-x"
        # the probe's cached value is -1: LibreOffice must have recomputed E*3
        assert _close(row[first + 4], d * 3), "LibreOffice did not recalculate on load"
    ions = got["Ions"]
    for i, (_, v) in enumerate(IONS):
        assert _close(ions[i + 1][3], v * 2)
    pre = got["Prefixed"]
    for r in range(2, PREFIXED_ROWS + 2):
        assert _close(pre[r - 1][4], 0.0 if r == 4 else r * 4.5)
    assert _close(got[REFS_SHEET][1][1], REF_OFFSET)
    flags = got[FLAGS_SHEET]
    assert flags[0] == ["sheet", "cell", "severity", "message"]
    assert flags[-1][2] == "=SUM(1,2)"  # text stays text in another application too


@pytest.mark.parametrize("sheet", ORIGINAL_SHEETS)
def test_original_cells_export_unchanged(exported: dict, sheet: str) -> None:
    before = exported["input"][sheet]
    after = exported["annotated"][sheet]
    assert len(after) >= len(before)
    compared = 0
    for r, row in enumerate(before):
        for c, value in enumerate(row):
            got = after[r][c] if c < len(after[r]) else ""
            assert got == value, f"{sheet} row {r + 1} col {c + 1}: {value!r} -> {got!r}"
            compared += value != ""
    assert compared > 5  # the comparison saw real content


def test_sheet_with_a_picture_opens(exported: dict) -> None:
    assert exported["annotated"][PICTURES_SHEET][0][0] == "picture below"


def test_libreoffice_keeps_the_picture_when_it_saves_a_copy(tmp_path: Path) -> None:
    """LibreOffice parses the drawing: a copy it saves as .xlsx still holds the PNG."""
    import os
    import subprocess
    import zipfile

    from golden.make_golden import make_plain

    src = make_plain(tmp_path / "in.xlsx", rows=3, cols=2)
    dst = tmp_path / "pictured.xlsx"
    png = _png()
    pictures = NewSheet(PICTURES_SHEET, [[AddedCell("picture below")]], images=[(2, 1, png)])
    write_annotated(src, dst, new_sheets=[pictures])
    out = tmp_path / "lo"
    out.mkdir()
    prof = tmp_path / "profile"
    cmd = [
        lo.soffice(),
        f"-env:UserInstallation={lo.make_profile(prof)}",
        "--headless",
        "--norestore",
        "--convert-to",
        "xlsx",
        "--outdir",
        str(out),
        str(dst),
    ]
    proc = subprocess.run(
        cmd, capture_output=True, text=True, timeout=180, env={**os.environ, "HOME": str(prof)}
    )
    assert proc.returncode == 0, proc.stderr
    with zipfile.ZipFile(out / "pictured.xlsx") as z:
        media = [n for n in z.namelist() if n.startswith("xl/media/")]
        drawings = [n for n in z.namelist() if n.startswith("xl/drawings/drawing")]
    assert len(media) == 1 and drawings, z.namelist()
