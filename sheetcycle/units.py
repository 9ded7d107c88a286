"""Units at the border: one pint registry, unit-text cleaning, conversion to the internal basis.

Every number read from a workbook goes through :func:`conversion` (once per column, cached)
and :func:`to_internal` (once per column, vectorized). The internal basis is the one
:mod:`sheetcycle.model` documents:

==============  ==========================================  =====================
kind            internal unit                               ``INTERNAL_UNIT`` text
==============  ==========================================  =====================
energy          kJ per mol of formula unit                  ``kJ/mol``
length          pm                                          ``pm``
density         g/cm3                                       ``g/cm3``
volume          nm3 per formula unit                        ``nm3``
temperature     K                                           ``K``
heat_capacity   J/(mol K), per mol of formula unit          ``J/(mol K)``
dimensionless   pure number                                 ``""``
==============  ==========================================  =====================

Conventions decided here:

* ``internal = (value + offset) * factor``: the offset is in the *user's* unit and is added
  before scaling. Only temperatures have one (°C: offset 273.15, factor 1; °F: offset
  459.67, factor 5/9).
* Energies given per particle (eV, meV, hartree, Ry, cm⁻¹, Hz, or any energy "per particle",
  "per molecule", "per f.u.") are taken per formula unit and multiplied by N_A. One
  particle is one formula unit, unless the unit says "per atom": then
  ``Conversion.per_entity == "atom"`` and the caller must also multiply by the number of
  atoms in the formula unit (:func:`to_internal` does it when given that number).
* ``per_entity`` is ``"atom"`` for per-atom units, ``"formula_unit"`` for units counted per
  particle (explicitly or, for eV/hartree/cm⁻¹, implicitly) and ``None`` for molar or
  entity-free units (kJ/mol, pm, K …).
* A bare macroscopic energy (kJ, kcal, J) in an energy column is refused: the per-mole basis
  cannot be guessed.
* ``kcal`` and ``cal`` are the thermochemical calorie (4.184 J), which is pint's ``cal``.
* A bare ``A`` (and ``A3``, ``A^3``) means ångström only for the ``length`` and ``volume``
  kinds; elsewhere it stays pint's ampere and is refused by the dimension check.
"""

from __future__ import annotations

import re
import unicodedata
from dataclasses import dataclass
from functools import lru_cache
from typing import TYPE_CHECKING

import numpy as np
import numpy.typing as npt

from sheetcycle.errors import UnitError, UsageError

if TYPE_CHECKING:
    import pint

__all__ = [
    "INTERNAL_UNIT",
    "KINDS",
    "Conversion",
    "conversion",
    "describe_dimension",
    "from_internal",
    "looks_like_unit",
    "normalise_unit_text",
    "parse_unit",
    "registry",
    "tidy_unit_text",
    "to_internal",
]


# Kind -> (internal unit in pint syntax, what a user should have written).
_KIND_TABLE: dict[str, tuple[str, str]] = {
    "energy": ("kJ/mol", "an energy per mole such as kJ/mol, kcal/mol or eV"),
    "length": ("pm", "a length such as pm, Å or nm"),
    "density": ("g/cm**3", "a density such as g/cm3 or kg/m3"),
    "volume": (
        "nm**3",
        "a volume per formula unit such as nm3 or Å3, or a molar volume such as cm3/mol",
    ),
    "temperature": ("K", "a temperature such as K or °C"),
    "heat_capacity": ("J/(mol*K)", "a molar heat capacity such as J/(mol K) or J K-1 mol-1"),
    "dimensionless": ("dimensionless", "a pure number (no unit)"),
}
KINDS: tuple[str, ...] = tuple(_KIND_TABLE)

INTERNAL_UNIT: dict[str, str] = {
    "energy": "kJ/mol",
    "length": "pm",
    "density": "g/cm3",
    "volume": "nm3",
    "temperature": "K",
    "heat_capacity": "J/(mol K)",
    "dimensionless": "",
}

# Energy units that are per particle by nature: a bare 'eV' is eV per particle.
_MICROSCOPIC_ENERGY = frozenset({"electron_volt", "hartree", "rydberg"})

_DEFINITIONS = (
    # Per-entity counts. pint already has 'particle = 1 / N_A' (alias molecule).
    "atom = particle",
    "formula_unit = particle",
    "@alias hartree = Ha",
)


