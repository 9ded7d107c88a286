"""Evaluating a workbook's formula cells with the ``formulas`` package, in bulk.

Parsing every cell separately (``formulas.ExcelModel``) costs about 5 ms a formula. Here
each formula is rewritten into a *shape*: its text with every cell or range reference
replaced by a placeholder name (``XREF0``, ``XREF1`` ...), plus the list of concrete
references of that cell. All cells that share a shape (a column of ``=B2*4.184``,
``=B3*4.184`` ...) are compiled once. When a shape uses only single-cell references and
element-wise functions, all its cells are evaluated in one call on whole-column arrays;
otherwise the compiled function is called once per cell (ranges arrive as 2-D arrays).

Formula cells that refer to other formula cells are evaluated in dependency order; cells
in (or fed by) a circular reference get :data:`CIRCULAR`. What cannot be evaluated (an
unknown function or name, an external workbook, a reference to a missing sheet, functions
that need cell addresses such as OFFSET) becomes a :class:`CellError` with a reason; this
module never raises for a bad formula.

The same reference scanner also shifts formulas (shared formulas in xlsx files store the
master's text only): :func:`shift_formula`.
"""

from __future__ import annotations

import bisect
import logging
import re
from collections import defaultdict
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

# schedula (under formulas) logs a traceback for a failing function; a failing cell is a
# flagged value here, and the user must see one plain message, not a traceback.
for _name in ("schedula", "formulas"):
    logging.getLogger(_name).setLevel(logging.CRITICAL + 1)

__all__ = [
    "CIRCULAR",
    "ERROR_CODES",
    "CellError",
    "col_index",
    "col_letters",
    "evaluate_cells",
    "shift_formula",
    "show_value",
    "values_match",
    "verify_formula",
    "verify_formulas",
]

MAX_ROW = 1_048_576
MAX_COL = 16_384

ERROR_CODES = ("#NULL!", "#DIV/0!", "#VALUE!", "#REF!", "#NAME?", "#NUM!", "#N/A")


@dataclass(frozen=True)
class CellError:
    """A spreadsheet error value (``#DIV/0!`` ...). ``reason`` says why, when we know.

    ``#CIRC!`` is sheetcycle's own code for a cell in a circular reference (spreadsheet
    applications show a warning and 0 instead); treat it like any other error.
    """

    code: str
    reason: str = field(default="", compare=False)

    def __str__(self) -> str:
        return self.code


CIRCULAR = CellError("#CIRC!", "circular reference")

# --------------------------------------------------------------------------- references

_ERR_LIT = r"#(?:NULL!|DIV/0!|VALUE!|REF!|NAME\?|NUM!|N/A|GETTING_DATA|SPILL!|CALC!)"
_TOKEN = re.compile(
    r'(?P<str>"(?:[^"]|"")*")'
    rf"|(?P<err>{_ERR_LIT})"
    r"|(?<![\w.$#])"
    r"(?P<sheet>(?:'(?:[^']|'')+'|\[[^\]]*\][^!'\s(),]*|[^\W\d][\w.]*)!)?"
    r"(?P<ref>\$?[A-Za-z]{1,3}\$?\d+(?::\$?[A-Za-z]{1,3}\$?\d+)?"
    r"|\$?[A-Za-z]{1,3}:\$?[A-Za-z]{1,3}"
    r"|\$?\d+:\$?\d+)"
    r"(?![\w(!.\[])"
    r"|(?<![\w.$#!])(?P<name>[^\W\d][\w.]*)(?![\w(!.\[])"
)
_PART = re.compile(r"(\$?)([A-Za-z]{0,3})(\$?)(\d*)")


def col_index(letters: str) -> int:
    """'A' -> 0, 'AA' -> 26."""
    n = 0
    for ch in letters.upper():
        n = n * 26 + (ord(ch) - 64)
    return n - 1


def col_letters(index: int) -> str:
    """0 -> 'A', 26 -> 'AA'."""
    out = ""
    index += 1
    while index:
        index, rem = divmod(index - 1, 26)
        out = chr(65 + rem) + out
    return out


@dataclass(frozen=True, slots=True)
class _Ref:
    """One reference token split into its ends; rows/cols 0-based, None = open."""

    sheet: str | None  # as written, with quotes removed
    c1: int | None
    r1: int | None
    c2: int | None
    r2: int | None
    abs_c1: bool
    abs_r1: bool
    abs_c2: bool
    abs_r2: bool
    is_range: bool
    external: bool


