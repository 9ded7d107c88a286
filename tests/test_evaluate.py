"""Tests of bulk formula evaluation (sheetcycle.io.evaluate) and formula shifting.

Expected values are computed independently in each test with plain Python arithmetic
(math module); shifted formula texts are compared with openpyxl's Translator, an
independent implementation of the same rule. Spreadsheet semantics that are checked
(blank = 0 in arithmetic, errors propagate, #DIV/0! for division by zero) are common
practice of spreadsheet applications (no source; from memory).
"""

from __future__ import annotations

import math
from pathlib import Path

import openpyxl
import pytest
import xlsxwriter
from openpyxl.formula.translate import Translator
from openpyxl.workbook.defined_name import DefinedName

from sheetcycle.io.cells import read_cells
from sheetcycle.io.evaluate import CIRCULAR, CellError, evaluate_cells, shift_formula

# ----------------------------------------------------------------------------- shifting

SHIFT_CASES = [
    "=B2*4.184",
    "=$B$2+B3-B$4*$C5",
    "=SUM(B2:D9)/COUNT($A$1:A9)",
    "=Sheet2!B2*2+'Other sheet'!$C3",
    '=IF(A1>0,"A1 stays",LOG10(C3))',
    "=SUM(A:A)+SUM($B:C)+SUM(3:4)",
    "=AB12+XFA5-ZZ100",
]


@pytest.mark.parametrize("formula", SHIFT_CASES)
@pytest.mark.parametrize("dr, dc", [(0, 0), (1, 0), (57, 0), (0, 3), (12, 2)])
def test_shift_matches_openpyxl_translator(formula: str, dr: int, dc: int) -> None:
    origin = "E10"
    dest = openpyxl.utils.get_column_letter(5 + dc) + str(10 + dr)
    assert shift_formula(formula, dr, dc) == Translator(formula, origin=origin).translate_formula(
        dest
    )


def test_shift_off_the_sheet_is_ref_error() -> None:
    assert shift_formula("=A1-1", -1, 0) == "=#REF!-1"
    assert shift_formula("=$A$1+A1", 0, -1) == "=$A$1+#REF!"


# ----------------------------------------------------------------------------- evaluation


def test_arithmetic_ranges_sheets_chains_and_names() -> None:
    main = [
        ["name", "a", "b", "c"],
        ["NaCl", 1.5, -2.0, 10.0],
        ["KBr", 4.0, 0.25, None],
    ]
    other = [[None, 3.0], [None, 7.0]]
    sheets = {"Main": main, "Sheet 2": other}
    targets = [
        ("Main", 1, 4, "=B2*4.184"),
        ("Main", 2, 4, "=B3*4.184"),
        ("Main", 1, 5, "=(B2+C2)/2"),
        ("Main", 2, 5, "=(B3+C3)/2"),
        ("Main", 1, 6, "=SUM(B2:D2)"),
        ("Main", 2, 6, "=SUM(B3:D3)"),
        ("Main", 1, 7, "='Sheet 2'!B2*2"),
        ("Main", 1, 8, "=E2+1"),  # a chain: E2 is itself a formula
        ("Main", 1, 9, "=I2*factor"),  # and a chain of a chain, through a defined name
        ("Main", 1, 10, "=SUM(E2:E3)"),  # a range over formula cells
        ("Main", 2, 7, "=D3*2"),  # a blank counts as 0
    ]
    got = evaluate_cells(sheets, targets, names={"factor": "'Sheet 2'!$B$1"})
    assert got[("Main", 1, 4)] == pytest.approx(1.5 * 4.184)
    assert got[("Main", 2, 4)] == pytest.approx(4.0 * 4.184)
    assert got[("Main", 1, 5)] == pytest.approx((1.5 - 2.0) / 2)
    assert got[("Main", 2, 5)] == pytest.approx((4.0 + 0.25) / 2)
    assert got[("Main", 1, 6)] == pytest.approx(1.5 - 2.0 + 10.0)
    assert got[("Main", 2, 6)] == pytest.approx(4.0 + 0.25)
    assert got[("Main", 1, 7)] == pytest.approx(7.0 * 2)
    assert got[("Main", 1, 8)] == pytest.approx(1.5 * 4.184 + 1)
    assert got[("Main", 1, 9)] == pytest.approx((1.5 * 4.184 + 1) * 3.0)
    assert got[("Main", 1, 10)] == pytest.approx(1.5 * 4.184 + 4.0 * 4.184)
    assert got[("Main", 2, 7)] == 0.0
    assert main[1][4] == got[("Main", 1, 4)]  # results are stored into the grid


