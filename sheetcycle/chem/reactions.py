"""Reaction equation text -> reactants and products with exact coefficients.

What is read (surrounding whitespace is ignored):

* One arrow between the two sides: ``->`` ``-->`` ``=>`` ``=`` ``→`` ``⟶`` ``⟹`` and, for
  equilibria, ``<->`` ``<=>`` ``⇌`` ``⇄`` ``↔``. ``-->`` counts only after a space, so
  that ``OH-->`` reads as ``OH-`` and ``->``.
* Species separated by ``+``. A ``+`` that is part of a charge stays with its formula:
  ``Na+(aq) + Cl-(aq)``, ``Fe3+ + 3 e-``, ``Fe+3``, ``Fe+++``. A ``+`` with spaces on both
  sides (or after a space) is always a separator; a ``+`` right after a formula and
  followed by a space, a state in parentheses, the end of the side or another ``+`` is
  always a charge; any other ``+`` (``H2+O2``, ``Cu+2Ag+``) is a separator if the pieces
  then read as species, else a charge.
* A coefficient before each formula, with or without a space: ``2Al(s)``, ``2 Al (s)``,
  integers, decimals (``0.5 O2``), fractions (``1/2 O2``, ``3/2O2``), vulgar fractions
  (``½ O2``, ``1½ O2``). No coefficient means 1. A zero coefficient is an error.
* The formula itself as :func:`sheetcycle.chem.formula.parse_formula` reads it, with its
  state at the end: ``(s)`` ``(l)`` ``(g)`` ``(aq)`` ``(graphite)`` ..., and also a state
  with a modification after a comma, ``P(s, white)`` (kept as the state text "s, white").
* The electron, for half reactions and cycles of steps: ``e-``, ``e−``, ``e⁻``, ``e``.

Coefficients are kept exactly as :class:`fractions.Fraction` (``Species.exact``), so element
and charge balances are exact: ``1/3`` is a third, not 0.333.
"""

from __future__ import annotations

import re
from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field
from fractions import Fraction
from types import MappingProxyType

from sheetcycle.chem.formula import STATE_WORDS, Formula, make_error, parse_formula
from sheetcycle.errors import FormulaSyntaxError, SheetcycleError

__all__ = [
    "ELECTRON",
    "MAX_REACTION_LENGTH",
    "Imbalance",
    "Reaction",
    "Species",
    "parse_reaction",
    "species_key",
]

MAX_REACTION_LENGTH = 1000
_MAX_AMBIGUOUS_PLUS = 10
_MAX_COEFFICIENT_DIGITS = 12

_EXAMPLE = "a reaction equation such as '2 Al(s) + Fe2O3(s) -> Al2O3(s) + 2 Fe(s)'"

# Longest spellings first so that '<=>' is not read as '<' + '=>'.
_ARROW_RE = re.compile(r"<=>|<->|<-->|(?:(?<=\s)|^)-->|==>|->|=>|⇌|⇄|↔|→|⟶|⟹|⇒|=")

_VULGAR: dict[str, Fraction] = {
    "½": Fraction(1, 2), "⅓": Fraction(1, 3), "⅔": Fraction(2, 3), "¼": Fraction(1, 4),
    "¾": Fraction(3, 4), "⅕": Fraction(1, 5), "⅖": Fraction(2, 5), "⅗": Fraction(3, 5),
    "⅘": Fraction(4, 5), "⅙": Fraction(1, 6), "⅚": Fraction(5, 6), "⅛": Fraction(1, 8),
    "⅜": Fraction(3, 8), "⅝": Fraction(5, 8), "⅞": Fraction(7, 8),
}  # fmt: skip
_VULGAR_CLASS = "".join(_VULGAR)
_COEFF_RE = re.compile(
    rf"(?P<frac>[0-9]+\s*/\s*[0-9]+)"
    rf"|(?P<mixed>[0-9]*)(?P<vulgar>[{_VULGAR_CLASS}])"
    rf"|(?P<dec>[0-9]+(?:\.[0-9]*)?|\.[0-9]+)"
)
_ELECTRON_RE = re.compile(r"e(?:\s*(?:-|−|–|⁻|\^-|\^\{-\}|\(-\)))?(?:\s*\(g\))?")
_MULTI_STATE_RE = re.compile(r"(.*?)\s*\(\s*([A-Za-z]+(?:\s*,\s*[A-Za-z]+)+)\s*\)\s*")

