"""Plain typed values passed between reader, engine and writer.

Frozen dataclasses and numpy arrays only: no cell objects, no file handles. Units are
settled at the border, so every array here is in the internal basis:
energies in kJ per mol of formula unit, temperatures in K, lengths in pm,
densities in g/cm3, volumes in nm3 per formula unit.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from enum import Enum
from typing import Any, TypeVar

import numpy as np
import numpy.typing as npt

__all__ = [
    "Column",
    "ComputedValue",
    "Flag",
    "RefValue",
    "ReferenceUse",
    "RowResult",
    "RunResult",
    "Severity",
    "Table",
]

FloatArray = npt.NDArray[np.float64]


class Severity(str, Enum):  # noqa: UP042 - str mixin keeps JSON and comparisons plain
    """How much a flag matters. The string values are what the JSON report carries."""

    ERROR = "error"  # the row's result is missing or wrong because of this
    WARNING = "warning"  # a result exists but should be looked at
    NOTE = "note"  # information: a convention applied, a default used

    def __str__(self) -> str:
        return self.value


@dataclass(frozen=True, slots=True)
class Flag:
    """One finding about one cell (or row), in plain words."""

    code: str
    severity: Severity
    message: str
    sheet: str | None = None
    cell: str | None = None  # A1 reference without the sheet, e.g. "C7"

    def as_dict(self) -> dict[str, Any]:
        return {
            "code": self.code,
            "severity": self.severity.value,
            "cell": self.cell,
            "message": self.message,
        }


@dataclass(frozen=True, slots=True)
class RefValue:
    """A reference value with its unit already converted to the internal basis."""

    value: float
    uncertainty: float  # NaN when the source gives none
    source: str
    unit: str = "kJ/mol"


@dataclass(frozen=True)
class Column:
    """One recognised (or unrecognised) column of a table.

    ``values`` holds the numbers converted to the internal basis (NaN where missing);
    ``texts`` holds what the cell showed for text columns (formula, state, structure).
    ``reasons`` maps a data-row offset to why that cell is missing or suspect.
    """

    header: str
    col: int  # 0-based column index in the sheet
    quantity: str | None  # registry key, None when not recognised
    index: int = 0  # 1..n for ionization energies, electron affinities; 0 otherwise
    unit: str | None = None  # the user's unit as written (normalised text)
    factor: float = 1.0  # multiply user values by this to get the internal basis
    convention: str | None = None  # e.g. "dissociation", "formation", "released", "gain"
    values: FloatArray | None = None
    uncertainties: FloatArray | None = None
    uncertainty_col: int | None = None
    texts: tuple[str | None, ...] | None = None
    note: str | None = None  # why it was (not) recognised, for `inspect`
    atoms: FloatArray | None = None  # atoms per formula unit, for columns in per-atom units
    # True where the number was read out of text ('−411 ± 2'): a spreadsheet formula cannot
    # use such a cell, so outputs give the value without a formula there.
    from_text: npt.NDArray[np.bool_] | None = None


@dataclass(frozen=True)
class Table:
    """A header-delimited block of one sheet."""

    sheet: str
    header_row: int  # 1-based sheet row of the header
    first_row: int  # 1-based sheet row of the first data row
    last_row: int  # 1-based sheet row of the last data row
    columns: tuple[Column, ...]
    units_row: int | None = None  # 1-based row of a units row under the header, if any

    @property
    def n_rows(self) -> int:
        return self.last_row - self.first_row + 1

    def column(self, quantity: str, index: int = 0) -> Column | None:
        for c in self.columns:
            if c.quantity == quantity and c.index == index:
                return c
        return None


_T = TypeVar("_T")

#: Stands for the row's own sheet row in a cycle term's expression as a table holds it
#: (``C{#}*4.184``): a column of rows then shares one expression text, and a writer builds
#: one formula per distinct expression and puts each row's number in.
ROW_MARK = "{#}"

#: One copy of each distinct method text and sources tuple: a big table repeats the same
#: few hundred of them across its rows, and holding one per row cost most of a run's memory.
_SHARED: dict[object, object] = {}


def share(text: _T) -> _T:
    """One copy of an equal text (or tuple of texts) for every holder: a large table repeats
    the same few hundred method words, sources and labels across its rows."""
    if len(_SHARED) < 100_000:
        return _SHARED.setdefault(text, text)  # type: ignore[return-value]
    return text


#: Renders ``(method, sources)`` of one value from its key (a row index, say) when they are
#: first read. One renderer serves a whole column of values.
Render = Callable[[Any], tuple[str, Sequence[str]]]


class ComputedValue:
    """One derived number with everything needed to trace it.

    ``method`` and ``sources`` are plain attributes to a reader. A pass that makes one value
    per row of a large table may hand over a shared renderer and the row's key instead
    (:meth:`deferred`): the words are then written only when something reads them (the
    JSON report, the results workbook), not for every row of every run. The annotated copy
    of a workbook never reads them; formatting and holding them cost much of its run time
    and memory.
    """

    __slots__ = ("_method", "_sources", "uncertainty", "unit", "value")

    value: float
    uncertainty: float
    unit: str

    def __init__(self, value: float, uncertainty: float, unit: str, method: str,
                 sources: tuple[str, ...] = ()) -> None:
        _set = object.__setattr__
        _set(self, "value", value)
        _set(self, "uncertainty", uncertainty)
        _set(self, "unit", unit)
        _set(self, "_method", share(method))
        _set(self, "_sources", share(sources))

    @classmethod
    def deferred(cls, value: float, uncertainty: float, unit: str, render: Render,
                 key: Any) -> ComputedValue:
        """A value whose method text and sources are ``render(key)``, made on first reading."""
        self = cls.__new__(cls)
        _set = object.__setattr__
        _set(self, "value", value)
        _set(self, "uncertainty", uncertainty)
        _set(self, "unit", unit)
        _set(self, "_method", render)
        _set(self, "_sources", key)
        return self

    def _render(self) -> None:
        method, sources = self._method(self._sources)  # type: ignore[operator]
        object.__setattr__(self, "_method", share(method))
        object.__setattr__(self, "_sources", share(tuple(sources)))

    @property
    def method(self) -> str:
        if type(self._method) is not str:
            self._render()
        return self._method  # type: ignore[return-value]

    @property
    def sources(self) -> tuple[str, ...]:
        if type(self._method) is not str:
            self._render()
        return self._sources  # type: ignore[return-value]

    def __setattr__(self, name: str, value: object) -> None:
        raise AttributeError(f"ComputedValue is immutable (cannot set {name})")

    def __reduce__(self) -> tuple[Any, ...]:
        # pickled (batch workers, copies) with its words rendered
        return (ComputedValue, (self.value, self.uncertainty, self.unit, self.method,
                                self.sources))

    def __eq__(self, other: object) -> bool:
        if not isinstance(other, ComputedValue):
            return NotImplemented
        return (self.value, self.uncertainty, self.unit, self.method, self.sources) == (
            other.value, other.uncertainty, other.unit, other.method, other.sources)

    def __hash__(self) -> int:
        return hash((self.value, self.uncertainty, self.unit, self.method, self.sources))

    def __repr__(self) -> str:
        return (f"ComputedValue(value={self.value!r}, uncertainty={self.uncertainty!r}, "
                f"unit={self.unit!r}, method={self.method!r}, sources={self.sources!r})")

    def as_dict(self) -> dict[str, Any]:
        def num(x: float) -> float | None:
            x = float(x)
            return x if math.isfinite(x) else None  # NaN, ±inf -> null

        return {
            "value": num(self.value),
            "uncertainty": num(self.uncertainty),
            "unit": self.unit,
            "method": self.method,
            "sources": list(self.sources),
        }


@dataclass
class RowResult:
    """Everything the tool says about one compound row."""

    sheet: str
    row: int  # 1-based sheet row
    formula: str | None
    values: dict[str, ComputedValue] = field(default_factory=dict)
    flags: list[Flag] = field(default_factory=list)
    # How the values were made, for writers that emit formulas: the cycle's coefficients and
    # each term's spreadsheet expression (not part of the JSON report).
    trace: dict[str, Any] = field(default_factory=dict, repr=False)

    def as_dict(self) -> dict[str, Any]:
        return {
            "sheet": self.sheet,
            "row": self.row,
            "formula": self.formula,
            "values": {k: v.as_dict() for k, v in self.values.items()},
            "flags": [f.as_dict() for f in self.flags],
        }


@dataclass(frozen=True, slots=True)
class ReferenceUse:
    """A reference value that entered at least one result, as listed in every output."""

    element: str  # element symbol, or ion/species text
    quantity: str  # "atomization_enthalpy", "ionization_energy", "electron_gain_enthalpy", ...
    index: int  # 1..n for ionization energies and electron gains, 0 otherwise
    value: float  # internal basis (kJ/mol)
    uncertainty: float  # NaN when unknown
    unit: str
    source: str  # where the number came from: built-in table (with its source), sheet cell, file

    def as_dict(self) -> dict[str, Any]:
        return {
            "element": self.element,
            "quantity": self.quantity,
            "index": self.index,
            "value": self.value,
            "uncertainty": None if self.uncertainty != self.uncertainty else self.uncertainty,
            "unit": self.unit,
            "source": self.source,
        }


@dataclass
class RunResult:
    """The outcome of one run over one input file."""

    version: str
    input: str
    tables: list[Table]
    rows: list[RowResult]
    references: list[ReferenceUse] = field(default_factory=list)
    settings: dict[str, Any] = field(default_factory=dict)
    file_flags: list[Flag] = field(default_factory=list)  # flags not tied to a compound row