def _parse_end(text: str) -> tuple[int | None, int | None, bool, bool]:
    m = _PART.fullmatch(text)
    assert m is not None
    dc, letters, dr, digits = m.groups()
    col = col_index(letters) if letters else None
    row = int(digits) - 1 if digits else None
    return col, row, bool(dc), bool(dr)


def _parse_ref(sheet: str | None, ref: str) -> _Ref:
    external = False
    if sheet is not None:
        sheet = sheet[:-1]
        if sheet.startswith("["):
            external = True
        elif sheet.startswith("'"):
            sheet = sheet[1:-1].replace("''", "'")
            external = sheet.startswith("[")
    first, _, second = ref.partition(":")
    c1, r1, ac1, ar1 = _parse_end(first)
    if second:
        c2, r2, ac2, ar2 = _parse_end(second)
    else:
        c2, r2, ac2, ar2 = c1, r1, ac1, ar1
    return _Ref(sheet, c1, r1, c2, r2, ac1, ar1, ac2, ar2, bool(second), external)


def _end_text(col: int | None, row: int | None, ac: bool, ar: bool) -> str:
    text = ""
    if col is not None:
        text += ("$" if ac else "") + col_letters(col)
    if row is not None:
        text += ("$" if ar else "") + str(row + 1)
    return text


def _quote_sheet(sheet: str) -> str:
    if re.fullmatch(r"[^\W\d]\w*", sheet) and not re.fullmatch(r"[A-Za-z]{1,3}\d+", sheet):
        return sheet
    return "'" + sheet.replace("'", "''") + "'"


def _shift_token(sheet: str | None, ref: str, dr: int, dc: int) -> str:
    p = _parse_ref(sheet, ref)
    ends = []
    for col, row, ac, ar in ((p.c1, p.r1, p.abs_c1, p.abs_r1), (p.c2, p.r2, p.abs_c2, p.abs_r2)):
        if col is not None and not ac:
            col += dc
            if not 0 <= col < MAX_COL:
                return "#REF!"
        if row is not None and not ar:
            row += dr
            if not 0 <= row < MAX_ROW:
                return "#REF!"
        ends.append(_end_text(col, row, ac, ar))
    text = ends[0] + (":" + ends[1] if p.is_range else "")
    prefix = "" if sheet is None else sheet
    return prefix + text


def _split(formula: str) -> list[tuple[str, str | None, str | None]]:
    """Formula text as pieces: ('lit', text) or ('ref', sheet-prefix, ref) or ('name', n)."""
    pieces: list[tuple[str, str | None, str | None]] = []
    pos = 0
    for m in _TOKEN.finditer(formula):
        kind = m.lastgroup
        if kind in ("str", "err"):
            continue
        if m.start() > pos:
            pieces.append(("lit", formula[pos : m.start()], None))
        if m.group("ref") is not None:
            pieces.append(("ref", m.group("sheet"), m.group("ref")))
        else:
            pieces.append(("name", m.group("name"), None))
        pos = m.end()
    if pos < len(formula):
        pieces.append(("lit", formula[pos:], None))
    return pieces


class _Shifter:
    """A formula text split once, re-assembled for any row/column offset."""

    def __init__(self, formula: str) -> None:
        self.pieces = _split(formula)

    def shift(self, dr: int, dc: int) -> str:
        out = []
        for kind, a, b in self.pieces:
            if kind == "ref":
                assert b is not None
                out.append(_shift_token(a, b, dr, dc))
            else:
                assert a is not None
                out.append(a)
        return "".join(out)


def shift_formula(formula: str, dr: int, dc: int) -> str:
    """The text a formula takes when copied ``dr`` rows down and ``dc`` columns right.

    Relative parts move, ``$`` parts stay; a reference pushed off the sheet is ``#REF!``.
    """
    return _Shifter(formula).shift(dr, dc)


# --------------------------------------------------------------------------- shapes

# Functions that act element by element, so a whole column can go through in one call
# (checked here against per-cell calls in tests/test_evaluate.py).
_ELEMENTWISE = frozenset(
    """IF IFERROR IFNA IFS SWITCH CHOOSE ABS SQRT EXP LN LOG LOG10 POWER ROUND ROUNDUP
    ROUNDDOWN INT TRUNC MOD SIGN PI SIN COS TAN ATAN2 DEGREES RADIANS FACT FLOOR CEILING
    ISNUMBER ISBLANK ISERROR ISERR ISNA ISTEXT ISLOGICAL NOT NA UPPER LOWER LEN TEXT TRIM
    LEFT RIGHT MID SUBSTITUTE EXACT""".split()
)
# Functions that need the address of a reference, which placeholders do not carry.
_NEEDS_ADDRESS = frozenset("ROW COLUMN OFFSET INDIRECT CELL ADDRESS AREAS".split())
_ALL_ELEMENTWISE: frozenset[str] = frozenset()


