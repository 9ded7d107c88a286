"""Worksheet functions of our own, typed by users into any cell of their workbooks.

One registry, :data:`REGISTRY` (name → :class:`WorksheetFunction`: the Python function,
its argument spec and its documentation); docs/worksheet-functions.md describes the same
functions for users, and a test checks that every name here appears there.

The functions are registered into the ``formulas`` package (:func:`register`), so the same
bulk evaluator that reads the workbook's own formulas (:mod:`sheetcycle.io.evaluate`)
evaluates cells such as ``=LATTICEH(A2, B2)`` or ``=UNITCONV(C2, "eV", "kJ/mol")*2``,
whole columns at a time: each Python implementation takes the valid rows of a call as lists
and works on them at once (one call of the cycle solver for a column of LATTICEH cells).

Error values: a spreadsheet error in an argument flows through unchanged; a bad argument
or a result that cannot be had gives an error value (``#VALUE!``, ``#N/A``, ``#NUM!``) that
carries a reason in plain words (shown in the formula-error flag). A blank number argument
is missing, not zero: the result is ``#N/A``.

Spreadsheet applications other than sheetcycle do not know these names: see
:func:`cells_to_cache` for the values an annotated copy caches, or writes in place of the
formulas.
"""

from __future__ import annotations

import math
import re
from collections import defaultdict
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from types import MappingProxyType
from typing import TYPE_CHECKING, Any, NamedTuple

from sheetcycle.errors import SheetcycleError

if TYPE_CHECKING:
    from sheetcycle.io.cells import WorkbookCells

__all__ = [
    "REGISTRY",
    "Arg",
    "CacheEntry",
    "ValueEntry",
    "WorksheetFunction",
    "cells_to_cache",
    "register",
    "uses_own_functions",
]

Result = float | str | bool  # or sheetcycle.io.evaluate.CellError


@dataclass(frozen=True)
class Arg:
    """One argument: its name, kind ("text" or "number"), default (None = required)."""

    name: str
    kind: str
    doc: str
    default: object = None


@dataclass(frozen=True)
class WorksheetFunction:
    """One worksheet function: how it is called, what it returns, and its implementation.

    ``impl`` takes a list of rows (one tuple of parsed arguments per call, defaults filled
    in) and returns one result per row: a number, or a CellError with a reason.
    """

    name: str
    args: tuple[Arg, ...]
    returns: str
    summary: str
    example: str
    impl: Callable[[list[tuple[Any, ...]]], list[object]]

    @property
    def signature(self) -> str:
        parts = [a.name if a.default is None else f"[{a.name}]" for a in self.args]
        return f"{self.name}({', '.join(parts)})"

    @property
    def min_args(self) -> int:
        return sum(1 for a in self.args if a.default is None)


def _err(code: str, reason: str) -> object:
    from sheetcycle.io.evaluate import CellError

    return CellError(code, reason)


def _plain(exc: Exception) -> str:
    text = exc.problem if isinstance(exc, SheetcycleError) else str(exc)
    return text.splitlines()[0] if text else type(exc).__name__


# --------------------------------------------------------------------------- energy units


def _energy_factor(name: str, unit: str) -> float | object:
    """kJ/mol per one ``unit`` (an energy per amount or per particle), or an error."""
    from sheetcycle.units import conversion

    try:
        conv = conversion(unit, "energy")
    except SheetcycleError as exc:
        return _err("#VALUE!", f"{name}: {_plain(exc)}")
    if conv.per_entity == "atom":
        return _err(
            "#VALUE!",
            f"{name}: unit '{unit}' is per atom; give an energy per mole of formula unit "
            "(kJ/mol, kcal/mol, eV)",
        )
    return conv.factor


# --------------------------------------------------------------------------- LATTICEH


