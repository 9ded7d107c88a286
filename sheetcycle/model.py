"""Plain typed values passed between reader, engine and writer.

Frozen dataclasses and numpy arrays only: no cell objects, no file handles. Units are
settled at the border, so every array here is in the internal basis:
energies in kJ per mol of formula unit, temperatures in K, lengths in pm,
densities in g/cm3, volumes in nm3 per formula unit.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterator, MutableMapping, Sequence
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
    "TableValues",
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


def forget_shared() -> None:
    """Let go of the copies kept by :func:`share` (each run starts afresh, so that a
    process that runs many workbooks does not keep every earlier one's words)."""
    _SHARED.clear()


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


class _ValueColumn:
    """One computed quantity over every row of a table (see :class:`TableValues`)."""

    __slots__ = ("present", "render", "seq", "sigmas", "unit", "values")

    def __init__(self, values: np.ndarray, sigmas: np.ndarray, unit: str, render: Render,
                 present: np.ndarray, seq: int) -> None:
        self.values = values
        self.sigmas = sigmas
        self.unit = unit
        self.render = render
        self.present = present
        self.seq = seq


class TableValues:
    """The computed quantities of one table, held column-wise.

    A pass that derives a quantity for many rows of a table puts it here once, as arrays
    (:meth:`put`), instead of one :class:`ComputedValue` per row; each row's
    :class:`RowValues` shows it as a ComputedValue when read. Writers of whole columns (the
    annotated copy) read the arrays directly (:meth:`column`). Values a pass sets row by row
    stay with that row, in the order they were set.
    """

    __slots__ = ("_columns", "_seq", "n")

    def __init__(self, n: int) -> None:
        self.n = n
        self._columns: dict[str, _ValueColumn] = {}
        self._seq = 0

    def _next(self) -> int:
        self._seq += 1
        return self._seq

    def put(self, name: str, values: Any, sigmas: Any, unit: str, render: Render,
            present: Any = None) -> None:
        """Give ``name`` to the rows where ``present`` (default: where the value is a
        number). ``render(i)`` gives row i's (method, sources), made when first read.
        A quantity already held here is replaced where the new one is present."""
        v = np.asarray(values, dtype=float).reshape(self.n)
        s = np.broadcast_to(np.asarray(sigmas, dtype=float), (self.n,))
        mask = np.isfinite(v) if present is None else np.asarray(present, dtype=bool) & (v == v)
        old = self._columns.get(name)
        if old is not None:  # the new values where given, the old ones elsewhere
            keep = old.present & ~mask
            if keep.any():
                old_render, new_render = old.render, render

                def render(i: int, keep: np.ndarray = keep) -> tuple[str, Sequence[str]]:
                    return old_render(i) if keep[i] else new_render(i)

                v = np.where(keep, old.values, v)
                s = np.where(keep, old.sigmas, s)
                mask = mask | keep
            self._columns[name] = _ValueColumn(v, s, unit, render, mask, old.seq)
            return
        self._columns[name] = _ValueColumn(v, s, unit, render, mask, self._next())

    def column(self, name: str) -> tuple[np.ndarray, np.ndarray, np.ndarray, str] | None:
        """(values, uncertainties, present, unit) of a quantity held column-wise."""
        c = self._columns.get(name)
        return None if c is None else (c.values, c.sigmas, c.present, c.unit)

    def names(self) -> list[str]:
        """The quantities held column-wise, in the order they were first put."""
        return list(self._columns)

    def row(self, i: int) -> RowValues:
        return RowValues(self, i)


class RowValues(MutableMapping[str, "ComputedValue"]):
    """One row's computed values: those its table holds column-wise (:class:`TableValues`)
    and those set for this row alone, as one mapping in the order they were first set."""

    __slots__ = ("_i", "_own", "_t")

    def __init__(self, table: TableValues, i: int) -> None:
        self._t = table
        self._i = i
        self._own: dict[str, tuple[int, ComputedValue]] | None = None

    def __getitem__(self, name: str) -> ComputedValue:
        own = self._own
        if own is not None and name in own:
            return own[name][1]
        c = self._t._columns.get(name)
        i = self._i
        if c is None or not c.present[i]:
            raise KeyError(name)
        return ComputedValue.deferred(float(c.values[i]), float(c.sigmas[i]), c.unit,
                                      c.render, i)

    def __contains__(self, name: object) -> bool:
        own = self._own
        if own is not None and name in own:
            return True
        c = self._t._columns.get(name)  # type: ignore[arg-type]
        return c is not None and bool(c.present[self._i])

    def __setitem__(self, name: str, value: ComputedValue) -> None:
        if self._own is None:
            self._own = {}
        old = self._own.get(name)
        if old is not None:
            seq = old[0]
        else:
            c = self._t._columns.get(name)
            seq = c.seq if c is not None and c.present[self._i] else self._t._next()
        self._own[name] = (seq, value)

    def __delitem__(self, name: str) -> None:
        raise TypeError("computed values are not removed from a row")

    def _keys(self) -> list[str]:
        i = self._i
        keyed = [(c.seq, name) for name, c in self._t._columns.items() if c.present[i]]
        if self._own:
            held = {name for _, name in keyed}
            keyed += [(seq, name) for name, (seq, _) in self._own.items() if name not in held]
            keyed.sort()
        return [name for _, name in keyed]

    def __iter__(self) -> Iterator[str]:
        return iter(self._keys())

    def __len__(self) -> int:
        return len(self._keys())

    def own(self) -> dict[str, ComputedValue]:
        """The values set for this row alone (not held column-wise)."""
        return {} if self._own is None else {k: v for k, (_, v) in self._own.items()}

    def __reduce__(self) -> tuple[Any, ...]:
        # pickled (batch workers) as a plain dict of its values
        return (dict, (dict(self.items()),))

    def __repr__(self) -> str:
        return repr(dict(self.items()))


@dataclass(slots=True)  # a large table makes one per row: no per-instance __dict__
class RowResult:
    """Everything the tool says about one compound row."""

    sheet: str
    row: int  # 1-based sheet row
    formula: str | None
    # a plain dict, or a row's view (RowValues) of its table's column-wise values
    values: MutableMapping[str, ComputedValue] = field(default_factory=dict)
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
