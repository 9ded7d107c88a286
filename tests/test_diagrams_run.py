"""Diagrams of a run's rows: levels from the row's numbers, a sheet of pictures, the CLI.

The diagram's numbers are read back from the figure's artists (gids ``level:<name>`` and
``arrow:<term>``), not from pixels. Reference numbers:
- ΔfH°(NaCl, s) = −411.2 kJ/mol, ΔfH°(MgO, s) = −601.6 kJ/mol: NBS tables (Wagman et al.,
  1982), from memory;
- lattice enthalpies NaCl 786, MgO 3791 kJ/mol: CRC Handbook "Lattice Energies", from memory;
- IE1(Na) = 5.1391 eV (NIST ASD, from memory) × 96.485 kJ/mol per eV (CODATA 2018)
  = 495.8 kJ/mol; ΔatH(Na) = 107.5 kJ/mol (CRC, ΔfH° of Na(g), from memory).
Workbooks are invented for the tests.
"""

from __future__ import annotations

import argparse
import io
import zipfile
from pathlib import Path

import lo
import openpyxl
import pytest

from sheetcycle.api import inspect
from sheetcycle.cli_extra import add_annotate_options, add_commands, progress_for, settings_kwargs
from sheetcycle.diagrams import (
    DIAGRAM_SHEET,
    diagram_sheet,
    draw_row,
    parity_for_run,
    parse_row_spec,
)
from sheetcycle.errors import UsageError
from sheetcycle.io.annotated import plan_annotations
from sheetcycle.io.package import write_annotated
from sheetcycle.model import RunResult
from sheetcycle.pipeline import Settings, run_tables

# formula, ΔfH (NBS, from memory), lattice enthalpy typed in the row or None
ROWS = [
    ("NaCl", -411.2, None),  # row 2: lattice derived
    ("MgO", -601.6, None),  # row 3
    ("KCl", -436.5, 615.0),  # row 4: 715 (CRC, from memory) mistyped as 615: cycle-open
    ("KBr", -393.8, 582.0),  # row 5: 682 mistyped: cycle-open
    ("NaBr", -361.1, 647.0),  # row 6: 747 mistyped: cycle-open
]


def workbook(path: Path) -> Path:
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Salts"
    ws.append(["Formula", "ΔfH / kJ mol-1", "Lattice enthalpy / kJ mol-1", "Remarks"])
    for f, h, lat in ROWS:
        ws.append([f, h, lat, "invented demo row"])
    wb.save(path)
    return path


def run_of(path: Path) -> RunResult:
    found = inspect(path)
    return run_tables(path, found.tables, Settings(), list(found.flags))


@pytest.fixture(scope="module")
def book(tmp_path_factory: pytest.TempPathFactory) -> tuple[Path, RunResult]:
    path = workbook(tmp_path_factory.mktemp("diagrams") / "salts.xlsx")
    return path, run_of(path)


def _levels(fig) -> dict[str, float]:  # type: ignore[no-untyped-def]
    out = {}
    for line in fig.axes[0].get_lines():
        gid = line.get_gid() or ""
        if gid.startswith("level:"):
            ys = set(map(float, line.get_ydata()))
            assert len(ys) == 1, gid  # a level is horizontal
            out[gid.removeprefix("level:")] = ys.pop()
    return out


def _arrows(fig) -> dict[str, tuple[float, float]]:  # type: ignore[no-untyped-def]
    out = {}
    for child in fig.axes[0].get_children():
        gid = child.get_gid() or ""
        if gid.startswith("arrow:"):
            out[gid.removeprefix("arrow:")] = (float(child.xyann[1]), float(child.xy[1]))
    return out