def _latticeh(rows: list[tuple[Any, ...]]) -> list[object]:
    from sheetcycle.api import solve_cycles

    out: list[object] = [None] * len(rows)
    by_unit: dict[str, list[int]] = defaultdict(list)
    for i, (_, _, unit) in enumerate(rows):
        by_unit[unit].append(i)
    for unit, idx in by_unit.items():
        factor = _energy_factor("LATTICEH", unit)
        if not isinstance(factor, float):
            for i in idx:
                out[i] = factor
            continue
        results = solve_cycles(
            [rows[i][0] for i in idx],
            unit=unit,
            formation_enthalpy=[rows[i][1] for i in idx],
        )
        for i, res in zip(idx, results, strict=True):
            got = res.values.get("lattice_enthalpy")
            if got is not None and math.isfinite(got.value):
                out[i] = got.value / factor
                continue
            text = rows[i][0]
            why = next((f.message for f in res.flags if f.severity.value == "error"), "")
            why = why or f"{text}: no lattice enthalpy found"
            why = why if why.startswith(text) else f"{text}: {why}"
            out[i] = _err("#N/A", "LATTICEH: " + why)
    return out


# --------------------------------------------------------------------------- LATTICEU


def _radius(symbol: str, charge: int) -> tuple[float, str] | None:
    from sheetcycle.data.radii import ionic_radius, thermochemical_radius

    return ionic_radius(symbol, charge, 6) or thermochemical_radius(symbol, charge)


def _latticeu(rows: list[tuple[Any, ...]]) -> list[object]:
    import numpy as np

    from sheetcycle.chem import assign_ions, parse_formula
    from sheetcycle.data import ReferenceData
    from sheetcycle.engine.lattice_models import kapustinskii

    ref = ReferenceData.builtin()
    out: list[object] = [None] * len(rows)
    todo: list[int] = []
    inputs: list[tuple[float, int, int, float, float, float]] = []
    for i, (text, unit) in enumerate(rows):
        factor = _energy_factor("LATTICEU", unit)
        if not isinstance(factor, float):
            out[i] = factor
            continue
        try:
            ions = assign_ions(
                parse_formula(text),
                cation_charges=ref.cation_charges,
                anion_charge_of=ref.anion_charge,
            )
        except (SheetcycleError, ValueError) as exc:
            why = _plain(exc)
            why = why if why.startswith(text) else f"{text}: {why}"
            out[i] = _err("#VALUE!", "LATTICEU: " + why)
            continue
        rc = _radius(ions.cation, ions.cation_charge)
        ra = _radius(ions.anion, ions.anion_charge)
        missing = [
            f"{sym} {z:+d}" for sym, z, r in ((ions.cation, ions.cation_charge, rc),
                                             (ions.anion, ions.anion_charge, ra)) if r is None
        ]  # fmt: skip
        if rc is None or ra is None:
            out[i] = _err(
                "#N/A", f"LATTICEU({text!r}): no ionic radius for {' and '.join(missing)}"
            )
            continue
        todo.append(i)
        inputs.append((ions.n_cation + ions.n_anion, ions.cation_charge, ions.anion_charge,
                       rc[0], ra[0], factor))  # fmt: skip
    if todo:
        arr = np.array(inputs, dtype=float)
        u = kapustinskii(arr[:, 0], arr[:, 1], arr[:, 2], arr[:, 3], arr[:, 4]) / arr[:, 5]
        for i, value in zip(todo, u.tolist(), strict=True):
            out[i] = value if math.isfinite(value) else _err(
                "#NUM!", f"LATTICEU({rows[i][0]!r}): the Kapustinskii equation gives no value"
            )
    return out


# --------------------------------------------------------------------------- UNITCONV

_UNIT_KINDS = ("energy", "temperature", "length", "volume", "density", "heat_capacity")


def _unit_pair(source: str, target: str) -> tuple[Any, Any] | str:
    from sheetcycle.units import conversion

    problems = []
    for kind in _UNIT_KINDS:
        try:
            a = conversion(source, kind)
            b = conversion(target, kind)
        except SheetcycleError as exc:
            problems.append(_plain(exc))
            continue
        if "atom" in (a.per_entity, b.per_entity):
            return f"a per-atom unit needs the atoms per formula unit ('{source}' → '{target}')"
        return a, b
    return f"cannot convert '{source}' to '{target}' ({problems[0] if problems else 'no unit'})"