@lru_cache(maxsize=1)
def registry() -> pint.UnitRegistry:
    """The process-wide unit registry, built on first use.

    pint keeps its parsed definition files in the user's cache folder (``:auto:``), which
    cuts the build from about 0.2 s to 0.02 s after the first run; where that folder
    cannot be used, the registry is built without it (the same units either way)."""
    import pint

    try:
        ureg = pint.UnitRegistry(cache_folder=":auto:")
    except Exception:  # an unwritable or damaged cache: pint raises many kinds
        ureg = pint.UnitRegistry()
    for line in _DEFINITIONS:
        ureg.define(line)
    return ureg


# --------------------------------------------------------------------------- text cleaning

_MINUS = dict.fromkeys(map(ord, "\u2212\u2013\u2012\u2010\u2011\ufe63\uff0d"), "-")
_SUPERSCRIPT = str.maketrans("⁰¹²³⁴⁵⁶⁷⁸⁹⁻⁺", "0123456789-+")
_SUP_RUN = re.compile(r"[⁻⁺]?[⁰¹²³⁴⁵⁶⁷⁸⁹]+")
_MULT = re.compile(r"[·⋅×∙•]|(?<!\*)\*(?!\*)")
_SPACE = re.compile(r"\s+")

# Whole-word replacements applied to the unit text (regex, replacement).
_WORDS: tuple[tuple[re.Pattern[str], str], ...] = tuple(
    (re.compile(p), r)
    for p, r in (
        (r"(?<![A-Za-z_])per(?![A-Za-z_])", "/"),
        (r"(?<![A-Za-z_])p\.?f\.?u\.?(?![A-Za-z_])", "/formula_unit"),
        (r"(?<![A-Za-z_])(?:f\.u\.?|fu|FU|formula[ -]units?)(?![A-Za-z_])", "formula_unit"),
        (r"(?<![A-Za-z_])moles?(?![A-Za-z_])", "mol"),
        (r"(?<![A-Za-z_])atoms(?![A-Za-z_])", "atom"),
        (r"(?<![A-Za-z_])(?:KJ|Kj)(?![A-Za-z_])", "kJ"),
        (r"(?<![A-Za-z_])(?:Kcal|KCal|kCal)(?![A-Za-z_])", "kcal"),
        (r"(?:°|º|˚|deg\.? ?)\s?C(?![A-Za-z_])", "degC"),
        (r"(?:°|º|˚|deg\.? ?)\s?F(?![A-Za-z_])", "degF"),
        (r"°\s?K(?![A-Za-z_])", "K"),
        (r"(?<![A-Za-z_])(?:[Aa]ngstr[oö]ms?|[Åå]ngstr[oö]ms?|Ang)(?![A-Za-z_])", "angstrom"),
        (r"Å", "angstrom"),
        (r"(?<![A-Za-z_])(?:Hartree|hartrees)(?![A-Za-z_])", "hartree"),
    )
)
_BARE_A = re.compile(r"(?<![A-Za-z_])A(?![A-Za-z_])")
# An exponent written after a unit name: 'mol-1', 'cm3', 'm^3', 'K -1', 'mol^(-1)'.
_EXPONENT = re.compile(
    r"(?<=[A-Za-z_)])(?:\s*\^\s*|\*\*)?(\(?[+-]?\d+\)?)(?![\d.])|(?<=[A-Za-z_)])\s+(-\d+)(?![\d.])"
)
_OPS = re.compile(r"\s*([/()])\s*")
_NUMBER_OK = re.compile(r"\*\*\(?[+-]?\d+\)?")


def _strip_outer_brackets(text: str) -> str:
    while len(text) >= 2 and (text[0], text[-1]) in {("(", ")"), ("[", "]"), ("{", "}")}:
        depth = 0
        for i, ch in enumerate(text):
            depth += ch in "([{"
            depth -= ch in ")]}"
            if depth == 0 and i < len(text) - 1:
                return text  # the first bracket closes before the end: '(a)/(b)'
        text = text[1:-1].strip()
    return text


def tidy_unit_text(text: str) -> str:
    """The unit as written, for messages and for writing back: NFC, trimmed, no outer brackets."""
    text = unicodedata.normalize("NFC", text)
    return _strip_outer_brackets(_SPACE.sub(" ", text).strip())