def test_levels_match_the_row(book: tuple[Path, RunResult]) -> None:
    _, run = book
    fig = draw_row(run, "Salts", 2, None)
    levels, arrows = _levels(fig), _arrows(fig)
    (row,) = [r for r in run.rows if r.formula == "NaCl"]
    lattice = row.values["lattice_enthalpy"].value
    assert lattice == pytest.approx(786, rel=0.015)  # CRC, from memory
    assert levels["elements"] == 0.0
    assert levels["solid"] == pytest.approx(-411.2, abs=1e-9)  # the row's own ΔfH cell
    assert levels["metal_atoms"] == pytest.approx(107.5, abs=0.5)  # ΔatH(Na), CRC
    assert levels["cations"] - levels["metal_atoms"] == pytest.approx(495.8, abs=0.1)  # IE1(Na)
    # the lattice arrow runs from the gaseous ions down to the solid: the derived ΔH_L
    start, end = arrows["lattice_enthalpy"]
    assert start == pytest.approx(levels["anions"]) and end == pytest.approx(levels["solid"])
    assert start - end == pytest.approx(lattice, abs=1e-9)
    labels = {t.get_gid(): t.get_text() for t in fig.axes[0].texts}
    assert f"{-lattice:+.1f}".replace("-", "−") in labels["arrow-label:lattice_enthalpy"]
    assert "derived" in labels["arrow-label:lattice_enthalpy"]  # the unknown is marked
    # every level is the running sum of the row's own trace values
    values = row.trace["values"]
    assert levels["anions"] == pytest.approx(
        sum(values[t] for t in ("atomization_metal", "ionization", "atomization_nonmetal",
                                "electron_gain_1")))


