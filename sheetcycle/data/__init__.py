"""Built-in per-element reference data: atomic masses, atomization enthalpies, ionization
energies, electron affinities, second electron-gain defaults and common ion charges.

The tables are the packaged CSV files next to this module, written by
``scripts/make_reference_data.py`` (see docs/reference-data.md for what each holds and
where every number comes from). Values are plain floats in kJ/mol; an unknown
uncertainty is NaN; a value the tables do not have is ``None``, never zero.

Symbol lookup is case-sensitive: "Co" is cobalt, "CO" is not an element.
"""

from __future__ import annotations

import csv
import math
from collections.abc import Iterable, Mapping
from dataclasses import dataclass
from functools import cache
from importlib import resources
from importlib.resources.abc import Traversable
from types import MappingProxyType

from sheetcycle.errors import ReadError, UsageError
from sheetcycle.model import RefValue

__all__ = ["QUANTITIES", "ReferenceData", "is_element", "read_tables"]

_ELEMENTS_FILE = "elements.csv"
_VALUES_FILE = "element_values.csv"
_OXIDATION_FILE = "oxidation_states.csv"

#: Quantities a value row (or an override) may carry.
QUANTITIES = frozenset(
    {"atomization_enthalpy", "ionization_energy", "electron_affinity", "electron_gain_enthalpy"}
)
_VALUE_COLUMNS = ["element", "quantity", "index", "value", "unit", "uncertainty", "source"]
_ELEMENT_COLUMNS = ["Z", "symbol", "name", "atomic_mass", "source"]
_OXIDATION_COLUMNS = ["element", "cation_charges", "anion_charge", "source"]

_Key = tuple[str, str, int]  # (symbol, quantity, index)


@dataclass(frozen=True, slots=True)
class _Element:
    z: int
    symbol: str
    name: str
    atomic_mass: float
    source: str


class ReferenceData:
    """Look-ups in the built-in tables, optionally with user overrides on top.

    Objects are immutable: :meth:`with_overrides` returns a new object and leaves the
    one it was called on (and the cached built-in tables) unchanged.
    """

    __slots__ = ("_anions", "_cations", "_elements", "_overrides", "_values")

    def __init__(
        self,
        elements: Mapping[str, _Element],
        values: Mapping[_Key, RefValue],
        cations: Mapping[str, tuple[int, ...]],
        anions: Mapping[str, int],
        overrides: Mapping[_Key, RefValue] | None = None,
    ) -> None:
        self._elements = elements
        self._values = values
        self._cations = cations
        self._anions = anions
        self._overrides: Mapping[_Key, RefValue] = MappingProxyType(dict(overrides or {}))

    # -- construction ----------------------------------------------------------------------

    @classmethod
    def builtin(cls) -> ReferenceData:
        """The packaged tables, read once per process."""
        return _builtin()

    def with_overrides(
        self, overrides: Iterable[tuple[str, str, int, RefValue]]
    ) -> ReferenceData:
        """A new object whose look-ups prefer ``overrides`` (later entries win).

        Each entry is ``(symbol, quantity, index, RefValue)`` with quantity one of
        "atomization_enthalpy" (index 0), "ionization_energy" (index n >= 1),
        "electron_affinity" (index n >= 1, energy-released convention: positive for Cl)
        or "electron_gain_enthalpy" (index n >= 1, thermochemical sign: negative for Cl).
        The override's source text is kept, so outputs say which value was used.
        Symbols are not checked against the periodic table here: a caller that reads
        them from a workbook flags unknown ones itself.
        """
        merged = dict(self._overrides)
        for entry in overrides:
            symbol, quantity, index, ref = entry
            _check_key(quantity, index)
            if not isinstance(ref, RefValue):
                raise UsageError("an override must carry a RefValue", found=ref,
                                 expected="RefValue(value, uncertainty, source)")
            if not math.isfinite(ref.value):
                raise UsageError(f"override of {quantity}[{index}] for {symbol} has no value",
                                 found=ref.value, expected="a finite number in kJ/mol")
            if quantity in ("electron_affinity", "electron_gain_enthalpy"):
                # one stored convention per (symbol, index): the newest override wins
                merged.pop((symbol, "electron_affinity", index), None)
                merged.pop((symbol, "electron_gain_enthalpy", index), None)
            merged[(symbol, quantity, int(index))] = ref
        return ReferenceData(self._elements, self._values, self._cations, self._anions, merged)

    # -- look-ups --------------------------------------------------------------------------

    def _get(self, symbol: str, quantity: str, index: int) -> RefValue | None:
        key = (symbol, quantity, index)
        hit = self._overrides.get(key)
        return hit if hit is not None else self._values.get(key)

    def value(self, symbol: str, quantity: str, index: int = 0) -> RefValue | None:
        """The stored (or overriding) value of one quantity, in its stored convention.

        ``electron_affinity`` is in the energy-released convention here; use
        :meth:`electron_gain` for the thermochemical sign.
        """
        _check_key(quantity, index)
        return self._get(symbol, quantity, index)

    def atomization(self, symbol: str) -> RefValue | None:
        """Standard enthalpy of atomization at 298.15 K (ΔfH° of the monatomic gas)."""
        return self._get(symbol, "atomization_enthalpy", 0)

    def ionization(self, symbol: str, n: int) -> RefValue | None:
        """IE_n, the n-th ionization energy (positive, kJ/mol)."""
        if n < 1:
            raise UsageError("ionization step must be 1 or more", found=n, expected="n >= 1")
        return self._get(symbol, "ionization_energy", n)

    def ionization_sum(self, symbol: str, p: int) -> RefValue | None:
        """IE1 + … + IEp for a cation of charge p; None if any step is missing.

        The uncertainty is the quadrature sum of the steps' uncertainties (independent
        measurements), NaN if any of them is unknown. The source joins the distinct
        sources in order.
        """
        if p < 1:
            raise UsageError("cation charge must be 1 or more", found=p, expected="p >= 1")
        total = 0.0
        var = 0.0
        sources: list[str] = []
        for n in range(1, p + 1):
            ref = self.ionization(symbol, n)
            if ref is None:
                return None
            total += ref.value
            var += ref.uncertainty * ref.uncertainty  # NaN propagates
            if ref.source not in sources:
                sources.append(ref.source)
        return RefValue(total, math.sqrt(var), "; ".join(sources))

    def electron_gain(self, symbol: str, n: int) -> RefValue | None:
        """Thermochemical electron-gain enthalpy of step n (negative for Cl, n = 1).

        Taken from a stored (or overriding) electron-gain enthalpy, or else as minus a
        stored (or overriding) electron affinity. Overrides of either kind win over
        built-in values of either kind. None when absent.
        """
        if n < 1:
            raise UsageError("electron-gain step must be 1 or more", found=n, expected="n >= 1")
        for table in (self._overrides, self._values):
            gain = table.get((symbol, "electron_gain_enthalpy", n))
            if gain is not None:
                return gain
            affinity = table.get((symbol, "electron_affinity", n))
            if affinity is not None:
                return RefValue(-affinity.value, affinity.uncertainty, affinity.source,
                                affinity.unit)
        return None

    def atomic_mass(self, symbol: str) -> float | None:
        """Standard atomic weight in g/mol (mass of the longest-lived isotope if none)."""
        e = self._elements.get(symbol)
        return None if e is None else e.atomic_mass

    def atomic_number(self, symbol: str) -> int | None:
        e = self._elements.get(symbol)
        return None if e is None else e.z

    def cation_charges(self, symbol: str) -> tuple[int, ...]:
        """Common monatomic cation charges, ascending; () if the element forms none."""
        return self._cations.get(symbol, ())

    def anion_charge(self, symbol: str) -> int | None:
        """Usual monatomic anion charge (e.g. -1 for Cl, -2 for O, -1 hydride for H)."""
        return self._anions.get(symbol)

    def symbols(self) -> tuple[str, ...]:
        """All element symbols in atomic-number order."""
        return tuple(self._elements)

    def __repr__(self) -> str:
        return (f"ReferenceData({len(self._elements)} elements, {len(self._values)} values, "
                f"{len(self._overrides)} overrides)")