#: The electron as a formula: no elements, charge −1.
ELECTRON = Formula(text="e-", elements={}, charge=-1, state=None)


def species_key(formula: Formula, state: str | None) -> str:
    """A canonical text for one species: the same substance in the same state gives the same
    key however it was written (``H2O(l)``, ``H₂O (l)``; ``Na+`` and ``Na^+``).

    Element counts in Hill order (C, H, then alphabetical; without C all alphabetical), then
    the charge, then the state: ``"H2O(l)"``, ``"Na+(aq)"``, ``"O4S2-(aq)"``, ``"e-"``.
    """
    counts = dict(formula.elements)
    if "C" in counts:
        order = ["C"] + (["H"] if "H" in counts else [])
        order += sorted(s for s in counts if s not in ("C", "H"))
    else:
        order = sorted(counts)
    text = "".join(s + _count_text(counts[s]) for s in order)
    if not counts and formula.charge == -1:
        text = "e"
    z = formula.charge
    if z:
        text += ("" if abs(z) == 1 else str(abs(z))) + ("+" if z > 0 else "-")
    if state:
        text += f"({state})"
    return text


def _count_text(x: float) -> str:
    if x == 1:
        return ""
    if float(x).is_integer():
        return str(int(x))
    return repr(float(x))


@dataclass(frozen=True)
class Species:
    """One term of a reaction: coefficient, parsed formula, the text it came from, state."""

    coefficient: float
    formula: Formula
    text: str
    state: str | None
    exact: Fraction = Fraction(1)

    @property
    def key(self) -> str:
        """See :func:`species_key`."""
        return species_key(self.formula, self.state)

    @property
    def is_electron(self) -> bool:
        return not self.formula.elements and self.formula.charge == -1

    def label(self) -> str:
        """The formula with its state, without the coefficient, as the user wrote it."""
        return self.text


@dataclass(frozen=True)
class Imbalance:
    """What a reaction leaves over: products minus reactants, per element and in charge.

    Only non-zero entries are kept, so a balanced equation has ``elements == {}`` and
    ``charge == 0``.
    """

    elements: Mapping[str, Fraction] = field(hash=False)
    charge: Fraction = Fraction(0)

    def __post_init__(self) -> None:
        object.__setattr__(self, "elements", MappingProxyType(dict(self.elements)))

    @property
    def is_zero(self) -> bool:
        return not self.elements and self.charge == 0

    def describe(self) -> str:
        """Plain words, e.g. "O: 1 more on the product side; charge: 2 more on the reactant
        side"; "balanced" when there is nothing left over."""
        if self.is_zero:
            return "balanced"
        parts = [f"{el}: {_side_words(n)}" for el, n in self.elements.items()]
        if self.charge != 0:
            parts.append(f"charge: {_side_words(self.charge)}")
        return "; ".join(parts)


def _side_words(n: Fraction) -> str:
    side = "product" if n > 0 else "reactant"
    return f"{_fraction_text(abs(n))} more on the {side} side"


def _fraction_text(x: Fraction) -> str:
    return str(x.numerator) if x.denominator == 1 else f"{x.numerator}/{x.denominator}"