def _elementwise() -> frozenset[str]:
    """The element-wise functions, with sheetcycle's own (they take whole columns)."""
    global _ALL_ELEMENTWISE
    if not _ALL_ELEMENTWISE:
        from sheetcycle.io.functions import REGISTRY

        _ALL_ELEMENTWISE = _ELEMENTWISE | frozenset(REGISTRY)
    return _ALL_ELEMENTWISE
_FUNC = re.compile(r"(?<![\w.])((?:_xlfn\.|_xlws\.|_xludf\.)?[A-Za-z][\w.]*)\(")
_STRINGS = re.compile(r'"(?:[^"]|"")*"')


@dataclass(frozen=True, slots=True)
class _Target:
    sheet: int  # index into the sheet list
    row: int
    col: int
    refs: tuple[tuple[int, int, int, int, int], ...]  # (sheet, r1, c1, r2, c2), inclusive
    shape: str
    single: bool  # every reference is one cell
    problem: CellError | None = None


def _expand_names(formula: str, sheet: str, names: Mapping[str, str]) -> str:
    """Replace defined names by their text (a sheet-local name first), a few levels deep."""
    if not names:
        return formula
    upper = {k.upper(): v for k, v in names.items()}
    for _ in range(5):
        changed = False
        out = []
        for kind, a, b in _split(formula):
            if kind == "name":
                assert a is not None
                key = a.upper()
                local = f"{sheet}!{a}".upper()
                text = upper.get(local, upper.get(key))
                if text is not None and key not in ("TRUE", "FALSE"):
                    text = text[1:] if text.startswith("=") else text
                    out.append(f"({text})")
                    changed = True
                    continue
                out.append(a)
            elif kind == "ref":
                out.append((a or "") + (b or ""))
            else:
                out.append(a or "")
        formula = "".join(out)
        if not changed:
            break
    return formula


_SHAPE_TOKEN = re.compile(
    r'"(?:[^"]|"")*"'
    rf"|{_ERR_LIT}"
    r"|(?<![\w.$#])"
    r"(?:('(?:[^']|'')+'|\[[^\]]*\][^!'\s(),]*|[^\W\d][\w.]*)!)?"
    r"(?:\$?([A-Za-z]{1,3})\$?(\d+)(?::\$?([A-Za-z]{1,3})\$?(\d+))?"
    r"|\$?([A-Za-z]{1,3}):\$?([A-Za-z]{1,3})"
    r"|\$?(\d+):\$?(\d+))"
    r"(?![\w(!.\[])"
    r"|(?<![\w.$#!])([^\W\d][\w.]*)(?![\w(!.\[])"
)
_COLS: dict[str, int] = {}


def _col(letters: str) -> int:
    c = _COLS.get(letters)
    if c is None:
        c = _COLS[letters] = col_index(letters)
    return c


def _shape_problem(shape: str) -> tuple[CellError | None, bool]:
    """(problem, element-wise) of a shape's functions."""
    bare = _STRINGS.sub('""', shape)
    funcs = {
        f.upper().removeprefix("_XLFN.").removeprefix("_XLWS.").removeprefix("_XLUDF.")
        for f in _FUNC.findall(bare)
    }
    bad = funcs & _NEEDS_ADDRESS
    if bad:
        return CellError("#NAME?", f"function {sorted(bad)[0]} is not supported here"), False
    if "[" in bare:
        return CellError("#NAME?", "structured (table) references are not supported"), False
    return None, funcs <= _elementwise()


_DIGITS = re.compile(r"(\d+)")


