"""Ion assignment for binary ionic compounds MaXb (for Born-Haber cycles).

The anion is the element with a usual anion charge; the cation charge follows from
electroneutrality, a*p + b*q = 0, and must be one of the cation's common charges (given by
the caller). Charges from the user (a row's charge columns) override the usual ones.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from types import MappingProxyType

from sheetcycle.chem.formula import Formula, make_error
from sheetcycle.errors import ChemistryError

__all__ = ["USUAL_ANION_CHARGES", "IonAssignment", "assign_ions"]

# Usual charges of the monatomic anions met in binary ionic solids (common practice, no
# source): halides -1, chalcogenides -2, nitride and phosphide -3, hydride -1.
USUAL_ANION_CHARGES: Mapping[str, int] = MappingProxyType(
    {
        "F": -1, "Cl": -1, "Br": -1, "I": -1, "At": -1,
        "O": -2, "S": -2, "Se": -2, "Te": -2,
        "N": -3, "P": -3,
        "H": -1,
    }
)  # fmt: skip

# With hydrogen these form molecules (HCl, H2O, NH3, CH4, SiH4 ...), not ionic hydrides.
_COVALENT_WITH_H = frozenset(
    {"B", "C", "Si", "Ge", "N", "P", "As", "Sb", "O", "S", "Se", "Te", "F", "Cl", "Br", "I", "At"}
)

_TOLERANCE = 1e-9


@dataclass(frozen=True)
class IonAssignment:
    """Cation and anion of MaXb with their charges and counts per formula unit."""

    cation: str
    cation_charge: int  # positive
    n_cation: float  # a
    anion: str
    anion_charge: int  # negative
    n_anion: float  # b
    basis: str  # how the charges were decided, in plain words


def _signed(value: float) -> str:
    """'+2', '−1', '+2.67' (Unicode minus, as in the messages)."""
    if float(value).is_integer():
        text = f"{int(value):+d}"
    else:
        text = f"{value:+.2f}"
    return text.replace("-", "−")


def _charges_list(charges: tuple[int, ...]) -> str:
    return ", ".join(_signed(c) for c in charges)


def _plain(counts: Mapping[str, float]) -> str:
    """Element counts as formula text in their own order: {'Cu': 1, 'Cl': 2} -> 'CuCl2'."""
    return "".join(s + ("" if n == 1 else f"{n:g}") for s, n in counts.items())


def _whole(x: float) -> bool:
    return math.isfinite(x) and abs(x - round(x)) <= _TOLERANCE


def _user_charge(
    value: float | None, kind: str, fail: Callable[[str], ChemistryError]
) -> int | None:
    """A charge from a sheet cell (int, or a float such as 2.0) as an int."""
    if value is None:
        return None
    if not _whole(float(value)):
        raise fail(f"the given {kind} charge {value!r} is not a whole number")
    return round(float(value))


def assign_ions(
    formula: Formula,
    *,
    cation_charges: Callable[[str], tuple[int, ...] | None],
    anion_charge_of: Callable[[str], int | None] = USUAL_ANION_CHARGES.get,
    cation_charge: int | None = None,
    anion_charge: int | None = None,
) -> IonAssignment:
    """Assign cation and anion (and their charges) to a binary ionic compound.

    ``cation_charges(symbol)`` gives an element's common positive charges;
    ``anion_charge_of(symbol)`` its usual anion charge or None. ``cation_charge`` (positive)
    and ``anion_charge`` (negative) are charges from the user and override the usual ones.
    Raises ChemistryError, in plain words, when no assignment can be made.
    """
    name = formula.text

    def fail(problem: str) -> ChemistryError:
        return make_error(ChemistryError, f"{name}: {problem}")

    if formula.charge != 0:
        raise fail(
            f"is an ion with charge {_signed(formula.charge)}, not a neutral compound; "
            "ion assignment needs a neutral salt"
        )
    if formula.hydrate:
        raise fail(
            "a hydrate is not a binary ionic solid for a Born-Haber cycle; "
            f"use the anhydrous salt ({_plain(formula.core)})"
        )
    symbols = list(formula.core)
    if len(symbols) != 2:
        noun = "element" if len(symbols) == 1 else "elements"
        raise fail(
            f"has {len(symbols)} {noun} ({', '.join(symbols)}); ion assignment needs a "
            "binary compound of exactly two elements"
        )
    counts = [formula.core[s] for s in symbols]
    if not all(_whole(n) for n in counts):
        listed = ", ".join(f"{s} {n:g}" for s, n in zip(symbols, counts, strict=True))
        raise fail(
            f"is non-stoichiometric (counts {listed}); ion assignment needs whole-number counts"
        )
    cation_charge = _user_charge(cation_charge, "cation", fail)
    anion_charge = _user_charge(anion_charge, "anion", fail)
    if cation_charge is not None and cation_charge <= 0:
        raise fail(f"a cation charge must be positive, got {_signed(cation_charge)}")
    if anion_charge is not None and anion_charge >= 0:
        raise fail(f"an anion charge must be negative, got {_signed(anion_charge)}")

    if "H" in symbols:
        other = symbols[1 - symbols.index("H")]
        if other in _COVALENT_WITH_H:
            raise fail(f"H with {other} is a molecular compound, not an ionic hydride")

    usual: dict[str, int] = {}
    for s in symbols:
        q = anion_charge_of(s)
        if q is not None and q < 0:
            usual[s] = int(q)
    if len(usual) == 2:
        raise fail(
            f"both {symbols[0]} and {symbols[1]} usually form anions, so neither can be "
            "taken as the cation"
        )
    if not usual:
        raise fail(
            f"neither {symbols[0]} nor {symbols[1]} has a usual anion charge, so no anion "
            "can be picked"
        )
    (anion,) = usual
    cation = symbols[1 - symbols.index(anion)]
    a = float(round(formula.core[cation]))
    b = float(round(formula.core[anion]))
    common = tuple(cation_charges(cation) or ())

    if cation_charge is not None and anion_charge is not None:
        total = a * cation_charge + b * anion_charge
        if total != 0:
            raise fail(
                f"the given charges {cation} {_signed(cation_charge)} and {anion} "
                f"{_signed(anion_charge)} do not balance: {a:g} × ({_signed(cation_charge)}) "
                f"+ {b:g} × ({_signed(anion_charge)}) = {_signed(total)}, not 0"
            )
        return IonAssignment(
            cation, cation_charge, a, anion, anion_charge, b,
            basis=f"charges given by the user ({cation} {_signed(cation_charge)}, {anion} "
            f"{_signed(anion_charge)}), checked for electroneutrality",
        )  # fmt: skip

    if cation_charge is not None:
        q = usual[anion]
        total = a * cation_charge + b * q
        if total != 0:
            raise fail(
                f"the given cation charge {cation} {_signed(cation_charge)} and the usual "
                f"charge of {anion} ({_signed(q)}) do not balance: {a:g} × "
                f"({_signed(cation_charge)}) + {b:g} × ({_signed(q)}) = {_signed(total)}, "
                "not 0; give the anion charge too"
            )
        return IonAssignment(
            cation, cation_charge, a, anion, q, b,
            basis=f"cation charge given by the user ({cation} {_signed(cation_charge)}), "
            f"anion charge from the usual charge of {anion} ({_signed(q)})",
        )  # fmt: skip

    q = anion_charge if anion_charge is not None else usual[anion]
    p = -q * b / a
    if not _whole(p):
        raise fail(
            f"electroneutrality gives {cation} a charge of {_signed(p)}, which is not a "
            "whole number; give the charges in a charge column"
        )
    p_int = round(p)
    if not common:
        raise fail(
            f"electroneutrality gives {cation} a charge of {_signed(p_int)}, but no common "
            f"charges are known for {cation}; give the charges in a charge column"
        )
    if p_int not in common:
        raise fail(
            f"electroneutrality gives {cation} a charge of {_signed(p_int)}, not among its "
            f"common charges ({_charges_list(common)}); give the charges in a charge column"
        )
    if anion_charge is not None:
        basis = (
            f"anion charge given by the user ({anion} {_signed(q)}), cation charge from "
            "electroneutrality"
        )
    else:
        basis = (
            f"anion charge from the usual charge of {anion} ({_signed(q)}), cation charge "
            "from electroneutrality"
        )
    return IonAssignment(cation, p_int, a, anion, q, b, basis=basis)