def normalise_unit_text(text: str, kind: str | None = None) -> str:
    """Rewrite a unit as typed in a header into pint syntax.

    'kJ mol⁻¹' -> 'kJ*mol**-1', 'g cm-3' -> 'g*cm**-3', 'J/(mol K)' -> 'J/(mol*K)'.
    Unicode minus signs and superscripts become exponents, so 'kJ mol−1' can never be read
    as kJ·mol. ``kind`` ("length"/"volume") lets a bare 'A' mean ångström. The result is
    not checked here: :func:`parse_unit` does that.
    """
    text = tidy_unit_text(text)
    text = _SUP_RUN.sub(lambda m: "^" + m.group(0).translate(_SUPERSCRIPT), text)
    text = text.translate(_MINUS).translate(_SUPERSCRIPT)
    text = text.replace("{", "(").replace("}", ")")
    text = _MULT.sub(" ", text)
    for pattern, replacement in _WORDS:
        text = pattern.sub(replacement, text)
    if kind in ("length", "volume"):
        text = _BARE_A.sub("angstrom", text)
    text = _EXPONENT.sub(lambda m: "**" + (m.group(1) or m.group(2)).replace("+", ""), text)
    text = text.replace("^", "**")
    text = _OPS.sub(r"\1", text.strip())
    text = _SPACE.sub("*", text)
    text = re.sub(r"(?<=[\w)])\(", "*(", text)
    text = re.sub(r"\)(?=[A-Za-z_(])", ")*", text)
    return text.strip("*")


# --------------------------------------------------------------------------- parsing


def _checked(text: str, norm: str) -> None:
    """Refuse what pint would misread or evaluate: stray signs, bare numbers, huge input."""
    if len(norm) > 80:
        raise UnitError(
            "unit text too long to be a unit", found=text, expected="a unit such as kJ/mol"
        )
    rest = _NUMBER_OK.sub("", norm)
    if re.search(r"\d", rest):
        raise UnitError(
            "a number inside the unit (scaled units are not read)",
            found=text,
            expected="a unit without a multiplier, such as kJ/mol",
        )
    if re.search(r"[+\-]", rest):
        raise UnitError(
            "a sign outside an exponent in the unit",
            found=text,
            expected="exponents written like mol-1, mol^-1 or mol⁻¹",
        )
    for m in re.finditer(r"\*\*\(?[+-]?(\d+)", norm):
        if int(m.group(1)) > 9:
            raise UnitError(
                "unit exponent too large", found=text, expected="an exponent from -9 to 9"
            )


@lru_cache(maxsize=4096)
def _parse(text: str, kind: str | None) -> pint.Unit:
    norm = normalise_unit_text(text, kind)
    if not norm:
        return registry().dimensionless
    _checked(text, norm)
    try:
        unit = registry().parse_units(norm)
        unit.dimensionality  # noqa: B018 - some parsed units (A1dB -> delta_decibel) fail here
        return unit
    except Exception as exc:  # pint raises many types (UndefinedUnitError, TypeError, ...)
        raise UnitError(
            f"unit '{text}' is not a unit sheetcycle can read ({exc})",
            found=text,
            expected="a unit such as kJ/mol, kJ mol-1, kcal/mol, eV, cm-1, pm, Å, g/cm3 or K",
        ) from exc


def parse_unit(text: str, kind: str | None = None) -> pint.Unit:
    """Parse unit text as typed in a header; raise :class:`UnitError` when it is not a unit."""
    if not isinstance(text, str):
        raise UnitError("unit must be text", found=text, expected="a unit such as kJ/mol")
    return _parse(text, kind)


def looks_like_unit(text: str, kind: str | None = None) -> bool:
    """True when ``text`` parses as a unit (never raises)."""
    try:
        parse_unit(text, kind)
    except Exception:  # UnitError, and anything odd from pint on arbitrary text
        return False
    return True


# --------------------------------------------------------------------------- dimensions

_DIMENSION_WORDS: tuple[tuple[str, str], ...] = (
    ("[energy]/[substance]", "an energy per amount"),
    ("[energy]", "an energy without 'per mole'"),
    (
        "[energy]*[substance]",
        "an energy times an amount ('/' and '-1' together cancel: write kJ/mol or kJ mol-1)",
    ),
    ("[energy]/[temperature]/[substance]", "a molar entropy/heat capacity"),
    ("[energy]/[temperature]", "an entropy/heat capacity"),
    ("[energy]/[mass]/[temperature]", "a specific heat capacity (per mass)"),
    ("[energy]/[mass]", "a specific energy (per mass)"),
    ("1/[length]", "a wavenumber"),
    ("1/[time]", "a frequency"),
    ("[length]", "a length"),
    ("[length]**3", "a volume"),
    ("[length]**3/[substance]", "a molar volume"),
    ("[mass]/[length]**3", "a density"),
    ("[mass]/[substance]", "a molar mass"),
    ("[mass]", "a mass"),
    ("[temperature]", "a temperature"),
    ("[pressure]", "a pressure"),
    ("[substance]/[length]**3", "a concentration"),
    ("[substance]", "an amount of substance"),
    ("[time]", "a time"),
    ("[current]", "an electric current"),
    ("[electric_potential]", "an electric potential"),
    ("[]", "a pure number"),
)