class _Templates:
    """Shapes of formulas that differ only in their digit runs, worked out once.

    ``=B2*4.184`` and ``=B3*4.184`` split into the same literal parts around their digit
    runs; the first one is tokenized fully and the role of each digit run noted (a row
    number of reference k, or text that stays in the shape). The rest are then built by
    arithmetic. Templates whose digits also sit in sheet names or names are not cached.
    """

    def __init__(self) -> None:
        self.cache: dict[tuple[int, tuple[str, ...]], Any] = {}
        self.built: dict[int, tuple[list[int], dict[tuple[str, ...], str]]] = {}

    def consts(self, tpl: Any) -> tuple[list[int], dict[tuple[str, ...], str]]:
        """The digit runs that stay in a template's shape, and shapes built so far."""
        found = self.built.get(id(tpl))
        if found is None:
            found = self.built[id(tpl)] = ([p for p in tpl[2] if not isinstance(p, str)], {})
        return found

    def make(
        self,
        sheet_idx: int,
        row: int,
        col: int,
        text: str,
        args: tuple[Any, ...],
    ) -> _Target:
        parts = _DIGITS.split(text)
        key = (sheet_idx, tuple(parts[0::2]))
        tpl = self.cache.get(key)
        if tpl is None:
            target, tpl = _make_target(sheet_idx, row, col, text, *args, learn=True)
            self.cache[key] = tpl
            return target
        if tpl is False:
            return _make_target(sheet_idx, row, col, text, *args)
        digits = parts[1::2]
        roles, base, shape_parts = tpl
        if len(digits) != len(parts) // 2:
            return _make_target(sheet_idx, row, col, text, *args)
        refs = []
        for s, ra, rb, b1, b2 in base:
            a1 = int(digits[ra]) - 1 if isinstance(ra, int) else ra[1]
            a2 = int(digits[rb]) - 1 if isinstance(rb, int) else rb[1]
            if a1 > a2:
                a1, a2 = a2, a1
            refs.append((s, a1, b1, a2, b2))
        consts, by_consts = self.consts(tpl)
        ck = tuple([digits[i] for i in consts])
        shape = by_consts.get(ck)
        if shape is None:
            shape = by_consts[ck] = "".join(
                p if isinstance(p, str) else digits[p] for p in shape_parts
            )
        single, problem, shapes = roles
        known = shapes.get(shape)
        if known is None:
            known = shapes[shape] = _shape_problem(shape)
        return _Target(
            sheet_idx, row, col, tuple(refs), shape, single and known[1], problem or known[0]
        )


def _make_target(
    sheet_idx: int,
    row: int,
    col: int,
    text: str,
    sheet_lookup: Mapping[str, int],
    extents: Sequence[tuple[int, int]],
    shapes: dict[str, tuple[CellError | None, bool]],
    *,
    learn: bool = False,
) -> Any:
    """Tokenize one formula (text without '=') into its shape and concrete references.

    With ``learn``, also return a template for :class:`_Templates` (or False).
    """
    out: list[str] = []
    refs: list[tuple[int, int, int, int, int]] = []
    single = True
    problem: CellError | None = None
    pos = 0
    # for learning a template: start of each digit run -> its index
    runs = {m.start(): n for n, m in enumerate(_DIGITS.finditer(text))} if learn else {}
    cacheable = learn
    base: list[tuple[int, Any, Any, int, int]] = []
    slots: list[Any] = ["="]

    def literal(start: int, end: int) -> None:
        segment = text[start:end]
        out.append(segment)
        if learn:
            offset = start
            for n, piece in enumerate(_DIGITS.split(segment)):
                slots.append(piece if n % 2 == 0 else runs[offset])
                offset += len(piece)

    for m in _SHAPE_TOKEN.finditer(text):
        sheet, c1, r1, c2, r2, cc1, cc2, rr1, rr2, name = m.groups()
        if c1 is None and cc1 is None and rr1 is None:
            if name is None or name.upper() in ("TRUE", "FALSE"):
                continue  # a string or error literal, or TRUE/FALSE: stays in the text
            problem = problem or CellError("#NAME?", f"unknown name {name!r}")
            if any(ch.isdigit() for ch in name):
                cacheable = False
            continue
        literal(pos, m.start())
        pos = m.end()
        s = sheet_idx
        if sheet is not None:
            if any(ch.isdigit() for ch in sheet):
                cacheable = False
            if sheet.startswith("'"):
                sheet = sheet[1:-1].replace("''", "'")
            if sheet.startswith("["):
                problem = problem or CellError("#REF!", "refers to another workbook")
                out.append("#REF!")
                slots.append("#REF!")
                continue
            found = sheet_lookup.get(sheet.upper())
            if found is None:
                problem = problem or CellError("#REF!", f"no sheet named {sheet!r}")
                out.append("#REF!")
                slots.append("#REF!")
                continue
            s = found
        if c1 is not None:
            a1, b1 = int(r1) - 1, _col(c1.upper())
            if c2 is None:
                a2, b2 = a1, b1
            else:
                single = False
                a2, b2 = int(r2) - 1, _col(c2.upper())
        elif cc1 is not None:
            single = False
            a1, a2 = 0, max(extents[s][0] - 1, 0)
            b1, b2 = _col(cc1.upper()), _col(cc2.upper())
        else:
            single = False
            a1, a2 = int(rr1) - 1, int(rr2) - 1
            b1, b2 = 0, max(extents[s][1] - 1, 0)
        if learn:
            if c1 is not None or rr1 is not None:
                g1, g2 = (3, 5) if c1 is not None else (8, 9)
                ra: Any = runs.get(m.start(g1))
                rb: Any = runs.get(m.start(g2)) if m.group(g2) is not None else ra
                if ra is None or rb is None:
                    cacheable = False
            else:
                ra, rb = ("fixed", a1), ("fixed", a2)
            base.append((s, ra, rb, b1, b2))
        if a1 > a2:
            a1, a2 = a2, a1
        if b1 > b2:
            b1, b2 = b2, b1
        out.append(f"XREF{len(refs)}")
        slots.append(f"XREF{len(refs)}")
        refs.append((s, a1, b1, a2, b2))
    literal(pos, len(text))
    shape = "=" + "".join(out)
    known = shapes.get(shape)
    if known is None:
        known = shapes[shape] = _shape_problem(shape)
    shape_problem, elementwise = known
    target = _Target(
        sheet_idx, row, col, tuple(refs), shape, single and elementwise, problem or shape_problem
    )
    if not learn:
        return target
    if not cacheable:
        return target, False
    digits = _DIGITS.split(text)[1::2]
    if "".join(p if isinstance(p, str) else digits[p] for p in slots) != shape:
        return target, False  # the template would not rebuild this shape: do not cache
    return target, ((single, problem, shapes), base, slots)


