"""The sheet writer's background deflating keeps the chunks' order and loses no error."""

from __future__ import annotations

import pytest

from sheetcycle.io.package import _Deflating


def test_chunks_arrive_in_order() -> None:
    got: list[bytes] = []
    chunks = [bytes([k % 256]) * (k + 1) for k in range(200)]
    with _Deflating(got.append) as write:
        for c in chunks:
            write(c)
    assert got == chunks


def test_an_error_in_the_thread_reaches_the_caller() -> None:
    seen: list[bytes] = []

    def failing(chunk: bytes) -> None:
        if len(seen) == 3:
            raise OSError("disk full")
        seen.append(chunk)

    with pytest.raises(OSError, match="disk full"):
        with _Deflating(failing) as write:
            for k in range(50):
                write(b"x" * k)
    assert len(seen) == 3  # nothing is written after the failure


# --- parts made while the zip is written, in chunks ------------------------------------


def _styler():  # type: ignore[no-untyped-def]
    from sheetcycle.io.package import FILLS, _cell_attrs
    from sheetcycle.io.package_cells import CellStyler
    from sheetcycle.io.package_styles import MINIMAL_STYLES, StyleBook

    return CellStyler(StyleBook(MINIMAL_STYLES), FILLS), _cell_attrs


def test_a_new_sheet_in_chunks_is_the_sheet_in_one_piece() -> None:
    from sheetcycle.io.package_cells import AddedCell, new_sheet_chunks

    rows = [[AddedCell(f"r{r} & <x>", None, "warning" if r % 3 else None),
             AddedCell(r * 0.5, f"B{r}*2" if r % 2 else None, "number")] for r in range(1, 40)]
    links = {(k, 0): f"'Data'!A{k}" for k in range(0, 39, 5)}
    styler, attrs = _styler()
    whole = b"".join(new_sheet_chunks(rows, (10, 12), links, styler, attrs,
                                      rows_per_chunk=10_000))  # one piece
    assert whole.endswith(b"</worksheet>") and whole.count(b"<row ") == 39
    chunks = list(new_sheet_chunks(rows, (10, 12), links, styler, attrs, rows_per_chunk=7))
    assert len(chunks) == 6 and b"".join(chunks) == whole


def test_styles_registered_ahead_are_all_a_new_sheet_asks_for() -> None:
    from sheetcycle.io.package_cells import AddedCell, new_sheet_chunks, register_new_sheet_styles

    rows = [[AddedCell("a", None, s), AddedCell(1.0, None, s)]
            for s in ("warning", "error", "note", "header", "text", None)]
    links = {(0, 0): "'X'!A1"}
    styler, attrs = _styler()
    register_new_sheet_styles(rows, links, styler, attrs)
    before = sum(len(sec.added) for sec in styler.styles.sections.values())
    assert before > 0
    b"".join(new_sheet_chunks(rows, (), links, styler, attrs))
    assert sum(len(sec.added) for sec in styler.styles.sections.values()) == before


def test_note_parts_in_chunks_are_the_parts_in_one_piece() -> None:
    from sheetcycle.io.package_notes import (
        NoteText,
        add_comments,
        add_vml,
        comments_chunks,
        new_vml_chunks,
    )

    notes = [NoteText(r, r % 4, f"warning: row {r} <&>") for r in range(2, 3000)]
    whole, last = add_vml(None, notes, 3)
    assert last == 5  # 2998 boxes take three blocks of 1023 (common practice, no source)
    assert b"".join(new_vml_chunks(notes, 3, per_chunk=500)) == whole
    assert b"".join(comments_chunks(None, notes)) == add_comments(None, notes)


def test_a_format_asked_for_too_late_stops_the_write(tmp_path, monkeypatch) -> None:  # type: ignore[no-untyped-def]
    import xlsxwriter

    from sheetcycle.errors import WriteError
    from sheetcycle.io import package
    from sheetcycle.io.package_cells import AddedCell

    src = tmp_path / "in.xlsx"
    wb = xlsxwriter.Workbook(str(src))
    wb.add_worksheet("Data").write(0, 0, "x")
    wb.close()
    sheet = package.NewSheet("late", [[AddedCell("w", None, "warning")]])
    monkeypatch.setattr(package, "register_new_sheet_styles", lambda *a: None)
    with pytest.raises(WriteError, match="cell format"):
        package.write_annotated(src, tmp_path / "out.xlsx", new_sheets=[sheet])
    assert not (tmp_path / "out.xlsx").exists()
    monkeypatch.undo()
    package.write_annotated(src, tmp_path / "out.xlsx", new_sheets=[sheet])  # and without
    import zipfile

    import struct

    # a streamed small part carries no Zip64 record in its local header (PKWARE APPNOTE
    # 4.3.7 and 4.5.3: the extra field of tag 0x0001 is there only when sizes need it)
    raw = (tmp_path / "out.xlsx").read_bytes()
    with zipfile.ZipFile(tmp_path / "out.xlsx") as z:
        assert b"<t>w</t>" in z.read("xl/worksheets/sheet2.xml")
        for info in z.infolist():
            at = info.header_offset
            name_len, extra_len = struct.unpack("<HH", raw[at + 26:at + 30])
            extra = raw[at + 30 + name_len:at + 30 + name_len + extra_len]
            tags = [struct.unpack("<H", extra[k:k + 2])[0] for k in range(0, len(extra), 4)
                    if k + 2 <= len(extra)][:1]
            assert 0x0001 not in tags, info.filename