@lru_cache(maxsize=1)
def _dimension_table() -> tuple[tuple[object, str], ...]:
    ureg = registry()
    rows = []
    for dim, word in _DIMENSION_WORDS:
        value = ureg.get_dimensionality("") if dim == "[]" else ureg.get_dimensionality(dim)
        rows.append((value, word))
    return tuple(rows)


def describe_dimension(unit: pint.Unit) -> str:
    """'an energy per amount', 'a length' … for messages."""
    dim = unit.dimensionality
    for value, word in _dimension_table():
        if dim == value:
            return word
    return f"a quantity of dimension {dim}"


# --------------------------------------------------------------------------- conversion


@dataclass(frozen=True)
class Conversion:
    """How to bring one column's numbers to the internal basis.

    ``internal = (value + offset) * factor``, times the atoms per formula unit when
    ``per_entity == "atom"``.
    """

    unit_text: str
    kind: str
    factor: float
    offset: float = 0.0
    per_entity: str | None = None


def _base_names(unit: pint.Unit) -> dict[str, int]:
    ureg = registry()
    names: dict[str, int] = {}
    for name, power in unit._units.items():
        parsed = ureg.parse_unit_name(name)
        base = parsed[0][1] if parsed else name
        names[base] = names.get(base, 0) + int(power)
    return names


def _per_entity(names: dict[str, int]) -> str | None:
    if names.get("atom", 0) < 0:
        return "atom"
    if names.get("particle", 0) < 0 or names.get("formula_unit", 0) < 0:
        return "formula_unit"
    return None


def _reject(text: str, unit: pint.Unit, kind: str, noun: str) -> UnitError:
    return UnitError(
        f"unit '{text}' is {describe_dimension(unit)}, not {noun}",
        found=text,
        expected=_KIND_TABLE[kind][1],
    )


_NOUN = {
    "energy": "an energy per amount",
    "length": "a length",
    "density": "a density",
    "volume": "a volume",
    "temperature": "a temperature",
    "heat_capacity": "a molar heat capacity",
    "dimensionless": "a pure number",
}