# --------------------------------------------------------------------------- evaluation


class _Conv:
    """Conversions between grid values and the ``formulas`` package's values."""

    def __init__(self) -> None:
        import numpy as np
        import schedula as sh
        from formulas.tokens import operand as op

        self.np = np
        self.empty = sh.EMPTY
        self.xlerror = op.XlError
        self.to_xl: dict[str, Any] = {
            str(e): e for e in (op.NULL, op.DIV, op.VALUE, op.REF, op.NAME, op.NUM, op.NA)
        }

    def to_formulas(self, v: object) -> object:
        if v is None:
            return self.empty
        if isinstance(v, CellError):
            err = self.to_xl.get(v.code)
            if err is None:
                err = self.to_xl[v.code] = self.xlerror(v.code)
            return err
        return v

    def from_formulas(self, v: object) -> object:
        np = self.np
        if isinstance(v, np.ndarray):
            v = v.item() if v.size == 1 else (v.flat[0] if v.size else self.empty)
        if isinstance(v, self.xlerror):
            return CellError(str(v), getattr(v, "reason", ""))
        if v is self.empty or v is None:
            return 0.0
        if isinstance(v, bool | np.bool_):
            return bool(v)
        if isinstance(v, int | float | np.integer | np.floating):
            x = float(v)
            if x != x or x in (float("inf"), float("-inf")):
                return CellError("#NUM!", "result is not a finite number")
            return x
        if isinstance(v, str):
            return v
        return CellError("#VALUE!", f"unexpected result of type {type(v).__name__}")


def _get(grid: list[list[object]], r: int, c: int) -> object:
    if r < len(grid):
        row = grid[r]
        if c < len(row):
            return row[c]
    return None


def _put(grid: list[list[object]], r: int, c: int, v: object) -> None:
    while len(grid) <= r:
        grid.append([])
    row = grid[r]
    if len(row) <= c:
        row.extend([None] * (c + 1 - len(row)))
    row[c] = v


def _order(targets: list[_Target]) -> tuple[list[list[int]], list[int]]:
    """Targets in dependency levels (Kahn), and those left over in or behind a cycle."""
    where: dict[tuple[int, int, int], int] = {}
    by_col: dict[tuple[int, int], list[int]] = defaultdict(list)
    for i, t in enumerate(targets):
        where[(t.sheet, t.row, t.col)] = i
        by_col[(t.sheet, t.col)].append(t.row)
    for rows in by_col.values():
        rows.sort()
    users: list[list[int]] = [[] for _ in targets]
    pending = [0] * len(targets)
    for i, t in enumerate(targets):
        deps: set[int] = set()
        for s, r1, c1, r2, c2 in t.refs:
            if r1 == r2 and c1 == c2:
                j = where.get((s, r1, c1))
                if j is not None:
                    deps.add(j)
                continue
            for c in range(c1, c2 + 1):
                in_col = by_col.get((s, c))
                if not in_col:
                    continue
                lo = bisect.bisect_left(in_col, r1)
                hi = bisect.bisect_right(in_col, r2)
                for r in in_col[lo:hi]:
                    deps.add(where[(s, r, c)])
        pending[i] = len(deps)
        for j in deps:
            users[j].append(i)
    level = [i for i, n in enumerate(pending) if n == 0]
    levels: list[list[int]] = []
    done = 0
    while level:
        levels.append(level)
        done += len(level)
        nxt = []
        for j in level:
            for i in users[j]:
                pending[i] -= 1
                if pending[i] == 0:
                    nxt.append(i)
        level = nxt
    stuck = [i for i, n in enumerate(pending) if n > 0] if done < len(targets) else []
    return levels, stuck


