"""Fuzzing: the text parsers and the workbook reader fail only with sheetcycle's own errors.

* Property tests (Hypothesis) of the header/unit parser, the chemical-formula parser and
  the reaction parser: any text either parses or raises a SheetcycleError subclass.
* A mutation fuzz of a valid workbook: one part (worksheet, shared strings, workbook,
  styles) gets byte flips, insertions, deletions or XML-aware changes, is zipped again,
  and ``read_cells`` and ``annotate`` (no outputs) must either succeed or raise a
  SheetcycleError. The number of mutated workbooks is ``SHEETCYCLE_FUZZ_CASES`` (default
  200, for CI; thousands locally, e.g. ``SHEETCYCLE_FUZZ_CASES=5000``).
"""

from __future__ import annotations

import io
import os
import re
import sys
import zipfile
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from sheetcycle.api import annotate
from sheetcycle.chem import parse_formula
from sheetcycle.chem.reactions import parse_reaction
from sheetcycle.errors import SheetcycleError
from sheetcycle.io.cells import read_cells
from sheetcycle.io.headers import recognise, split_header
from sheetcycle.units import KINDS, conversion, parse_unit

sys.path.insert(0, str(Path(__file__).parent))
from make_corpus import HEADER, F, lab_sheet, package

FUZZ_CASES = int(os.environ.get("SHEETCYCLE_FUZZ_CASES", "200"))
TEXT_CASES = max(300, FUZZ_CASES)

# Characters that real headers, units, formulas and equations are made of, and their
# look-alikes: the parsers' edges are there, not in random Unicode.
CHEM = (
    "ABCDEFGHIKLMNOPRSTUVWXYZabcdefghiklmnoprstuy0123456789()[]{}·.,+-−–⁺⁻⁰¹²³⁴⁵⁶⁷⁸⁹₀₁₂₃"
    "*/^ =→⇌<>:;'\"°ΔµμÅ%eVkJmolKcal\t\u00a0"
)
chem_text = st.text(alphabet=CHEM, max_size=60)
any_text = st.text(max_size=80)
texts = st.one_of(chem_text, any_text)
fuzz = settings(max_examples=TEXT_CASES, deadline=None,
                suppress_health_check=[HealthCheck.too_slow])


def _only_own_errors(fn, *args) -> None:  # type: ignore[no-untyped-def]
    try:
        fn(*args)
    except SheetcycleError:
        pass


@fuzz
@given(texts)
def test_header_parser(text: str) -> None:
    label, unit = split_header(text)
    assert isinstance(label, str) and (unit is None or isinstance(unit, str))
    _only_own_errors(recognise, text)


@fuzz
@given(texts, st.sampled_from(KINDS))
def test_unit_parser(text: str, kind: str) -> None:
    _only_own_errors(parse_unit, text)
    _only_own_errors(parse_unit, text, kind)
    _only_own_errors(conversion, text, kind)


@fuzz
@given(texts)
def test_formula_parser(text: str) -> None:
    _only_own_errors(parse_formula, text)


@fuzz
@given(st.one_of(texts, st.builds(lambda a, b, arrow: f"{a} {arrow} {b}", chem_text, chem_text,
                                  st.sampled_from(["->", "→", "=", "⇌", "<->", "-->"]))))
def test_reaction_parser(text: str) -> None:
    _only_own_errors(parse_reaction, text)


def test_parsers_accept_and_refuse_known_texts() -> None:
    # The properties above can only fail by a crash; these show the parsers do parse.
    assert recognise("ΔfH° / kJ mol⁻¹").quantity == "formation_enthalpy"  # type: ignore[union-attr]
    assert parse_formula("CaF2").elements == {"Ca": 1, "F": 2}  # stoichiometry, by definition
    with pytest.raises(SheetcycleError):
        parse_formula("Na((Cl")
    with pytest.raises(SheetcycleError):
        conversion("J/K", "energy")  # an entropy unit is not an energy per mole
    with pytest.raises(SheetcycleError):
        conversion("A1dB", "energy")  # found by the fuzz test above: pint parsed it, then failed


# ----------------------------------------------------------------- mutation fuzz


def _seed_book(path: Path) -> Path:
    """A valid workbook with shared strings, an inline string, a formula, a merge, an
    error value and a second sheet: every code path of the reader has something to read."""
    rows = [
        [("s", 0), -411.2, "ok"],
        ["KBr", F("-93.9*4.184", -392.9), ("s", 1)],
        ["MgO", ("e", "#DIV/0!"), True],
    ]
    sheet = lab_sheet(rows).replace(
        "</sheetData>", '</sheetData><mergeCells count="1"><mergeCell ref="C1:D1"/></mergeCells>'
    )
    second = lab_sheet(header=("Formula", "ΔLH / kJ mol-1", "u / kJ mol-1"))
    return package(path, [("Salts", sheet), ("Lattice", second)], shared=["NaBr", "lit."],
                   app="sheetcycle-fuzz")