def test_errors_flow_and_are_values() -> None:
    sheets = {"S": [[0.0, CellError("#N/A"), "text", 2.0]]}
    targets = [
        ("S", 1, 0, "=D1/A1"),
        ("S", 1, 1, "=B1+1"),
        ("S", 1, 2, "=C1*2"),
        ("S", 1, 3, "=IFERROR(D1/A1,-1)"),
        ("S", 1, 4, "=1E308*10"),
    ]
    got = evaluate_cells(sheets, targets)
    assert got[("S", 1, 0)] == CellError("#DIV/0!")
    assert got[("S", 1, 1)] == CellError("#N/A")
    assert got[("S", 1, 2)] == CellError("#VALUE!")
    assert got[("S", 1, 3)] == -1.0
    assert isinstance(got[("S", 1, 4)], CellError)


def test_division_by_zero_in_a_long_column() -> None:
    # The whole-column float path must hand cells with x/0 back as #DIV/0!.
    n = 500
    grid: list[list[object]] = [[float(r), float(r % 5)] for r in range(n)]
    targets = [("S", r, 2, f"=A{r + 1}/B{r + 1}") for r in range(n)]
    got = evaluate_cells({"S": grid}, targets)
    for r in range(n):
        value = got[("S", r, 2)]
        if r % 5 == 0:
            assert value == CellError("#DIV/0!")
        else:
            assert value == pytest.approx(r / (r % 5))


def test_circular_references() -> None:
    sheets = {"S": [[1.0]]}
    targets = [
        ("S", 0, 1, "=C1+1"),
        ("S", 0, 2, "=B1*2"),
        ("S", 0, 3, "=B1+A1"),
        ("S", 0, 4, "=E1"),
    ]
    got = evaluate_cells(sheets, targets)
    for col in (1, 2, 3, 4):  # the pair, a cell fed by it, and a self-reference
        assert got[("S", 0, col)] == CIRCULAR
        assert got[("S", 0, col)].reason == "circular reference"


def test_unsupported_things_become_errors_with_reasons() -> None:
    sheets = {"S": [[1.0, 2.0]]}
    targets = [
        ("S", 1, 0, "=OFFSET(A1,0,1)"),
        ("S", 1, 1, "=[1]Book!A1*2"),
        ("S", 1, 2, "=Nowhere!A1"),
        ("S", 1, 3, "=undefined_name*2"),
        ("S", 1, 4, "=NOSUCHFUNCTION(A1)"),
        ("S", 1, 5, "=A1+"),
    ]
    got = evaluate_cells(sheets, targets)
    for key, value in got.items():
        assert isinstance(value, CellError), key
        assert value.reason, key
    assert got[("S", 1, 1)].code == "#REF!"
    assert got[("S", 1, 2)].code == "#REF!"
    assert got[("S", 1, 3)].code == "#NAME?"


