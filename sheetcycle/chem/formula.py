"""Chemical formula text -> element counts, charge, state and waters of crystallisation.

What is read (the formula is stripped of surrounding whitespace first):

* Element symbols, case-sensitive and checked against the 118 symbols: ``Co`` is cobalt,
  ``CO`` is carbon and oxygen.
* Counts after a symbol or a closing bracket: integers or decimals (``Na2O``, ``Fe0.95O``);
  Unicode subscript digits count as digits (``H₂O``). A count of zero is an error.
* Nested ``(...)`` and ``[...]`` groups with counts (``Mg3(PO4)2``, ``[Co(NH3)6]Cl3``).
* Adducts after a dot: ``·`` ``•`` ``∙`` ``⋅`` ``*`` or ``.``, each part with an optional count
  (``CuSO4·5H2O``, ``CaCl2.6H2O``, ``Na2CO3 * 10 H2O``). Water parts are the hydrate and are
  left out of ``core``; other parts (``CaCl2·8NH3``) belong to ``core``.
* A state in parentheses at the very end, any letter case, normalised to lowercase:
  ``(s) (l) (g) (aq) (cr) (am) (c)``... see ``STATE_WORDS`` (``C(graphite)`` -> "graphite").
* A charge at the end, before the state: ``Fe3+``, ``Fe+3``, ``Fe^3+``, ``Fe^{3+}``,
  ``Fe(3+)``, ``Fe³⁺``, ``Cl-``, ``Cl−``, ``SO4 2-``, ``SO4^{2-}``, ``[SO4]2-``, ``Fe+++``.

Rules for the ambiguous spellings (decided here, common practice, no source):

1. Charge digits. The digits of a charge are unambiguous after ``^``, inside ``(..)`` or
   ``{..}``, in superscript, after a space (``SO4 2-``) or after the sign (``Fe+3``). When
   digits run straight into a single final sign (``Fe3+``, ``NO3-``, ``SO42-``):

   a. after a bracket that encloses the whole formula, all the digits are the charge
      (``[SO4]2-``, ``[Fe(CN)6]4-``, ``(SO4)2-``);
   b. two or more digits: the last digit is the charge and the others are the count
      (``SO42-`` is SO4 with 2-, ``CO32-``, ``Cr2O72-``, ``Hg22+`` is Hg2 with 2+), unless
      the last digit is 0, when all the digits are the count (``C60-`` is C60 with 1-);
   c. one digit after a lone element symbol: the digit is the charge (``Fe3+``, ``O2-``,
      ``N3-``, ``S2-``, ``Hg2+`` is mercury(II));
   d. one digit after anything longer: the digit is the count and the charge is 1
      (``NH4+``, ``NO3-``, ``MnO4-``, ``H3O+``, ``Fe(OH)2+``).

   To write the other reading, separate the charge: ``O2^-`` or ``[O2]-`` (superoxide),
   ``Cl2 -``. Repeated signs give the magnitude and leave the digits as counts
   (``Fe+++`` is Fe with 3+, ``O2--`` is O2 with 2-).
2. A ``.`` between two digits is a decimal point unless what follows it is a water part
   (optional count, ``H2O``, then the end or another dot), so ``CaCl2.6H2O`` is a hydrate
   and ``Li0.5CoO2`` is a decimal count. A ``.`` after a letter or bracket that runs straight
   into a digit is a hydrate dot before a water part (``LiCl.2H2O``) and refused as
   ambiguous otherwise (``Fe.95O``); write ``Fe0.95O`` or use ``·``.
   Adducts other than water after ``.`` and a count must use ``·`` (``CaCl2·2NH3``):
   ``CaCl2.2NH3`` reads as a decimal count of Cl.
3. A trailing parenthesised word that is a state word is the state, whatever its case:
   ``NaCl(S)`` is solid NaCl, not NaClS.

Spaces are allowed around dots, between an adduct's count and its formula, and before a
charge or a state; anywhere else inside the formula they are an error.
"""

from __future__ import annotations

import math
import re
from collections.abc import Mapping
from dataclasses import dataclass, field
from decimal import Decimal
from functools import lru_cache
from types import MappingProxyType
from typing import Any, TypeVar