def test_svg_and_png_files(book: tuple[Path, RunResult], tmp_path: Path) -> None:
    _, run = book
    draw_row(run, "Salts", 3, tmp_path / "mgo.svg")
    svg = (tmp_path / "mgo.svg").read_text(encoding="utf-8")
    assert svg.lstrip().startswith("<?xml") and 'id="level:solid"' in svg
    assert 'id="arrow-label:electron_gain_higher"' in svg  # O2− has a second electron gain
    draw_row(run, "Salts", 2, tmp_path / "nacl.png")
    assert (tmp_path / "nacl.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    with pytest.raises(UsageError, match="no compound row"):
        draw_row(run, "Salts", 40, None)
    with pytest.raises(UsageError, match=r"\.png or \.svg"):
        draw_row(run, "Salts", 2, tmp_path / "x.gif")


def test_parity_plot_labels_the_flagged_rows(book: tuple[Path, RunResult]) -> None:
    _, run = book
    fig = parity_for_run(run, None)
    assert fig is not None
    ax = fig.axes[0]
    flagged = next(c for c in ax.collections if c.get_gid() == "points:flagged")
    assert len(flagged.get_offsets()) == 3  # KCl, KBr, NaBr: cycles that do not close
    labels = sorted(t.get_text() for t in ax.texts if (t.get_gid() or "").startswith("label:"))
    assert labels == ["KBr", "KCl", "NaBr"]


def test_sheet_is_capped(book: tuple[Path, RunResult]) -> None:
    _, run = book
    sheet = diagram_sheet(run, [("Salts", 2)], limit=3)
    assert sheet is not None and sheet.name == DIAGRAM_SHEET
    assert len(sheet.images) == 3  # the parity plot, the picked row, one flagged row
    texts = [c.value for row in sheet.rows for c in row if c is not None]
    assert any("at most 3 pictures" in str(t) and "2 more row(s) not drawn" in str(t)
               for t in texts)
    assert any(str(t).startswith("NaCl — Salts row 2 (picked)") for t in texts)
    # every caption links to its compound row
    assert "'Salts'!A2" in sheet.links.values()


def test_annotated_copy_carries_the_pictures_and_opens_in_libreoffice(
    book: tuple[Path, RunResult], tmp_path: Path
) -> None:
    src, run = book
    plan = plan_annotations(run, inspect(src).book)
    sheet = diagram_sheet(run, [("Salts", 2), ("Salts", 3)])
    assert sheet is not None
    dst = tmp_path / "salts.annotated.xlsx"
    write_annotated(src, dst, additions=plan.additions, notes=plan.notes,
                    new_sheets=[*plan.new_sheets, sheet])
    with zipfile.ZipFile(dst) as z:
        names = z.namelist()
        media = [n for n in names if n.startswith("xl/media/") and n.endswith(".png")]
        assert len(media) == len(sheet.images) == 6  # parity + 2 picked + 3 flagged
        assert all(z.read(n)[:8] == b"\x89PNG\r\n\x1a\n" for n in media)
        rels = [n for n in names if n.startswith("xl/drawings/_rels/")]
        assert len(rels) == 1 and z.read(rels[0]).count(b"relationships/image\"") == 6
    out = tmp_path / "csv"
    lo.convert_to_csv([src, dst], out)
    before = lo.sheets_csv(out, "salts", ["Salts"])["Salts"]
    after = lo.sheets_csv(out, "salts.annotated", ["Salts", DIAGRAM_SHEET])
    for r, row in enumerate(before):
        assert after["Salts"][r][: len(row)] == row, r  # the user's cells read the same
    assert after[DIAGRAM_SHEET][0][0] == "sheetcycle: Born-Haber cycle diagrams"


def test_annotated_copy_adds_the_sheet_only_when_the_settings_ask(
    book: tuple[Path, RunResult],
) -> None:
    src, run = book
    cells = inspect(src).book
    assert DIAGRAM_SHEET not in [s.name for s in plan_annotations(run, cells).new_sheets]
    asked = RunResult(run.version, run.input, run.tables, run.rows, run.references,
                      {**run.settings, "diagrams": True, "diagram_rows": [("Salts", 2)]},
                      run.file_flags)
    names = [s.name for s in plan_annotations(asked, cells).new_sheets]
    assert names[-1] == DIAGRAM_SHEET


def _cli(argv: list[str]) -> argparse.Namespace:
    parser = argparse.ArgumentParser(prog="sheetcycle")
    sub = parser.add_subparsers(dest="command", required=True)
    add_commands(sub)
    a = sub.add_parser("annotate")
    a.add_argument("-q", "--quiet", action="store_true")
    add_annotate_options(a)
    return parser.parse_args(argv)


def test_diagram_command_writes_pictures(book: tuple[Path, RunResult], tmp_path: Path,
                                         capsys: pytest.CaptureFixture[str]) -> None:
    src, _ = book
    args = _cli(["diagram", str(src), "--row", "Salts!2", "--row", "Salts!4",
                 "-o", str(tmp_path / "c.svg"), "--parity", str(tmp_path / "p.png")])
    assert args.handler(args) == 0
    assert (tmp_path / "c-Salts-2.svg").read_text(encoding="utf-8").count('id="level:') >= 6
    assert (tmp_path / "c-Salts-4.svg").exists()
    assert (tmp_path / "p.png").read_bytes()[:4] == b"\x89PNG"
    assert "c-Salts-2.svg: cycle of Salts!2" in capsys.readouterr().out
    with pytest.raises(SystemExit):
        _cli(["diagram", str(src), "--row", "Salts12"])  # not SHEET!ROW: argparse refuses


def test_annotate_options_and_progress() -> None:
    args = _cli(["annotate", "--reconcile", "--reconcile-threshold", "4", "--diagrams",
                 "Salts!2", "'My salts'!7"])
    kw = settings_kwargs(args)
    assert kw["reconcile"] is True and kw["reconcile_threshold"] == 4.0
    Settings(**kw)  # only fields Settings has
    assert args.diagrams == [("Salts", 2), ("My salts", 7)]
    assert parse_row_spec("'It''s'!3") == ("It's", 3)
    assert progress_for(_cli(["annotate", "-q"]), 10).enabled is False
    plain = _cli(["annotate"])
    bar = progress_for(plain, 10)
    assert bar.enabled is bool(bar.stream.isatty())  # on only when stderr is a terminal
    with pytest.raises(UsageError):
        settings_kwargs(_cli(["annotate", "--reconcile-threshold", "0"]))


def test_picture_bytes_fit_the_sheet_rows(book: tuple[Path, RunResult]) -> None:
    """Each picture sits below its caption and ends before the next caption."""
    from sheetcycle.io.package_images import png_extent

    _, run = book
    sheet = diagram_sheet(run, [])
    assert sheet is not None
    anchors = [r0 for r0, _, _ in sheet.images]
    for (r0, _, data), nxt in zip(sheet.images, [*anchors[1:], len(sheet.rows)], strict=True):
        _, cy = png_extent(io.BytesIO(data).getvalue(), sheet="s", file="f")
        rows_needed = cy / 914400 * 96 / 20  # EMU -> inches -> px -> 20 px rows (15 pt)
        assert nxt - r0 >= rows_needed, (r0, nxt, rows_needed)