ELEMENTWISE_CASES = {
    "=IF(A{r}>0,A{r},-1)": lambda a, b: a if a > 0 else -1.0,
    "=ABS(A{r})+SQRT(ABS(B{r}))": lambda a, b: abs(a) + math.sqrt(abs(b)),
    "=ROUND(A{r}*B{r},2)": lambda a, b: round(a * b, 2),
    "=EXP(B{r}/10)-LN(ABS(A{r})+1)": lambda a, b: math.exp(b / 10) - math.log(abs(a) + 1),
    "=POWER(A{r},2)+MOD(7,3)": lambda a, b: a**2 + 1.0,
    "=-A{r}^2": lambda a, b: a**2,  # unary minus binds first in spreadsheets
    "=MAX(A{r},B{r})": lambda a, b: max(a, b),  # not element-wise: one call per cell
}


@pytest.mark.parametrize("formula", list(ELEMENTWISE_CASES))
def test_whole_column_evaluation_matches_python(formula: str) -> None:
    expected = ELEMENTWISE_CASES[formula]
    n = 300
    grid: list[list[object]] = [[(r - 150) * 0.37, (r % 17) - 8.0] for r in range(n)]
    targets = [("S", r, 2, formula.format(r=r + 1)) for r in range(n)]
    got = evaluate_cells({"S": grid}, targets)
    for r in range(n):
        a, b = (r - 150) * 0.37, (r % 17) - 8.0
        assert got[("S", r, 2)] == pytest.approx(expected(a, b), rel=1e-12, abs=1e-12), r


def test_single_cell_and_column_paths_agree() -> None:
    # The same cells evaluated together (one call on arrays) and one at a time.
    values = [1.5, -2.0, 0.0, None, "x", "2.5", True, CellError("#DIV/0!")]
    formulas = [
        "=IF(A{r}>0,A{r},-1)",
        '=IFERROR(1/A{r},"bad")',
        "=ISNUMBER(A{r})",
        "=ISBLANK(A{r})",
        '=A{r}&"!"',
        "=ROUND(A{r},0)",
        "=A{r}*2",
    ]
    for f in formulas:
        grid = [[v] for v in values]
        together = evaluate_cells(
            {"S": grid}, [("S", r, 1, f.format(r=r + 1)) for r in range(len(values))]
        )
        for r in range(len(values)):
            alone = evaluate_cells({"S": [[v] for v in values]}, [("S", r, 1, f.format(r=r + 1))])
            assert together[("S", r, 1)] == alone[("S", r, 1)], (f, values[r])


def test_long_dependency_chain() -> None:
    n = 400
    grid: list[list[object]] = [[1.0]]
    targets = [("S", r, 0, f"=A{r}+0.5") for r in range(1, n)]
    got = evaluate_cells({"S": grid}, targets)
    assert got[("S", n - 1, 0)] == pytest.approx(1.0 + 0.5 * (n - 1))


# ----------------------------------------------------------------------------- via files


def test_workbook_written_by_openpyxl(tmp_path: Path) -> None:
    path = tmp_path / "o.xlsx"
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Data"
    ws.append(["Compound", "kcal", "x", "y", "kJ", "next", "named", "circ1", "circ2", "div"])
    ws.append(["NaCl", -98.26, 2.0, 6.0, "=B2*4.184", "=E2+1", "=C2*ratio", "=I2", "=H2", "=1/0"])
    ws.append(["KCl", -104.4, 3.0, 9.0, "=B3*4.184", "=E3+1", "=C3*ratio", None, None, None])
    ws2 = wb.create_sheet("Sheet2")
    ws2["B2"] = 21.0
    ws["K2"] = "=Sheet2!B2*2"
    ws["L2"] = "=SUM(C2:D3)"
    wb.defined_names["ratio"] = DefinedName("ratio", attr_text="Sheet2!$B$2")
    wb.save(path)
    got = read_cells(path)
    rows = got.sheets[0].rows
    assert rows[1][4] == pytest.approx(-98.26 * 4.184)
    assert rows[2][4] == pytest.approx(-104.4 * 4.184)
    assert rows[1][5] == pytest.approx(-98.26 * 4.184 + 1)
    assert rows[2][6] == pytest.approx(3.0 * 21.0)
    assert rows[1][7] == CIRCULAR and rows[1][8] == CIRCULAR
    assert rows[1][9] == CellError("#DIV/0!")
    assert rows[1][10] == 42.0
    assert rows[1][11] == 2.0 + 6.0 + 3.0 + 9.0