from sheetcycle.chem.elements import SYMBOLS
from sheetcycle.errors import FormulaSyntaxError, SheetcycleError

__all__ = ["MAX_FORMULA_LENGTH", "STATE_WORDS", "Formula", "make_error", "parse_formula"]

MAX_FORMULA_LENGTH = 200

STATE_WORDS: frozenset[str] = frozenset(
    {
        "s", "l", "g", "aq", "cr", "am", "c", "gl", "vit", "liq", "sln", "ao", "ai",
        "graphite", "diamond", "white", "red", "black", "grey", "gray", "yellow",
        "rhombic", "monoclinic", "alpha", "beta", "gamma",
    }
)  # fmt: skip

_SYMBOL_SET = frozenset(SYMBOLS)
_DIGITS = "0123456789"
_UPPER = "ABCDEFGHIJKLMNOPQRSTUVWXYZ"
_LOWER = "abcdefghijklmnopqrstuvwxyz"
_DOTS = "·•∙⋅*"  # always adduct separators; "." only under rule 2
_OPEN = {"(": ")", "[": "]"}
_CLOSE = {")": "(", "]": "["}

# Subscript digits become digits and the minus look-alikes become "-", one character for one
# character, so positions in the working text are positions in the user's text.
_NORMALISE = str.maketrans("₀₁₂₃₄₅₆₇₈₉−–", "0123456789--")
_SUPERSCRIPTS = {
    "⁰": "0", "¹": "1", "²": "2", "³": "3", "⁴": "4",
    "⁵": "5", "⁶": "6", "⁷": "7", "⁸": "8", "⁹": "9", "⁺": "+", "⁻": "-",
}  # fmt: skip

_STATE_RE = re.compile(r"(.*?)\s*\(\s*([A-Za-z]+)\s*\)", re.S)
_EXPLICIT_CHARGE_RE = re.compile(r"([0-9]*)([+-])|([+-])([0-9]+)|(\+{2,}|-{2,})")
_PAREN_CHARGE_RE = re.compile(r"\(\s*([0-9]*[+-]|[+-][0-9]+)\s*\)$")
_SIGN_DIGITS_RE = re.compile(r"([+-])([0-9]+)$")
_SIGNS_RE = re.compile(r"[+-]+$")
_SPACED_DIGITS_RE = re.compile(r"(.*?)\s+([0-9]+)", re.S)
_TRAILING_DIGITS_RE = re.compile(r"[0-9]+$")
_LONE_SYMBOL_RE = re.compile(r"[A-Z][a-z]?")
_COUNT_RE = re.compile(r"[0-9]+(?:\.[0-9]+)?")
_WATER_TAIL_RE = re.compile(r"\s*([0-9]+(?:\.[0-9]+)?)?\s*H2O\s*(?:$|[·•∙⋅*.])")
_HILL_WATER_TAIL_RE = re.compile(r"\.[0-9]*H2O$")
_WATER = {"H": 2.0, "O": 1.0}

_E = TypeVar("_E", bound=SheetcycleError)

_EXAMPLE = "a chemical formula such as 'NaCl', 'Ca(OH)2', 'CuSO4·5H2O' or 'SO4 2-'"


def make_error(cls: type[_E], problem: str, **fields: Any) -> _E:
    """``cls(problem, **fields)`` with every structured field set.

    Works around the builtin base of the error classes (ValueError ...) coming first in
    their MRO, whose ``__init__`` refuses keywords and skips SheetcycleError's.
    """
    try:
        err = cls(problem, **fields)
    except TypeError:
        err = cls.__new__(cls, problem)
    if not hasattr(err, "problem"):
        SheetcycleError.__init__(err, problem, **fields)
    return err


def _frozen(mapping: Mapping[str, float]) -> Mapping[str, float]:
    if isinstance(mapping, MappingProxyType):
        return mapping
    return MappingProxyType(dict(mapping))