_ARITH = re.compile(
    r"(?:XREF\d+|(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?|(?i:ABS)(?=\()|[-+*/()\s])*"
)
_PLACEHOLDER = re.compile(r"XREF(\d+)")
_ABS = re.compile(r"(?i:ABS)\(")


def _arithmetic_order(shape: str) -> list[int] | None:
    """The placeholders of an arithmetic shape (see :func:`_arithmetic`), or None."""
    if not _ARITH.fullmatch(shape[1:]):
        return None
    return sorted({int(k) for k in _PLACEHOLDER.findall(shape)})


def _arithmetic(shape: str, order: list[int], raw: Sequence[Any], np: Any,
                n: int) -> Any:
    """Whole-column float evaluation of a shape made only of + - * /, ABS and parentheses.

    A fast path for the commonest formulas, taken only when every input is a number or
    blank (blank counts as 0, as in a spreadsheet); an input may also be a float array
    already (the column check's own results). Returns a float array, with inf/NaN
    where the spreadsheet would give an error (those cells are then re-done by the
    ``formulas`` package), or None when the path does not apply. With only these
    operators, spreadsheet and Python precedence agree (unary minus binds tightest in
    both; there is no ^ or %). Such a shape never needs the ``formulas`` package, whose
    function library alone takes over a second to load (tests/test_evaluate.py checks the
    two agree).
    """
    body = shape[1:]
    if not _ARITH.fullmatch(body):
        return None
    body = _ABS.sub("abs(", body)
    arrays: dict[str, Any] = {}
    for k, values in zip(order, raw, strict=True):
        if isinstance(values, np.ndarray) and values.dtype == float:  # numbers already
            arrays[f"X{k}"] = values
            continue
        for v in values:
            if v is not None and type(v) is not float:
                return None
        arrays[f"X{k}"] = np.array([0.0 if v is None else v for v in values], dtype=float)
    expr = _PLACEHOLDER.sub(r"X\1", body)
    try:
        code = compile(expr, "<formula>", "eval")
        with np.errstate(all="ignore"):
            out = eval(code, {"__builtins__": {}, "abs": np.abs}, arrays)
    except (SyntaxError, TypeError, ValueError, ZeroDivisionError):
        return None
    out = np.broadcast_to(np.asarray(out, dtype=float), (n,))
    return out