def test_workbook_written_by_xlsxwriter_with_zero_caches(tmp_path: Path) -> None:
    path = tmp_path / "x.xlsx"
    wb = xlsxwriter.Workbook(str(path))
    ws = wb.add_worksheet("Data")
    n = 1000
    for r in range(n):
        ws.write_number(r, 0, r * 0.5)
        ws.write_number(r, 1, 100.0 - r)
        ws.write_formula(r, 2, f"=A{r + 1}*4.184-(B{r + 1}+A{r + 1})/2")
        ws.write_formula(r, 3, f"=C{r + 1}+B{r + 1}")
    wb.close()
    rows = read_cells(path).sheets[0].rows
    for r in range(n):
        a, b = r * 0.5, 100.0 - r
        assert rows[r][2] == pytest.approx(a * 4.184 - (b + a) / 2)
        assert rows[r][3] == pytest.approx(a * 4.184 - (b + a) / 2 + b)


# ----------------------------------------------------------------------------- oracle


def test_matches_formulas_excelmodel_on_a_small_workbook(tmp_path: Path) -> None:
    # Independent oracle: formulas.ExcelModel parses and evaluates every cell on its own
    # (no shape grouping, no column arrays), from the file.
    import formulas

    path = tmp_path / "oracle.xlsx"
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Data"
    ws.append(["Compound", "kcal", "x", "y", "kJ", "mean", "chain", "named", "other", "sum"])
    n = 30
    for r in range(2, n + 2):
        ws.append([
            f"C{r}", -90.0 - r * 1.37, r * 0.5, 10.0 - r, f"=B{r}*4.184", f"=(C{r}+D{r})/2",
            f"=B{r}-E{r}+F{r}", f"=C{r}*ratio", f"=Factors!$B$2*D{r}+Factors!B3",
            f"=SUM(C{r}:D{r})+IF(C{r}>5,1,-1)+ROUND(AVERAGE($C$2:$C${n + 1}),3)",
        ])  # fmt: skip
    other = wb.create_sheet("Factors")
    other["B2"] = 2.5
    other["B3"] = -1.25
    wb.defined_names["ratio"] = DefinedName("ratio", attr_text="Factors!$B$2")
    wb.save(path)

    ours = read_cells(path).sheet("Data").rows
    solution = formulas.ExcelModel().loads(str(path)).finish().calculate()
    book = "[oracle.xlsx]"
    checked = 0
    for r in range(1, n + 1):
        for c in range(4, 10):
            key = f"'{book}DATA'!{openpyxl.utils.get_column_letter(c + 1)}{r + 1}"
            expected = float(solution[key].value[0, 0])
            assert ours[r][c] == pytest.approx(expected, rel=1e-12, abs=1e-12), key
            checked += 1
    assert checked == n * 6


# ----------------------------------------------------------------------------- verifying


def test_verify_formula_true_and_messages() -> None:
    from sheetcycle.io.evaluate import verify_formula

    assert verify_formula("=B2*4.184", {"B2": -98.26}, -98.26 * 4.184) is True
    assert verify_formula("=B2*4.184", {"B2": -98.26}, -98.26 * 4.184 * (1 + 1e-12)) is True
    got = verify_formula("=B2*4.184", {"B2": 2.0}, 8.37)
    assert got == "=B2*4.184 gives 8.368, expected 8.37"
    got = verify_formula("=B2-'Ref data'!A1+Sheet2!C3", {"B2": 5.0, "'Ref data'!A1": 1.5,
                                                         "Sheet2!C3": 0.25}, 5.0 - 1.5 + 0.25)
    assert got is True
    got = verify_formula("=B2/C2", {"B2": 2.0}, 1.0)
    assert isinstance(got, str) and "#DIV/0!" in got
    assert verify_formula('=A1&"x"', {"A1": "NaCl"}, "NaClx") is True
    with pytest.raises(ValueError):
        verify_formula("=A1", {"not a cell": 1.0}, 1.0)