@dataclass(frozen=True)
class Formula:
    """One parsed formula. Counts are per formula unit; mappings are read-only."""

    text: str
    elements: Mapping[str, float] = field(hash=False)
    charge: int = 0
    state: str | None = None
    hydrate: float = 0.0
    core: Mapping[str, float] = field(default_factory=dict, hash=False)

    def __post_init__(self) -> None:
        object.__setattr__(self, "elements", _frozen(self.elements))
        object.__setattr__(self, "core", _frozen(self.core))

    def atom_count(self) -> float:
        """Atoms in one formula unit, waters of crystallisation included."""
        return float(sum(self.elements.values()))

    def hill(self) -> str:
        """``core`` in Hill order: C, then H, then the rest alphabetically; without carbon
        everything alphabetically. A count of 1 is left out.

        In the one case where the text would read back as a hydrate (a decimal count just
        before a final ``H2O``, as in ``Ba2.5H2O``) the final oxygen gets an explicit 1
        (``Ba2.5H2O1``) so that parsing the Hill text gives the same counts back.
        """
        symbols = list(self.core)
        if "C" in self.core:
            rest = sorted(s for s in symbols if s not in ("C", "H"))
            order = ["C"] + (["H"] if "H" in self.core else []) + rest
        else:
            order = sorted(symbols)
        text = "".join(s + _format_count(self.core[s]) for s in order)
        if _HILL_WATER_TAIL_RE.search(text):
            text += "1"
        return text


def _format_count(x: float) -> str:
    if x == 1:
        return ""
    if float(x).is_integer():
        return str(int(x))
    return format(Decimal(repr(float(x))), "f")


@lru_cache(maxsize=65536)
def parse_formula(text: str) -> Formula:
    """Parse one chemical formula. See the module docstring for what is accepted.

    Raises FormulaSyntaxError for any text that is not a formula (and nothing else for a
    str); TypeError for anything that is not a str. Results are cached (rows repeat
    formulas); ``parse_formula.cache_clear()`` empties the cache.
    """
    if not isinstance(text, str):
        raise TypeError(f"parse_formula expects a str, got {type(text).__name__}")
    return _Parser(str(text)).parse()