def _unitconv(rows: list[tuple[Any, ...]]) -> list[object]:
    import numpy as np

    from sheetcycle.units import from_internal, to_internal

    out: list[object] = [None] * len(rows)
    groups: dict[tuple[str, str], list[int]] = defaultdict(list)
    for i, (_, source, target) in enumerate(rows):
        groups[(source, target)].append(i)
    for (source, target), idx in groups.items():
        pair = _unit_pair(source, target)
        if isinstance(pair, str):
            for i in idx:
                out[i] = _err("#VALUE!", f"UNITCONV: {pair}")
            continue
        values = np.array([rows[i][0] for i in idx], dtype=float)
        got = from_internal(to_internal(values, pair[0]), pair[1])
        for i, v in zip(idx, got.tolist(), strict=True):
            out[i] = v
    return out


# --------------------------------------------------------------------------- RXNH


def _formation_value(key: str, state: str | None) -> tuple[float | None, str]:
    """ΔfH of a species key from the built-in table; a stateless species by its only state."""
    from sheetcycle.data.thermo import formation_table

    table = formation_table()
    got = table.get(key)
    if got is not None:
        return got.value, ""
    if state is None:
        options = [k for k in table if k.startswith(key + "(")]
        if len(options) == 1:
            return table[options[0]].value, ""
        if options:
            return None, f"say the state of {key}: the table has {', '.join(options)}"
    return None, f"no built-in enthalpy of formation for {key}"


def _rxnh(rows: list[tuple[Any, ...]]) -> list[object]:
    import numpy as np

    from sheetcycle.chem.reactions import parse_reaction
    from sheetcycle.engine.hess import coefficient_matrix, reaction_enthalpy, standard_state_element

    out: list[object] = [None] * len(rows)
    todo: list[int] = []
    reactions = []
    for i, (text, unit) in enumerate(rows):
        factor = _energy_factor("RXNH", unit)
        if not isinstance(factor, float):
            out[i] = factor
            continue
        try:
            r = parse_reaction(text)
        except (SheetcycleError, ValueError) as exc:
            out[i] = _err("#VALUE!", f"RXNH: {_plain(exc)}")
            continue
        if not r.is_balanced:
            out[i] = _err("#VALUE!", f"RXNH({text!r}): not balanced ({r.balance().describe()})")
            continue
        todo.append(i)
        reactions.append(r)
    if not todo:
        return out
    cm = coefficient_matrix(reactions)
    dfh, std, why = [], [], []
    for key, sp in zip(cm.keys, cm.species, strict=True):
        is_std = standard_state_element(sp.formula, sp.state)
        value, problem = (0.0, "") if is_std else _formation_value(key, sp.state)
        std.append(is_std)
        dfh.append(math.nan if value is None else value)
        why.append(problem)
    res = reaction_enthalpy(cm.nu, np.array(dfh), standard=np.array(std))
    for n, i in enumerate(todo):
        value = float(res.value[n])
        if math.isfinite(value):
            factor = _energy_factor("RXNH", rows[i][1])
            out[i] = value / factor  # type: ignore[operator]
        else:
            lacking = [why[s] for s in np.nonzero(res.missing[n])[0]]
            out[i] = _err("#N/A", f"RXNH({rows[i][0]!r}): " + "; ".join(lacking))
    return out


# --------------------------------------------------------------------------- the registry

_UNIT_ARG = Arg("unit", "text", 'energy unit of the values in and out; default "kJ/mol"', "kJ/mol")