def evaluate_cells(
    sheets: Mapping[str, list[list[object]]],
    targets: Sequence[tuple[str, int, int, str]],
    *,
    names: Mapping[str, str] | None = None,
) -> dict[tuple[str, int, int], object]:
    """Evaluate formula cells of a workbook given as value grids.

    ``sheets`` maps each sheet name (in workbook order) to its row-major grid of values
    (float, str, bool, None, :class:`CellError`); ``targets`` lists (sheet, row, col,
    formula) with 0-based row/col and the formula text with or without its leading '='.
    ``names`` maps defined names to their text (``'Data'!$B$2``, ``4.184``); a name local to
    a sheet is given as ``'Sheet!name'``. Every result is also stored into its grid, so
    later formulas (and the caller) see it. Returns {(sheet, row, col): value}.
    """
    if not targets:
        return {}
    conv = _Conv()
    np = conv.np
    sheet_names = list(sheets)
    grids = [sheets[n] for n in sheet_names]
    lookup = {n.upper(): i for i, n in enumerate(sheet_names)}
    extents = [(len(g), max((len(r) for r in g), default=0)) for g in grids]
    shapes: dict[str, tuple[CellError | None, bool]] = {}
    templates = _Templates()
    args = (lookup, extents, shapes)
    made = []
    name_re = None
    if names:
        bare = sorted({n.rpartition("!")[2] for n in names}, key=len, reverse=True)
        name_re = re.compile(
            r"(?<![\w.$])(?:" + "|".join(map(re.escape, bare)) + r")(?![\w(])", re.I
        )
    for s, r, c, f in targets:
        si = lookup[s.upper()]
        text = f[1:] if f.startswith("=") else f
        if names and name_re is not None and name_re.search(text):
            text = _expand_names(text, sheet_names[si], names)
        made.append(templates.make(si, r, c, text, args))
    levels, stuck = _order(made)
    results: dict[int, object] = {}
    compiled: dict[str, Any] = {}

    def compile_shape(shape: str) -> Any:
        fn = compiled.get(shape)
        if fn is None:
            import formulas

            from sheetcycle.io.functions import register, uses_own_functions

            if uses_own_functions(shape):
                register()  # loads every function module of formulas: about a second
            try:
                fn = formulas.Parser().ast(shape)[1].compile()
                inputs = list(fn.inputs)
                extra = [i for i in inputs if not re.fullmatch(r"XREF\d+", i)]
                if extra:
                    fn = CellError("#NAME?", f"cannot evaluate {extra[0]!r}")
                else:
                    fn = (fn, [int(i[4:]) for i in inputs])
            except Exception as exc:  # the formulas parser raises many kinds
                fn = CellError("#NAME?", f"formula not understood: {exc}".splitlines()[0])
            compiled[shape] = fn
        return fn

    def store(i: int, value: object) -> None:
        t = made[i]
        results[i] = value
        _put(grids[t.sheet], t.row, t.col, value)

    def cell_input(ref: tuple[int, int, int, int, int]) -> Any:
        s, r1, c1, r2, c2 = ref
        g = grids[s]
        arr = np.empty((r2 - r1 + 1, c2 - c1 + 1), dtype=object)
        for r in range(r1, r2 + 1):
            row = g[r] if r < len(g) else []
            for c in range(c1, c2 + 1):
                arr[r - r1, c - c1] = conv.to_formulas(row[c] if c < len(row) else None)
        return arr

    def run_one(i: int, fn: Any, order: list[int]) -> None:
        t = made[i]
        try:
            out = fn(*[cell_input(t.refs[k]) for k in order])
            store(i, conv.from_formulas(out))
        except Exception as exc:
            store(i, CellError("#NAME?", f"could not evaluate: {exc}".splitlines()[0][:200]))

    for level in levels:
        groups: dict[str, list[int]] = defaultdict(list)
        for i in level:
            t = made[i]
            if t.problem is not None:
                store(i, t.problem)
            else:
                groups[t.shape].append(i)
        for shape, members in groups.items():
            single = made[members[0]].single

            def raw_inputs(order: list[int], members: list[int] = members) -> list[list[object]]:
                return [
                    [
                        _get(grids[ref[0]], ref[1], ref[2])
                        for ref in (made[i].refs[k] for i in members)
                    ]
                    for k in order
                ]

            arith = _arithmetic_order(shape) if single else None
            if arith is not None:
                fast = _arithmetic(shape, arith, raw_inputs(arith), np, len(members))
                if fast is not None:
                    redo = []
                    for n, (i, v) in enumerate(zip(members, fast.tolist(), strict=True)):
                        if v - v == 0.0:  # finite
                            store(i, v)
                        else:
                            redo.append(n)
                    if not redo:
                        continue
                    members = [members[n] for n in redo]
            fn = compile_shape(shape)
            if isinstance(fn, CellError):
                for i in members:
                    store(i, fn)
                continue
            func, order = fn
            if len(members) > 1 and single:
                raw = raw_inputs(order, members)
                cols = []
                for values in raw:
                    col = np.empty(len(values), dtype=object)
                    col[:] = [conv.to_formulas(v) for v in values]
                    cols.append(col)
                try:
                    out = func(*cols)
                    arr = np.asarray(out, dtype=object)
                    if arr.ndim == 0 or arr.size == 1:
                        vals = [conv.from_formulas(arr.ravel()[0] if arr.size else out)]
                        vals = vals * len(members)
                    elif arr.size == len(members):
                        vals = [conv.from_formulas(v) for v in arr.ravel()]
                    else:
                        raise ValueError("result shape does not match")
                    for i, v in zip(members, vals, strict=True):
                        store(i, v)
                    continue
                except Exception:
                    pass  # fall back to one call per cell
            for i in members:
                run_one(i, func, order)
    for i in stuck:
        store(i, CIRCULAR)
    return {(sheet_names[made[i].sheet], made[i].row, made[i].col): v for i, v in results.items()}


# --------------------------------------------------------------------------- comparing