@lru_cache(maxsize=1024)
def conversion(unit_text: str, kind: str) -> Conversion:
    """The conversion of ``unit_text`` for a column of ``kind``; :class:`UnitError` if unfit."""
    if kind not in _KIND_TABLE:
        raise UsageError("unknown unit kind", found=kind, expected="one of " + ", ".join(KINDS))
    target_text, expected = _KIND_TABLE[kind]
    if not isinstance(unit_text, str) or not unit_text.strip():
        if kind == "dimensionless":
            return Conversion(unit_text="", kind=kind, factor=1.0)
        raise UnitError(f"no unit given for {_NOUN[kind]}", found=unit_text, expected=expected)
    ureg = registry()
    unit = parse_unit(unit_text, kind)
    names = _base_names(unit)
    per_entity = _per_entity(names)
    target = ureg.parse_units(target_text)
    dim = unit.dimensionality
    one = ureg.Quantity(1.0, unit)

    if kind == "temperature":
        if dim != target.dimensionality:
            raise _reject(unit_text, unit, kind, _NOUN[kind])
        factor, offset = _temperature_scale(unit)
        return Conversion(unit_text, kind, factor, offset, None)

    if kind == "energy":
        if dim == target.dimensionality:
            return Conversion(unit_text, kind, float(one.to(target).magnitude), 0.0, per_entity)
        if dim == ureg.get_dimensionality("[energy]"):
            energy_names = set(names) - {"particle", "atom", "formula_unit"}
            if energy_names and energy_names <= _MICROSCOPIC_ENERGY:
                per_particle = (one / ureg.particle).to(target).magnitude
                return Conversion(unit_text, kind, float(per_particle), 0.0, "formula_unit")
            raise UnitError(
                f"unit '{unit_text}' is an energy without 'per mole'",
                found=unit_text,
                expected="an energy per mole such as kJ/mol or kcal/mol (or eV per particle)",
            )
        if dim in (ureg.get_dimensionality("1/[length]"), ureg.get_dimensionality("1/[time]")):
            joule = one.to("J", "sp")
            return Conversion(
                unit_text,
                kind,
                float((joule / ureg.particle).to(target).magnitude),
                0.0,
                "formula_unit",
            )
        raise _reject(unit_text, unit, kind, _NOUN[kind])

    if kind == "heat_capacity":
        if dim == target.dimensionality:
            return Conversion(unit_text, kind, float(one.to(target).magnitude), 0.0, per_entity)
        if dim == ureg.get_dimensionality("[energy]/[temperature]"):
            energy_names = set(names) - {"kelvin", "degree_Celsius", "delta_degree_Celsius"}
            if energy_names and energy_names <= _MICROSCOPIC_ENERGY:
                factor = (one / ureg.particle).to(target).magnitude
                return Conversion(unit_text, kind, float(factor), 0.0, "formula_unit")
        raise _reject(unit_text, unit, kind, _NOUN[kind])

    if kind == "volume":
        if dim == target.dimensionality:
            return Conversion(unit_text, kind, float(one.to(target).magnitude), 0.0, None)
        if dim == ureg.get_dimensionality("[length]**3/[substance]"):
            factor = one.to(ureg.nm**3 / ureg.particle).magnitude
            return Conversion(unit_text, kind, float(factor), 0.0, per_entity)
        raise _reject(unit_text, unit, kind, _NOUN[kind])

    # length, density, dimensionless: one dimension each, no per-entity basis.
    if dim != target.dimensionality:
        raise _reject(unit_text, unit, kind, _NOUN[kind])
    return Conversion(unit_text, kind, float(one.to(target).magnitude), 0.0, None)


def _temperature_scale(unit: pint.Unit) -> tuple[float, float]:
    """(factor, offset) with kelvin = (value + offset) * factor."""
    ureg = registry()
    items = list(unit._units.items())
    if len(items) == 1 and items[0][1] == 1:
        try:  # exact scale and offset of °C, °F from pint's definition
            converter = ureg._units[items[0][0]].converter
            scale = float(getattr(converter, "scale", 1.0))
            k_offset = float(getattr(converter, "offset", 0.0))
        except (KeyError, AttributeError, TypeError, ValueError):
            scale, k_offset = 0.0, 0.0
        if scale and k_offset:
            return scale, k_offset / scale
        if scale:
            return float(ureg.Quantity(1.0, unit).to("K").magnitude), 0.0
    zero = ureg.Quantity(0.0, unit).to("K").magnitude
    factor = ureg.Quantity(1.0, unit).to("K").magnitude - zero
    return float(factor), float(zero / factor)


FloatArray = npt.NDArray[np.float64]


def _atoms(conv: Conversion, atoms_per_formula_unit: npt.ArrayLike | None) -> FloatArray | float:
    if conv.per_entity != "atom":
        return 1.0
    if atoms_per_formula_unit is None:
        raise UnitError(
            f"unit '{conv.unit_text}' is per atom: the number of atoms per formula unit is needed",
            found=conv.unit_text,
            expected="atoms_per_formula_unit for each row",
        )
    return np.asarray(atoms_per_formula_unit, dtype=np.float64)


def to_internal(
    values: npt.ArrayLike,
    conv: Conversion,
    atoms_per_formula_unit: npt.ArrayLike | None = None,
) -> FloatArray:
    """Convert a column of user values to the internal basis. NaN stays NaN."""
    atoms = _atoms(conv, atoms_per_formula_unit)
    arr = np.asarray(values, dtype=np.float64)
    if conv.offset:
        arr = arr + conv.offset
    out = arr * (conv.factor * atoms) if isinstance(atoms, float) else arr * conv.factor * atoms
    return np.asarray(out, dtype=np.float64)


def from_internal(
    values: npt.ArrayLike,
    conv: Conversion,
    atoms_per_formula_unit: npt.ArrayLike | None = None,
) -> FloatArray:
    """The inverse of :func:`to_internal`: internal basis back to the user's unit."""
    atoms = _atoms(conv, atoms_per_formula_unit)
    arr = np.asarray(values, dtype=np.float64) / (conv.factor * atoms)
    if conv.offset:
        arr = arr - conv.offset
    return np.asarray(arr, dtype=np.float64)