def test_verify_formulas_a_column_at_once() -> None:
    from sheetcycle.io.evaluate import verify_formulas

    n = 2000
    grid: list[list[object]] = [[r * 0.5, 100.0 - r] for r in range(n)]
    items = [
        ("S", r, 2, f"=A{r + 1}*4.184-(B{r + 1}+A{r + 1})/2",
         r * 0.5 * 4.184 - (100.0 - r + r * 0.5) / 2 + (1.0 if r == 777 else 0.0))
        for r in range(n)
    ]  # fmt: skip
    got = verify_formulas({"S": grid}, items)
    bad = [i for i, g in enumerate(got) if g is not True]
    assert bad == [777]
    assert got[777].startswith("S!C778: =A778*4.184-(B778+A778)/2 gives ")
    assert len(grid[0]) == 2  # the caller's grid is left alone


def test_column_letters_match_openpyxl() -> None:
    # reference: openpyxl.utils.get_column_letter (an independent implementation)
    from sheetcycle.io.tables import a1

    for col in (*range(0, 800), 16_383):
        assert a1(0, col) == openpyxl.utils.get_column_letter(col + 1) + "1"


_OPERANDS = ("B{r}", "C{r}", "D{r}", "2.5", "4.184", "1e-3")


def _arith_shapes(seed: int, count: int) -> list[str]:
    """Random formulas of + - * /, unary minus, ABS and parentheses over B..D of a row."""
    import random

    rng = random.Random(seed)

    def expr(depth: int) -> str:
        if depth == 0 or rng.random() < 0.3:
            return rng.choice(_OPERANDS)
        kind = rng.random()
        if kind < 0.15:
            return f"-{expr(depth - 1)}"
        if kind < 0.3:
            return f"ABS({expr(depth - 1)})"
        if kind < 0.45:
            return f"({expr(depth - 1)})"
        return f"{expr(depth - 1)}{rng.choice('+-*/')}{expr(depth - 1)}"

    return [expr(4) for _ in range(count)]


def test_whole_column_arithmetic_agrees_with_the_formulas_package() -> None:
    # Reference: the `formulas` package (an independent spreadsheet-formula evaluator)
    # compiles each formula and evaluates it cell by cell; evaluate_cells takes its numpy
    # whole-column path for these shapes (several rows, numbers only) and must agree.
    import formulas

    rows = [["x", "b", "c", "d"], *[["r", 1.5 * k - 4, -0.75 * k, k * k + 0.5] for k in range(6)]]
    checked = 0
    for text in _arith_shapes(seed=20261202, count=60):
        targets = [("S", r, 5, "=" + text.format(r=r + 1)) for r in range(1, len(rows))]
        got = evaluate_cells({"S": [list(x) for x in rows]}, targets)
        for _, r, c, f in targets:
            fn = formulas.Parser().ast(f)[1].compile()
            inputs = {name: rows[int(name[1:]) - 1]["ABCD".index(name[0])] for name in fn.inputs}
            want = fn(*inputs.values())
            want = want.ravel()[0] if hasattr(want, "ravel") else want
            value = got[("S", r, c)]
            if isinstance(want, int | float) and math.isfinite(want):
                assert isinstance(value, float), (f, value, want)
                assert value == pytest.approx(want, rel=1e-12, abs=1e-12), f
                checked += 1
            else:  # a spreadsheet error (division by zero): an error value here too
                assert isinstance(value, CellError), (f, value, want)
    assert checked > 200