_FUNCTIONS = (
    WorksheetFunction(
        "LATTICEH",
        (
            Arg("formula", "text", "formula of a binary ionic solid, e.g. NaCl, MgCl2"),
            Arg("formation_enthalpy", "number", "its standard enthalpy of formation"),
            _UNIT_ARG,
        ),
        "lattice enthalpy (dissociation, positive), in `unit`",
        "Closes the Born-Haber cycle of the compound with the given enthalpy of formation and "
        "the built-in reference data (atomization, ionization, electron gain): the same "
        "solver as a run over a table.",
        '=LATTICEH("NaCl", -411.2) → about 787',
        _latticeh,
    ),
    WorksheetFunction(
        "LATTICEU",
        (Arg("formula", "text", "formula of a binary ionic solid"), _UNIT_ARG),
        "theoretical lattice energy U (positive), in `unit`",
        "Kapustinskii equation with the compound's ion count and charges and Shannon ionic "
        "radii for coordination number 6 (thermochemical radii for polyatomic ions).",
        '=LATTICEU("NaCl") → about 746',
        _latticeu,
    ),
    WorksheetFunction(
        "UNITCONV",
        (
            Arg("value", "number", "the number to convert"),
            Arg("from_unit", "text", 'its unit, e.g. "eV", "kcal/mol", "cm-1", "°C", "Å"'),
            Arg("to_unit", "text", 'the unit wanted, e.g. "kJ/mol", "K", "pm"'),
        ),
        "the value in `to_unit`",
        "Converts energies (per mole or per particle: eV, cm⁻¹ and hartree count per formula "
        "unit), temperatures, lengths, volumes, densities and heat capacities, with the same "
        "unit reading as the table headers.",
        '=UNITCONV(1, "eV", "kJ/mol") → 96.485',
        _unitconv,
    ),
    WorksheetFunction(
        "RXNH",
        (
            Arg("equation", "text", 'a balanced equation, e.g. "2 Al(s) + Fe2O3(s) -> ..."'),
            _UNIT_ARG,
        ),
        "standard reaction enthalpy at 298.15 K, in `unit`",
        "Hess's law over the built-in standard enthalpies of formation; elements in their "
        "standard states count 0. A species written without a state takes the only state "
        "the table has for it.",
        '=RXNH("2 Al + Fe2O3 -> Al2O3 + 2 Fe") → about −851.5',
        _rxnh,
    ),
)

#: Every worksheet function of sheetcycle, by name.
REGISTRY: Mapping[str, WorksheetFunction] = MappingProxyType({f.name: f for f in _FUNCTIONS})

# --------------------------------------------------------------------------- formulas glue


class _Adapter:
    """Turns a registry entry into a function the ``formulas`` package can call.

    Arguments arrive as numpy arrays (whole columns, or 1×1 for one cell) or scalars; they
    are broadcast, each element checked against the argument spec, and the valid rows
    handed to the implementation in one call.
    """

    def __init__(self, spec: WorksheetFunction) -> None:
        self.spec = spec

    def __call__(self, *args: Any) -> Any:
        import numpy as np
        from formulas.functions import Array
        from formulas.ranges import Ranges

        spec = self.spec
        args = tuple(a.value if isinstance(a, Ranges) else a for a in args)
        if not spec.min_args <= len(args) <= len(spec.args):
            want = (f"{spec.min_args}" if spec.min_args == len(spec.args)
                    else f"{spec.min_args} to {len(spec.args)}")  # fmt: skip
            error = _to_xl(
                _err("#VALUE!", f"{spec.name} takes {want} arguments, found {len(args)}")
            )
            return np.asarray([[error]], dtype=object).view(Array)
        arrays = [np.asarray(a, dtype=object) for a in args]
        if arrays:
            arrays = list(np.broadcast_arrays(*arrays))
            shape = arrays[0].shape
        else:
            shape = ()
        flat = [a.ravel() for a in arrays]
        n = flat[0].size if flat else 1
        out = np.empty(n, dtype=object)
        rows: list[tuple[Any, ...]] = []
        where: list[int] = []
        for i in range(n):
            row: list[Any] = []
            bad = None
            for k, arg in enumerate(spec.args):
                if k < len(flat):
                    value = _parse(spec.name, arg, flat[k][i])
                    if _is_error(value):
                        bad = value
                        break
                    row.append(value)
                else:
                    row.append(arg.default)
            if bad is not None:
                out[i] = bad if not _is_cell_error(bad) else _to_xl(bad)
                continue
            rows.append(tuple(row))
            where.append(i)
        if rows:
            try:
                results = spec.impl(rows)
            except Exception as exc:  # a bug must not stop the evaluation of a workbook
                results = [_err("#VALUE!", f"{spec.name}: {_plain(exc)}")] * len(rows)
            for i, value in zip(where, results, strict=True):
                out[i] = _to_xl(value) if _is_cell_error(value) else value
        return out.reshape(shape or (1, 1)).view(Array)