PARTS = ("xl/worksheets/sheet1.xml", "xl/sharedStrings.xml", "xl/workbook.xml",
         "xl/styles.xml", "xl/_rels/workbook.xml.rels", "xl/worksheets/sheet2.xml")
SNIPPETS = [b"<", b">", b"&", b"&#0;", b"&#x110000;", b"\xff", b"\x00", b'"', b"</c>",
            b"<c r=\"XFD1048576\"><v>1</v></c>", b"<row r=\"0\">", b"<row r=\"-5\">",
            b"<v>1e999</v>", b"<v>nan</v>", b" t=\"s\"", b" t=\"e\"", b" t=\"zz\"",
            b"<f>1/0</f>", b"<f t=\"shared\" si=\"0\"/>", b"<is><t>x</t></is>",
            b"_x0000_", b"<!DOCTYPE x>", b"<![CDATA[<row>]]>", b"\r\n", b"99999999999999"]


@st.composite
def mutations(draw: st.DrawFn) -> tuple[str, list[tuple[str, int, bytes]]]:
    part = draw(st.sampled_from(PARTS))
    ops = draw(st.lists(st.tuples(
        st.sampled_from(["flip", "insert", "delete", "snippet", "tag", "attr", "number"]),
        st.integers(min_value=0, max_value=1 << 30),
        st.binary(min_size=1, max_size=8),
    ), min_size=1, max_size=4))
    return part, ops


def _mutate(data: bytes, ops: list[tuple[str, int, bytes]]) -> bytes:
    buf = bytearray(data)
    for kind, pos, extra in ops:
        i = pos % (len(buf) + 1)
        if kind == "flip" and buf:
            j = i % len(buf)
            buf[j] ^= 1 << (extra[0] % 8)
        elif kind == "insert":
            buf[i:i] = extra
        elif kind == "delete":
            del buf[i : i + 1 + extra[0] % 40]
        elif kind == "snippet":
            buf[i:i] = SNIPPETS[extra[0] % len(SNIPPETS)]
        elif kind == "tag":  # drop or duplicate one whole element
            found = list(re.finditer(rb"<(\w+)[^>]*>[^<]*</\1>|<\w+[^>]*/>", bytes(buf)))
            if found:
                m = found[pos % len(found)]
                piece = b"" if extra[0] % 2 else m.group(0) * 2
                buf[m.start() : m.end()] = piece
        elif kind == "attr":  # change one attribute value
            found = list(re.finditer(rb'="([^"]*)"', bytes(buf)))
            if found:
                m = found[pos % len(found)]
                values = [b"", b"0", b"-1", b"1048577", b"A0", b"ZZZZ9", b"s", b"e", b"x" * 300]
                buf[m.start(1) : m.end(1)] = values[extra[0] % len(values)]
        elif kind == "number":  # change one number inside text
            found = list(re.finditer(rb">(-?\d+(?:\.\d+)?)<", bytes(buf)))
            if found:
                m = found[pos % len(found)]
                values = [b"", b"1e400", b"-0", b"99999999", b"1.5.5", b"0x10", b"\xe2\x88\x921"]
                buf[m.start(1) : m.end(1)] = values[extra[0] % len(values)]
    return bytes(buf)


@pytest.fixture(scope="module")
def seed(tmp_path_factory: pytest.TempPathFactory) -> dict[str, bytes]:
    path = _seed_book(tmp_path_factory.mktemp("seed") / "seed.xlsx")
    with zipfile.ZipFile(path) as zf:
        parts = {n: zf.read(n) for n in zf.namelist()}
    assert set(PARTS) <= set(parts)
    return parts


def test_seed_book_reads(seed: dict[str, bytes], tmp_path: Path) -> None:
    p = _write(seed, tmp_path / "seed.xlsx")
    book = read_cells(p)
    assert [s.name for s in book.sheets] == ["Salts", "Lattice"]
    assert book.sheets[0].rows[0] == list(HEADER)
    assert book.sheets[0].rows[6][0] == "NaBr"


def _write(parts: dict[str, bytes], path: Path) -> Path:
    buf = io.BytesIO()
    with zipfile.ZipFile(buf, "w", zipfile.ZIP_DEFLATED) as zf:
        for name, data in parts.items():
            zf.writestr(name, data)
    path.write_bytes(buf.getvalue())
    return path


@settings(max_examples=FUZZ_CASES, deadline=None,
          suppress_health_check=[HealthCheck.too_slow, HealthCheck.function_scoped_fixture])
@given(mutations())
def test_mutated_workbooks(seed: dict[str, bytes], tmp_path: Path,
                           change: tuple[str, list[tuple[str, int, bytes]]]) -> None:
    part, ops = change
    parts = dict(seed)
    parts[part] = _mutate(parts[part], ops)
    path = _write(parts, tmp_path / "m.xlsx")
    try:
        read_cells(path)
    except SheetcycleError:
        return
    try:
        annotate(path)
    except SheetcycleError:
        pass