@dataclass(frozen=True)
class Reaction:
    """A parsed reaction equation. ``text`` is what it was parsed from ("" if built)."""

    reactants: tuple[Species, ...]
    products: tuple[Species, ...]
    text: str = ""
    reversible: bool = False

    def net(self) -> dict[str, Fraction]:
        """Net exact coefficient per species key: products positive, reactants negative.

        A species on both sides counts once with its net coefficient; keys whose net is zero
        are kept (with 0) so that callers can see every species that was written.
        """
        out: dict[str, Fraction] = {}
        for sign, side in ((-1, self.reactants), (1, self.products)):
            for sp in side:
                out[sp.key] = out.get(sp.key, Fraction(0)) + sign * sp.exact
        return out

    def species(self) -> dict[str, Species]:
        """One representative :class:`Species` per key, in order of first appearance."""
        out: dict[str, Species] = {}
        for sp in (*self.reactants, *self.products):
            out.setdefault(sp.key, sp)
        return out

    def balance(self) -> Imbalance:
        """Element and charge imbalance (products minus reactants), in exact arithmetic."""
        elements: dict[str, Fraction] = {}
        charge = Fraction(0)
        for sign, side in ((-1, self.reactants), (1, self.products)):
            for sp in side:
                nu = sign * sp.exact
                for el, n in sp.formula.elements.items():
                    elements[el] = elements.get(el, Fraction(0)) + nu * _exact(n)
                charge += nu * sp.formula.charge
        return Imbalance({k: v for k, v in elements.items() if v != 0}, charge)

    @property
    def is_balanced(self) -> bool:
        return self.balance().is_zero

    def reversed(self) -> Reaction:
        """The same equation read from right to left."""
        return Reaction(self.products, self.reactants, _reverse_text(self), self.reversible)

    def __str__(self) -> str:
        if self.text:
            return self.text
        return _format(self)


def _exact(x: float) -> Fraction:
    return Fraction(repr(float(x)))


def _format_side(side: Iterable[Species]) -> str:
    terms = []
    for sp in side:
        c = "" if sp.exact == 1 else _fraction_text(sp.exact) + " "
        terms.append(c + sp.text)
    return " + ".join(terms)


def _format(r: Reaction) -> str:
    arrow = "⇌" if r.reversible else "->"
    return f"{_format_side(r.reactants)} {arrow} {_format_side(r.products)}"


def _reverse_text(r: Reaction) -> str:
    return _format(Reaction(r.products, r.reactants, "", r.reversible))


# -- parsing ----------------------------------------------------------------------------


def parse_reaction(text: str) -> Reaction:
    """Parse one reaction equation. See the module docstring for what is accepted.

    Raises FormulaSyntaxError (and nothing else for a str) naming the part that could not
    be read; TypeError for anything that is not a str.
    """
    if not isinstance(text, str):
        raise TypeError(f"parse_reaction expects a str, got {type(text).__name__}")
    raw = str(text).strip()
    if not raw:
        raise _fail("empty reaction equation", raw)
    if len(raw) > MAX_REACTION_LENGTH:
        raise _fail(
            f"reaction equation is {len(raw)} characters long, "
            f"more than the limit of {MAX_REACTION_LENGTH}",
            raw,
            expected=f"at most {MAX_REACTION_LENGTH} characters",
        )
    arrows = list(_ARROW_RE.finditer(raw))
    if not arrows:
        raise _fail(
            "no arrow between reactants and products",
            raw,
            expected="one of '->', '=', '=>', '→', '⇌', '<->' or '<=>' between the two sides",
        )
    if len(arrows) > 1:
        found = ", ".join(f"'{m.group(0)}' at position {m.start() + 1}" for m in arrows)
        raise _fail(f"more than one arrow ({found})", raw, expected="exactly one arrow")
    m = arrows[0]
    left, right = raw[: m.start()], raw[m.end() :]
    reversible = m.group(0) in ("<=>", "<->", "<-->", "⇌", "⇄", "↔")
    reactants = _parse_side(left, "reactant", raw)
    products = _parse_side(right, "product", raw)
    return Reaction(reactants, products, raw, reversible)


def _fail(problem: str, text: str, expected: str = _EXAMPLE) -> FormulaSyntaxError:
    return make_error(FormulaSyntaxError, problem, found=text, expected=expected)