def is_element(symbol: str) -> bool:
    """True for a chemical element symbol, case-sensitive ("Co" yes, "CO" no)."""
    return symbol in _builtin()._elements


# -- reading the packaged tables ------------------------------------------------------------


def _check_key(quantity: str, index: int) -> None:
    if quantity not in QUANTITIES:
        raise UsageError("unknown reference quantity", found=quantity,
                         expected=" or ".join(sorted(QUANTITIES)))
    if quantity == "atomization_enthalpy":
        if index != 0:
            raise UsageError("atomization enthalpy takes index 0", found=index, expected="0")
    elif not isinstance(index, int) or index < 1:
        raise UsageError(f"{quantity} needs a step index", found=index, expected="1, 2, …")


def _rows(folder: Traversable, name: str, columns: list[str]) -> list[dict[str, str]]:
    path = folder.joinpath(name)
    try:
        text = path.read_text(encoding="utf-8")
    except OSError as exc:
        raise ReadError("cannot read a built-in reference table", file=str(path)) from exc
    reader = csv.DictReader(text.splitlines())
    if reader.fieldnames != columns:
        raise ReadError("built-in reference table has the wrong columns", file=str(path),
                        expected=",".join(columns), found=",".join(reader.fieldnames or []))
    return list(reader)


def _float(text: str) -> float:
    return float(text) if text else math.nan


def read_tables(folder: Traversable) -> ReferenceData:
    """Read the three CSV tables from ``folder`` (the package folder for the built-ins)."""
    elements: dict[str, _Element] = {}
    for r in _rows(folder, _ELEMENTS_FILE, _ELEMENT_COLUMNS):
        elements[r["symbol"]] = _Element(int(r["Z"]), r["symbol"], r["name"],
                                         float(r["atomic_mass"]), r["source"])
    values: dict[_Key, RefValue] = {}
    for line, r in enumerate(_rows(folder, _VALUES_FILE, _VALUE_COLUMNS), start=2):
        if r["unit"] != "kJ/mol" or r["quantity"] not in QUANTITIES:
            raise ReadError(f"{_VALUES_FILE} line {line}: unexpected quantity or unit",
                            file=_VALUES_FILE, expected="a known quantity in kJ/mol",
                            found=f"{r['quantity']} in {r['unit']}")
        values[(r["element"], r["quantity"], int(r["index"]))] = RefValue(
            float(r["value"]), _float(r["uncertainty"]), r["source"])
    cations: dict[str, tuple[int, ...]] = {}
    anions: dict[str, int] = {}
    for r in _rows(folder, _OXIDATION_FILE, _OXIDATION_COLUMNS):
        if r["cation_charges"]:
            cations[r["element"]] = tuple(int(q) for q in r["cation_charges"].split())
        if r["anion_charge"]:
            anions[r["element"]] = int(r["anion_charge"])
    return ReferenceData(MappingProxyType(elements), MappingProxyType(values),
                         MappingProxyType(cations), MappingProxyType(anions))


@cache
def _builtin() -> ReferenceData:
    return read_tables(resources.files(__name__))