class _Parser:
    """One parse. Positions in messages are 1-based character positions in the stripped
    text."""

    def __init__(self, raw: str) -> None:
        self.text = raw.strip()
        self.work = self.text.translate(_NORMALISE)

    # -- errors ---------------------------------------------------------------------------

    def fail(self, problem: str, expected: str = _EXAMPLE) -> FormulaSyntaxError:
        return make_error(FormulaSyntaxError, problem, found=self.text, expected=expected)

    # -- top level ------------------------------------------------------------------------

    def parse(self) -> Formula:
        if not self.text:
            raise self.fail("empty formula")
        if len(self.text) > MAX_FORMULA_LENGTH:
            raise self.fail(
                f"formula is {len(self.text)} characters long, "
                f"more than the limit of {MAX_FORMULA_LENGTH}",
                expected=f"at most {MAX_FORMULA_LENGTH} characters",
            )
        work, state = self.split_state(self.work)
        body, charge = self.split_charge(work)
        body = body.rstrip()
        if not body:
            raise self.fail("no formula before the charge or state")
        elements: dict[str, float] = {}
        core: dict[str, float] = {}
        hydrate = 0.0
        for k, (start, end) in enumerate(self.split_parts(body)):
            counts, multiplier = self.parse_part(start, end, main=(k == 0))
            scaled = {sym: n * multiplier for sym, n in counts.items()}
            if k > 0 and counts == _WATER:
                hydrate += multiplier
            else:
                _merge(core, scaled, 1.0)
            _merge(elements, scaled, 1.0)
        for n in (*elements.values(), hydrate):
            if not math.isfinite(n):
                raise self.fail("a count is too large to be a number", expected="smaller counts")
        return Formula(
            text=self.text,
            elements=elements,
            charge=charge,
            state=state,
            hydrate=hydrate,
            core=core,
        )

    def split_state(self, work: str) -> tuple[str, str | None]:
        m = _STATE_RE.fullmatch(work)
        if m and m.group(2).lower() in STATE_WORDS:
            if not m.group(1).strip():
                raise self.fail(f"no formula before the state '({m.group(2)})'")
            return m.group(1), m.group(2).lower()
        return work, None

    # -- charge ---------------------------------------------------------------------------

    def split_charge(self, work: str) -> tuple[str, int]:
        t = work.rstrip()
        # Superscripts at the end: "Fe³⁺", "O²⁻", "Cl⁻".
        i = len(t)
        while i > 0 and t[i - 1] in _SUPERSCRIPTS:
            i -= 1
        if i < len(t):
            sup = "".join(_SUPERSCRIPTS[c] for c in t[i:])
            return t[:i], self.explicit_charge(sup, i)
        # Caret: "Fe^3+", "SO4^{2-}".
        k = t.rfind("^")
        if k >= 0:
            tail = t[k + 1 :].strip()
            if tail.startswith("{") and tail.endswith("}"):
                tail = tail[1:-1].strip()
            return t[:k], self.explicit_charge(tail, k)
        # Parenthesised: "Fe(3+)".
        m = _PAREN_CHARGE_RE.search(t)
        if m:
            return t[: m.start()], self.explicit_charge(m.group(1), m.start())
        # Sign then digits: "Fe+3", "SO4-2".
        m = _SIGN_DIGITS_RE.search(t)
        if m:
            return t[: m.start()], self.explicit_charge(m.group(0), m.start())
        m = _SIGNS_RE.search(t)
        if not m:
            return t, 0
        signs = m.group(0)
        body = t[: m.start()]
        sign = 1 if signs[0] == "+" else -1
        if len(set(signs)) > 1:
            raise self.fail(
                f"mixed charge signs '{signs}' at position {m.start() + 1}",
                expected="a charge such as '3+', '2-', '+' or '-'",
            )
        if len(signs) > 1:
            return body, sign * len(signs)
        return self.single_sign(body, sign)

    def single_sign(self, body: str, sign: int) -> tuple[str, int]:
        """Digits running into one final sign: the rules in the module docstring."""
        m = _SPACED_DIGITS_RE.fullmatch(body)
        if m:  # "SO4 2-"
            return m.group(1), sign * self.magnitude(m.group(2), m.start(2))
        if body != body.rstrip():  # "SO4 -"
            return body, sign
        m = _TRAILING_DIGITS_RE.search(body)
        if not m:  # "Cl-", "OH-"
            return body, sign
        run, start = m.group(0), m.start()
        before = body[:start]
        if run.strip("0") == "" or (before and before[-1] == "."):
            return body, sign  # a zero or decimal count: let the body say what is wrong
        if before and before[-1] in _CLOSE and _encloses_all(before):  # "[SO4]2-"
            return before, sign * int(run)
        if len(run) >= 2 and run[-1] != "0":  # "SO42-"
            return body[:-1], sign * int(run[-1])
        if len(run) == 1 and _LONE_SYMBOL_RE.fullmatch(before):  # "Fe3+"
            return before, sign * int(run)
        return body, sign  # "NH4+"

    def explicit_charge(self, tail: str, pos: int) -> int:
        m = _EXPLICIT_CHARGE_RE.fullmatch(tail)
        if not m:
            raise self.fail(
                f"cannot read the charge '{tail}' at position {pos + 1}",
                expected="a charge such as '3+', '+3', '2-' or '-'",
            )
        if m.group(5):
            signs = m.group(5)
            return (1 if signs[0] == "+" else -1) * len(signs)
        if m.group(2):
            digits, sign = m.group(1), m.group(2)
        else:
            sign, digits = m.group(3), m.group(4)
        magnitude = self.magnitude(digits, pos) if digits else 1
        return magnitude if sign == "+" else -magnitude

    def magnitude(self, digits: str, pos: int) -> int:
        value = int(digits)
        if value == 0:
            raise self.fail(
                f"a charge of zero at position {pos + 1}",
                expected="a non-zero charge, or no charge for a neutral formula",
            )
        return value

    # -- adduct parts ---------------------------------------------------------------------

    def split_parts(self, body: str) -> list[tuple[int, int]]:
        """(start, end) of the main formula and each adduct, split at top-level dots."""
        parts: list[tuple[int, int]] = []
        start = 0
        depth = 0
        for i, c in enumerate(body):
            if c in _OPEN:
                depth += 1
            elif c in _CLOSE:
                depth = max(depth - 1, 0)
            elif depth == 0 and (c in _DOTS or (c == "." and self.dot_splits(body, i))):
                parts.append((start, i))
                start = i + 1
        parts.append((start, len(body)))
        for k, (a, b) in enumerate(parts):
            if not body[a:b].strip():
                where = "before the first" if k == 0 else "after a"
                raise self.fail(f"nothing {where} dot at position {(a if k else b) + 1}")
        return parts

    def dot_splits(self, body: str, i: int) -> bool:
        prev = body[i - 1] if i > 0 else ""
        nxt = body[i + 1] if i + 1 < len(body) else ""
        if prev in _DIGITS and nxt in _DIGITS:
            m = _WATER_TAIL_RE.match(body, i + 1)
            if m is None:
                return False  # decimal point: "Fe0.95O", "Li0.5CoO2"
            count = m.group(1) or ""
            if "." in count and self.dot_splits(body, m.start(1) + count.index(".")):
                return False  # "Fe1.5.3H2O": the later dot is the hydrate dot
            j = i
            while j > 0 and body[j - 1] in _DIGITS:
                j -= 1
            return body[j:i].strip("0") != ""  # "Fe0.5H2O" stays a decimal
        if (
            nxt in _DIGITS
            and prev not in _DIGITS
            and not prev.isspace()
            and _WATER_TAIL_RE.match(body, i + 1) is None
        ):
            raise self.fail(
                f"ambiguous '.' at position {i + 1}: neither a decimal point "
                "(no digit before it) nor clearly a hydrate dot",
                expected="a decimal count with a leading digit ('Fe0.95O') "
                "or '·' before an adduct ('CuSO4·5H2O')",
            )
        return True

    def parse_part(self, start: int, end: int, *, main: bool) -> tuple[dict[str, float], float]:
        """Counts of one part and its leading multiplier (1 for the main formula)."""
        s = self.work
        i = start
        while i < end and s[i].isspace():
            i += 1
        j = end
        while j > i and s[j - 1].isspace():
            j -= 1
        multiplier = 1.0
        if s[i] in _DIGITS:
            if main:
                raise self.fail(
                    f"a number at position {i + 1} before the formula",
                    expected="a formula that starts with an element symbol or a bracket, "
                    "for one formula unit (write 'NaCl', not '2NaCl')",
                )
            m = _COUNT_RE.match(s, i, j)
            assert m is not None
            multiplier = self.count_value(m.group(0), i)
            i = m.end()
            while i < j and s[i].isspace():
                i += 1
            if i == j:
                raise self.fail(f"a count with no formula after it at position {m.start() + 1}")
        return self.parse_groups(i, j), multiplier

    # -- element groups -------------------------------------------------------------------

    def parse_groups(self, start: int, end: int) -> dict[str, float]:
        s = self.work
        stack: list[tuple[dict[str, float], str, int]] = [({}, "", start)]
        i = start
        while i < end:
            c = s[i]
            if c in _UPPER:
                j = i + 1
                if j < end and s[j] in _LOWER:
                    j += 1
                symbol = s[i:j]
                if symbol not in _SYMBOL_SET:
                    raise self.fail(
                        f"unknown element symbol '{symbol}' at position {i + 1}",
                        expected=self.symbol_hint("one of the 118 element symbols"),
                    )
                n, i = self.read_count(j, end)
                _merge(stack[-1][0], {symbol: 1.0}, n)
            elif c in _OPEN:
                stack.append(({}, c, i))
                i += 1
            elif c in _CLOSE:
                if len(stack) == 1:
                    raise self.fail(
                        f"'{c}' at position {i + 1} has no matching '{_CLOSE[c]}'",
                        expected="balanced brackets",
                    )
                inner, opener, at = stack.pop()
                if opener != _CLOSE[c]:
                    raise self.fail(
                        f"'{c}' at position {i + 1} closes '{opener}' at position {at + 1}",
                        expected=f"'{_OPEN[opener]}' to close '{opener}'",
                    )
                if not inner:
                    raise self.fail(
                        f"empty brackets '{opener}{c}' at position {at + 1}",
                        expected="elements inside the brackets",
                    )
                n, i = self.read_count(i + 1, end)
                _merge(stack[-1][0], inner, n)
            elif c in _LOWER:
                raise self.fail(
                    f"lowercase '{c}' at position {i + 1} where an element symbol should start",
                    expected=self.symbol_hint("an element symbol with a capital first letter"),
                )
            elif c in _DIGITS:
                raise self.fail(
                    f"a number at position {i + 1} that follows no element or bracket",
                    expected="counts written after an element symbol or a closing bracket",
                )
            elif c.isspace():
                raise self.fail(
                    f"a space at position {i + 1} inside the formula",
                    expected="no spaces except around a hydrate dot or before a charge or state",
                )
            else:
                raise self.fail(
                    f"unexpected character '{c}' at position {i + 1}",
                    expected="element symbols, counts, brackets, a hydrate dot, a charge "
                    "or a state",
                )
        if len(stack) > 1:
            _, opener, at = stack[-1]
            raise self.fail(
                f"'{opener}' at position {at + 1} is never closed",
                expected="balanced brackets",
            )
        return stack[0][0]

    def read_count(self, i: int, end: int) -> tuple[float, int]:
        m = _COUNT_RE.match(self.work, i, end)
        if not m:
            return 1.0, i
        return self.count_value(m.group(0), i), m.end()

    def count_value(self, digits: str, pos: int) -> float:
        value = float(digits)
        if value == 0:
            raise self.fail(
                f"a count of zero at position {pos + 1}",
                expected="a positive count, or no count for one atom",
            )
        return value

    def symbol_hint(self, what: str) -> str:
        base = f"{what} (case matters: 'Co' is cobalt, 'CO' is carbon and oxygen)"
        guesses = _case_suggestions(self.text)
        if guesses:
            return base + "; did you mean " + " or ".join(f"'{g}'" for g in guesses) + "?"
        return base