def _parse_side(side: str, name: str, whole: str) -> tuple[Species, ...]:
    s = side.strip()
    if not s:
        raise _fail(f"nothing on the {name} side", whole, expected=f"at least one {name}")
    # Classify every '+': separator (True), charge (False) or undecided (None).
    plus = [i for i, c in enumerate(s) if c == "+"]
    kinds: list[bool | None] = []
    for i in plus:
        before = s[i - 1] if i > 0 else ""
        after = s[i + 1] if i + 1 < len(s) else ""
        if i == 0:
            kinds.append(True)
        elif i == len(s) - 1:
            kinds.append(before.isspace())  # "Na+" at the end is a charge; "H2 +" dangles
        elif before.isspace() and after.isspace():
            kinds.append(True)
        elif before.isspace() and not after.isspace():
            kinds.append(True)  # "Na +Cl-": a separator (a charge never follows a space)
        elif after.isspace() or after in "+(" or before in "^{":
            kinds.append(False)
        else:
            kinds.append(None)
    if s[0] == "+":
        raise _fail(f"the {name} side starts with '+'", whole, expected="a species before '+'")
    undecided = [k for k, kind in enumerate(kinds) if kind is None]
    if len(undecided) > _MAX_AMBIGUOUS_PLUS:
        raise _fail(
            f"too many '+' signs on the {name} side that could be charges or separators",
            whole,
            expected="spaces around the '+' that separate species, e.g. 'H2 + O2'",
        )
    first_error: FormulaSyntaxError | None = None
    # Try the readings with the most separators first.
    for mask in sorted(range(1 << len(undecided)), key=lambda b: -bin(b).count("1")):
        choice = list(kinds)
        for bit, k in enumerate(undecided):
            choice[k] = bool(mask >> bit & 1)
        cuts = [plus[k] for k, is_sep in enumerate(choice) if is_sep]
        pieces = _split_at(s, cuts)
        try:
            return tuple(_parse_species(p, name, whole) for p in pieces)
        except FormulaSyntaxError as exc:
            if first_error is None:
                first_error = exc
    assert first_error is not None
    raise first_error


def _split_at(s: str, cuts: list[int]) -> list[str]:
    pieces, start = [], 0
    for c in cuts:
        pieces.append(s[start:c])
        start = c + 1
    pieces.append(s[start:])
    return pieces


def _parse_species(piece: str, name: str, whole: str) -> Species:
    t = piece.strip()
    if not t:
        raise _fail(
            f"an empty term on the {name} side (two '+' in a row, or '+' at an end)",
            whole,
            expected="a species between every two '+'",
        )
    exact, rest = _coefficient(t, name, whole)
    rest = rest.strip()
    if not rest:
        raise _fail(
            f"the {name} term '{t}' has a coefficient but no formula",
            whole,
            expected="a formula after the coefficient, e.g. '2 H2O(l)'",
        )
    if _ELECTRON_RE.fullmatch(rest):
        return Species(float(exact), ELECTRON, rest, None, exact)
    state: str | None = None
    body = rest
    m = _MULTI_STATE_RE.fullmatch(rest)
    if m:
        words = [w.strip().lower() for w in m.group(2).split(",")]
        if all(w in STATE_WORDS for w in words):
            body, state = m.group(1), ", ".join(words)
    try:
        formula = parse_formula(body)
    except SheetcycleError as exc:
        problem = getattr(exc, "problem", str(exc))
        raise _fail(
            f"cannot read the {name} '{rest}': {problem}",
            whole,
            expected=getattr(exc, "expected", None) or _EXAMPLE,
        ) from exc
    if state is None:
        state = formula.state
    return Species(float(exact), formula, rest, state, exact)


def _coefficient(t: str, name: str, whole: str) -> tuple[Fraction, str]:
    m = _COEFF_RE.match(t)
    if not m:
        return Fraction(1), t
    digits = re.sub(r"\D", "", m.group(0))
    if len(digits) > _MAX_COEFFICIENT_DIGITS:
        raise _fail(
            f"the coefficient '{m.group(0)}' of a {name} is too long",
            whole,
            expected=f"a coefficient of at most {_MAX_COEFFICIENT_DIGITS} digits",
        )
    if m.group("frac"):
        num, den = (int(x) for x in m.group("frac").replace(" ", "").split("/"))
        if den == 0:
            raise _fail(
                f"the coefficient '{m.group(0)}' of a {name} divides by zero",
                whole,
                expected="a fraction such as '1/2'",
            )
        value = Fraction(num, den)
    elif m.group("vulgar"):
        value = Fraction(int(m.group("mixed") or 0)) + _VULGAR[m.group("vulgar")]
    else:
        d = m.group("dec")
        value = Fraction(d + "0" if d.endswith(".") else d)
    if value == 0:
        raise _fail(
            f"a coefficient of zero in the {name} term '{t}'",
            whole,
            expected="a positive coefficient, or leave the species out",
        )
    return value, t[m.end() :]