def _is_cell_error(v: object) -> bool:
    from sheetcycle.io.evaluate import CellError

    return isinstance(v, CellError)


def _is_error(v: object) -> bool:
    from formulas.tokens.operand import XlError

    return isinstance(v, XlError) or _is_cell_error(v)


def _parse(fname: str, arg: Arg, v: object) -> object:
    """One argument element as the implementation wants it, or an error value."""
    import numpy as np
    import schedula as sh
    from formulas.tokens.operand import XlError

    if isinstance(v, XlError):
        return v  # errors flow through unchanged
    if v is sh.EMPTY or v is None:
        if arg.default is not None:
            return arg.default
        code = "#N/A" if arg.kind == "number" else "#VALUE!"
        return _err(code, f"{fname}: the argument {arg.name} is blank")
    if isinstance(v, bool | np.bool_):
        return _err("#VALUE!", f"{fname}: the argument {arg.name} is a logical value")
    if arg.kind == "number":
        if isinstance(v, int | float | np.integer | np.floating):
            x = float(v)
        else:
            try:
                x = float(str(v).strip().replace("−", "-"))
            except ValueError:
                return _err("#VALUE!", f"{fname}: the argument {arg.name} is not a number: {v!r}")
        if not math.isfinite(x):
            return _err("#NUM!", f"{fname}: the argument {arg.name} is not a finite number")
        return x
    if isinstance(v, int | float | np.integer | np.floating):
        return _err("#VALUE!", f"{fname}: the argument {arg.name} must be text, found {v!r}")
    text = str(v).strip()
    if not text:
        return _err("#VALUE!", f"{fname}: the argument {arg.name} is empty text")
    return text


_XL_BASE: dict[str, Any] = {}


def _to_xl(err: Any) -> Any:
    """A CellError as a ``formulas`` error value that still carries its reason.

    The value compares equal to (and hashes like) the package's own error of that code, so
    ISNA, IFNA and IFERROR treat it as that error.
    """
    from formulas.tokens.operand import XlError

    if not _XL_BASE:
        from formulas.tokens import operand as op

        for e in (op.NULL, op.DIV, op.VALUE, op.REF, op.NAME, op.NUM, op.NA):
            _XL_BASE[str(e)] = e

    base = _XL_BASE.get(err.code)
    if base is None:
        base = _XL_BASE[err.code] = XlError(err.code)
    return _ReasonedError(base, err.reason)


def _make_reasoned() -> type:
    from formulas.tokens.operand import XlError

    class ReasonedError(XlError):  # type: ignore[misc, valid-type]
        """A ``formulas`` error value with a reason; equal to its base error."""

        def __new__(cls, base: Any, reason: str) -> ReasonedError:
            return super().__new__(cls, str(base))

        def __init__(self, base: Any, reason: str) -> None:
            super().__init__(str(base))
            self.base = base
            self.reason = reason

        def __eq__(self, other: object) -> bool:
            return other is self or other is self.base

        def __ne__(self, other: object) -> bool:
            return not self.__eq__(other)

        def __hash__(self) -> int:
            return hash(self.base)

    return ReasonedError


class _Lazy:
    cls: type | None = None

    def __call__(self, base: Any, reason: str) -> Any:
        if self.cls is None:
            self.cls = _make_reasoned()
        return self.cls(base, reason)


