"""Loaders for the built-in tables behind solution, reaction and temperature work.

* ``hydration.csv``: single-ion hydration enthalpies of common ions, each with the absolute
  scale it belongs to (the hydration enthalpy of H+ that fixes it) and its source.
* ``formation.csv``: standard enthalpies of formation (298.15 K, 1 bar) of the compounds and
  aqueous ions used in tests and demos, each with its source. Elements in their standard
  states are not listed: they are 0 by definition (see
  :func:`sheetcycle.engine.hess.standard_state_element`).
* ``shomate.csv``: Shomate heat-capacity coefficients (NIST form) with each set's
  temperature range.

Look-ups go by formula and state, however the formula is spelled (``H2O(l)``, ``H₂O``,
``SO4 2-`` or ``SO42-``): both sides are reduced to :func:`sheetcycle.chem.reactions.species_key`.
A look-up that finds nothing returns None, never zero.
"""

from __future__ import annotations

import csv
import math
from collections.abc import Mapping
from dataclasses import dataclass
from functools import cache
from importlib import resources
from types import MappingProxyType

from sheetcycle.chem.formula import parse_formula
from sheetcycle.chem.reactions import species_key
from sheetcycle.errors import ReadError
from sheetcycle.model import RefValue

__all__ = [
    "HydrationEntry",
    "ShomateSet",
    "formation_enthalpy",
    "formation_table",
    "hydration_enthalpy",
    "hydration_table",
    "shomate_sets",
    "shomate_table",
]

HYDRATION_FILE = "hydration.csv"
FORMATION_FILE = "formation.csv"
SHOMATE_FILE = "shomate.csv"

_STATE_ALIASES = {"cr": "s", "c": "s", "liq": "l"}


@dataclass(frozen=True, slots=True)
class HydrationEntry:
    """One single-ion hydration enthalpy as tabulated, with the scale it is on."""

    ion: str
    charge: int
    value: float  # kJ/mol
    uncertainty: float  # NaN when unknown
    h_plus: float  # ΔhydH(H+) of the scale, kJ/mol (0 for the conventional scale)
    source: str


@dataclass(frozen=True, slots=True)
class ShomateSet:
    """One Shomate coefficient set (NIST form) and the range it holds for."""

    formula: str
    state: str
    t_min: float
    t_max: float
    coefficients: tuple[float, float, float, float, float, float, float, float]  # A..H
    source: str


def _rows(name: str, columns: list[str]) -> list[dict[str, str]]:
    try:
        text = resources.files("sheetcycle.data").joinpath(name).read_text(encoding="utf-8")
    except OSError as exc:
        raise ReadError(f"built-in table {name} cannot be read", found=str(exc)) from exc
    rows = list(csv.DictReader(text.splitlines()))
    if rows and list(rows[0]) != columns:
        raise ReadError(
            f"built-in table {name} has unexpected columns",
            expected=", ".join(columns),
            found=", ".join(rows[0]),
        )
    return rows


def _float(text: str) -> float:
    return float(text) if text.strip() else math.nan


def _state(state: str | None) -> str | None:
    if state is None:
        return None
    s = state.strip().lower()
    return _STATE_ALIASES.get(s, s) or None


def _key(formula: str, state: str | None) -> str:
    f = parse_formula(formula)
    return species_key(f, _state(state if state is not None else f.state))


@cache
def hydration_table() -> Mapping[str, HydrationEntry]:
    """The built-in single-ion hydration enthalpies, keyed by ion key (no state)."""
    cols = ["ion", "charge", "value_kJ_mol", "uncertainty", "scale", "h_plus_reference", "source"]
    out: dict[str, HydrationEntry] = {}
    for row in _rows(HYDRATION_FILE, cols):
        f = parse_formula(row["ion"])
        charge = int(row["charge"])
        if f.charge != charge:
            raise ReadError(
                f"built-in table {HYDRATION_FILE}: ion {row['ion']!r} has charge {f.charge}",
                expected=f"charge {charge} as in its charge column",
            )
        h_plus = 0.0 if row["scale"] == "conventional" else float(row["h_plus_reference"])
        out[species_key(f, None)] = HydrationEntry(
            row["ion"], charge, float(row["value_kJ_mol"]), _float(row["uncertainty"]),
            h_plus, row["source"],
        )  # fmt: skip
    return MappingProxyType(out)


def hydration_enthalpy(ion: str, h_plus: float | None = None) -> RefValue | None:
    """Single-ion hydration enthalpy of ``ion`` (kJ/mol), or None when the table lacks it.

    ``h_plus`` is the ΔhydH(H+) of the scale wanted: None keeps the table's own scale,
    0 gives the conventional scale, −1150.1 the scale of Tissandier et al., and so on. The
    value shifts by z·(h_plus − h_plus_table) (see
    :func:`sheetcycle.engine.solution.convert_hydration`); the uncertainty does not change,
    since the uncertainty of the H+ value itself cancels over any neutral salt.
    """
    f = parse_formula(ion)
    entry = hydration_table().get(species_key(f, None))
    if entry is None:
        return None
    value = entry.value
    source = entry.source
    if h_plus is not None and h_plus != entry.h_plus:
        value = value + entry.charge * (h_plus - entry.h_plus)
        source += f"; converted to the scale with ΔhydH(H+) = {h_plus:g} kJ/mol"
    return RefValue(value, entry.uncertainty, source)


@cache
def formation_table() -> Mapping[str, RefValue]:
    """The built-in standard enthalpies of formation, keyed by species key (with state)."""
    cols = ["formula", "state", "value_kJ_mol", "uncertainty", "source"]
    out: dict[str, RefValue] = {}
    for row in _rows(FORMATION_FILE, cols):
        out[_key(row["formula"], row["state"])] = RefValue(
            float(row["value_kJ_mol"]), _float(row["uncertainty"]), row["source"]
        )
    return MappingProxyType(out)


def formation_enthalpy(formula: str, state: str | None = None) -> RefValue | None:
    """ΔfH°(298.15 K) of ``formula`` in ``state`` (or the state written in the formula),
    or None when the table lacks it. States 'cr' and 'c' are read as 's'."""
    return formation_table().get(_key(formula, state))


@cache
def shomate_table() -> Mapping[str, tuple[ShomateSet, ...]]:
    """The built-in Shomate sets, keyed by species key, each species' sets in order of
    temperature."""
    cols = ["formula", "state", "t_min_K", "t_max_K", "A", "B", "C", "D", "E", "F", "G", "H",
            "source"]  # fmt: skip
    out: dict[str, list[ShomateSet]] = {}
    for row in _rows(SHOMATE_FILE, cols):
        c = tuple(float(row[k]) for k in "ABCDEFGH")
        s = ShomateSet(
            row["formula"], row["state"], float(row["t_min_K"]), float(row["t_max_K"]),
            (c[0], c[1], c[2], c[3], c[4], c[5], c[6], c[7]), row["source"],
        )  # fmt: skip
        out.setdefault(_key(row["formula"], row["state"]), []).append(s)
    return MappingProxyType({k: tuple(sorted(v, key=lambda s: s.t_min)) for k, v in out.items()})


def shomate_sets(formula: str, state: str | None = None) -> tuple[ShomateSet, ...]:
    """The Shomate sets of one species (empty when the table has none)."""
    return shomate_table().get(_key(formula, state), ())