def _merge(into: dict[str, float], counts: Mapping[str, float], n: float) -> None:
    for symbol, k in counts.items():
        into[symbol] = into.get(symbol, 0.0) + k * n


def _encloses_all(text: str) -> bool:
    """True when the closing bracket at the end of ``text`` matches one at its start."""
    depth = 0
    for i in range(len(text) - 1, -1, -1):
        c = text[i]
        if c in _CLOSE:
            depth += 1
        elif c in _OPEN:
            depth -= 1
            if depth == 0:
                return i == 0
    return False


_SYMBOLS_LOWER = {s.lower(): s for s in SYMBOLS}
_MAX_GUESSES = 3


def _case_suggestions(text: str) -> list[str]:
    """Spellings of ``text`` with the letters re-cased into element symbols ('nacl' ->
    'NaCl'); at most three, none if there are more or none."""
    pieces = re.split(r"([A-Za-z]+)", text)
    options: list[str] = [""]
    for k, piece in enumerate(pieces):
        if k % 2 == 0:
            options = [o + piece for o in options]
            continue
        if piece.lower() in STATE_WORDS and k >= 1 and pieces[k - 1].endswith("("):
            options = [o + piece for o in options]
            continue
        spellings = _segmentations(piece.lower())
        if not spellings:
            return []
        options = [o + s for o in options for s in spellings]
        if len(options) > _MAX_GUESSES:
            return []
    return [o for o in options if o != text]


def _segmentations(letters: str) -> list[str]:
    can: list[bool] = [False] * (len(letters) + 1)
    can[len(letters)] = True
    for i in range(len(letters) - 1, -1, -1):
        can[i] = any(
            letters[i : i + w] in _SYMBOLS_LOWER and can[i + w]
            for w in (1, 2)
            if i + w <= len(letters)
        )
    found: list[str] = []

    def walk(i: int, acc: str) -> None:
        if len(found) > _MAX_GUESSES:
            return
        if i == len(letters):
            found.append(acc)
            return
        for w in (2, 1):
            if i + w <= len(letters) and letters[i : i + w] in _SYMBOLS_LOWER and can[i + w]:
                walk(i + w, acc + _SYMBOLS_LOWER[letters[i : i + w]])

    if can[0]:
        walk(0, "")
    return found