_ReasonedError = _Lazy()
_registered = False


def register() -> None:
    """Make every registry function known to the ``formulas`` package (idempotent).

    Each is registered under its name and under ``_XLUDF.<name>``, the prefix a spreadsheet
    application gives unknown (user-defined) functions when it saves them.
    """
    global _registered
    if _registered:
        return
    import formulas
    from formulas.functions import wrap_ranges_func

    table = formulas.get_functions()
    for name, spec in REGISTRY.items():
        fn = wrap_ranges_func(_Adapter(spec))
        table[name] = fn
        table["_XLUDF." + name] = fn
    _registered = True


# --------------------------------------------------------------------------- on annotate

_STRINGS = re.compile(r'"(?:[^"]|"")*"')
_USES = re.compile(
    r"(?<![\w.])(?:_xludf\.)?(" + "|".join(REGISTRY) + r")\s*\(", re.IGNORECASE
)


def uses_own_functions(formula: str) -> bool:
    """True when a formula text calls one of the registry functions."""
    return _USES.search(_STRINGS.sub('""', formula)) is not None


class CacheEntry(NamedTuple):
    """A cached value to write for a formula cell that keeps its formula."""

    sheet: str
    cell: str  # A1
    value: object  # float, str, bool, or CellError (write it as an error value)


class ValueEntry(NamedTuple):
    """A value to write in place of a formula, with a note that keeps the formula."""

    sheet: str
    cell: str
    value: object
    note: str


def cells_to_cache(
    book: WorkbookCells, *, replace_by_values: bool = False, every_formula: bool = False
) -> list[CacheEntry] | list[ValueEntry]:
    """The formula cells of ``book`` whose values an annotated copy must write.

    By default: every cell whose formula calls a registry function, with the value
    sheetcycle computed (other applications cannot compute it, and most show the cached
    value). ``replace_by_values=True`` gives :class:`ValueEntry` rows instead: the value to
    write *in place of* the formula and the text of a note that keeps the formula, for
    colleagues whose application does not know the functions. ``every_formula=True`` also
    lists (as :class:`CacheEntry`) the other evaluated formula cells whose cached value is
    missing or differs from the formula's value, so the copy shows correct values
    everywhere. Order: sheet by sheet, row by row.
    """
    from sheetcycle.io.evaluate import col_letters, values_match

    out: list[Any] = []
    for sheet in book.sheets:
        for (r, c), fc in sorted(sheet.formulas.items()):
            own = uses_own_functions(fc.formula)
            if not own:
                if replace_by_values or not every_formula or not fc.evaluated:
                    continue
                if fc.cached is not None and values_match(fc.cached, fc.value):
                    continue
            if not fc.evaluated:
                continue
            cell = f"{col_letters(c)}{r + 1}"
            if replace_by_values:
                out.append(ValueEntry(sheet.name, cell, fc.value, _note(fc.formula, fc.value)))
            else:
                out.append(CacheEntry(sheet.name, cell, fc.value))
    return out


def _note(formula: str, value: object) -> str:
    from sheetcycle.io.evaluate import CellError

    shown = value.code if isinstance(value, CellError) else value
    return (
        f"sheetcycle: this cell held the formula {formula}, which uses a sheetcycle "
        f"worksheet function; it was replaced by its value ({shown}) so that any "
        "spreadsheet application shows it. Type the formula back to compute it again."
    )


def describe(names: Sequence[str] = ()) -> str:
    """Plain-text documentation of the registry (all functions, or those named)."""
    lines = []
    for name in names or REGISTRY:
        f = REGISTRY[name]
        lines.append(f"{f.signature}: {f.returns}")
        lines.append(f"    {f.summary}")
        for a in f.args:
            default = "" if a.default is None else f" (default {a.default})"
            lines.append(f"    {a.name} ({a.kind}){default}: {a.doc}")
        lines.append(f"    e.g. {f.example}")
    return "\n".join(lines)