REL_TOLERANCE = 1e-9
ABS_TOLERANCE = 1e-12  # below this, two numbers count as equal (rounding noise around 0)


def values_match(a: object, b: object, rel: float = REL_TOLERANCE) -> bool:
    """Whether two cell values are the same: numbers within ``rel`` (relative), text,
    logical values and error codes exactly. A blank (None) matches only a blank."""
    if isinstance(a, bool) or isinstance(b, bool):
        return type(a) is type(b) and a == b
    if isinstance(a, int | float) and isinstance(b, int | float):
        x, y = float(a), float(b)
        if x == y:
            return True
        return abs(x - y) <= max(rel * max(abs(x), abs(y)), ABS_TOLERANCE)
    if isinstance(a, CellError) and isinstance(b, CellError):
        return a.code == b.code
    return type(a) is type(b) and a == b


def show_value(v: object, other: object = None) -> str:
    """A cell value as a message shows it: numbers with as many digits as it takes to tell
    them from ``other`` (a number, or None), Unicode minus; text quoted; errors by code."""
    if v is None:
        return "(blank)"
    if isinstance(v, CellError):
        return v.code
    if isinstance(v, bool):
        return "TRUE" if v else "FALSE"
    if isinstance(v, int | float):
        x = float(v)
        text = repr(x)
        for digits in range(6, 18):
            text = f"{x:.{digits}g}"
            if not isinstance(other, int | float) or isinstance(other, bool):
                break
            if f"{float(other):.{digits}g}" != text:
                break
        if "e" not in text and "." not in text and "inf" not in text and "nan" not in text:
            text += ".0"
        return text.replace("-", "−")
    return repr(str(v))


_A1 = re.compile(r"^(?:(?:'((?:[^']|'')+)'|([^!']+))!)?\$?([A-Za-z]{1,3})\$?(\d+)$")


def verify_formulas(
    sheets: Mapping[str, list[list[object]]],
    items: Sequence[tuple[str, int, int, str, object]],
    *,
    names: Mapping[str, str] | None = None,
    rel: float = REL_TOLERANCE,
) -> list[bool | str]:
    """Check formulas against the values they should give, with the reader's evaluator.

    ``sheets`` are value grids as for :func:`evaluate_cells` (not modified: the formulas are
    evaluated on copies); ``items`` are (sheet, row, col, formula, expected) with 0-based
    row/col where the formula would sit. Returns, per item, True when the formula's value
    matches ``expected`` (:func:`values_match`), else a message saying what it gives.
    Formulas of one shape down a column are evaluated in one call on arrays.
    """
    grids = {name: [list(r) for r in grid] for name, grid in sheets.items()}
    targets = [(s, r, c, f) for s, r, c, f, _ in items]
    got = evaluate_cells(grids, targets, names=names)
    out: list[bool | str] = []
    for s, r, c, f, expected in items:
        value = got.get((s, r, c))
        if values_match(value, expected, rel):
            out.append(True)
            continue
        formula = f if f.startswith("=") else "=" + f
        why = f" ({value.reason})" if isinstance(value, CellError) and value.reason else ""
        out.append(
            f"{s}!{col_letters(c)}{r + 1}: {formula} gives {show_value(value, expected)}{why}, "
            f"expected {show_value(expected, value)}"
        )
    return out


def verify_formula(
    formula_text: str,
    cell_values: Mapping[str, object],
    expected: object,
    rel: float = REL_TOLERANCE,
    *,
    sheet: str = "Sheet1",
) -> bool | str:
    """Check one formula: True when it gives ``expected``, else a message.

    ``cell_values`` maps A1 references (``"B2"``, or ``"Data!B2"``/``"'My data'!B2"`` for
    other sheets) to values (float, str, bool, None, CellError); unqualified ones are on
    ``sheet``, where the formula is placed below every given cell.
    """
    grids: dict[str, list[list[object]]] = {sheet: []}
    for ref, value in cell_values.items():
        m = _A1.match(ref.strip())
        if m is None:
            raise ValueError(f"not an A1 cell reference: {ref!r}")
        quoted, bare, letters, digits = m.groups()
        name = quoted.replace("''", "'") if quoted else (bare or sheet)
        grid = grids.setdefault(name, [])
        _put(grid, int(digits) - 1, col_index(letters), value)
    row = len(grids[sheet])
    got = verify_formulas(grids, [(sheet, row, 0, formula_text, expected)], rel=rel)[0]
    return got if got is True else str(got).split(": ", 1)[1]  # no made-up cell address
