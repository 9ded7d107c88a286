"""Plain-words cautions for strongly exothermic solution and reaction enthalpies.

A caution is written when the heat released passes either screening threshold, per mole
(as written) or per kilogram (of the dissolving salt, or of the reactants of the reaction as
written). The thresholds are screening values of our own (docs/cautions.md gives the
reasoning): they say "look at this before anyone scales it up", nothing more.

* Dissolution: ΔsolH ≤ −40 kJ/mol. No per-kilogram trigger by default: the salt is diluted
  in its solvent, so heat per kilogram of salt overstates the temperature rise; it is
  reported all the same.
* Reactions: ΔrH ≤ −100 kJ/mol, or ≤ −400 kJ per kg of reactants (about a 200 K adiabatic
  rise at a heat capacity of 2 kJ/(kg·K)).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import numpy.typing as npt

__all__ = [
    "REACTION",
    "SOLUTION",
    "CautionThresholds",
    "caution_for",
    "caution_mask",
    "heat_per_kg",
]

BoolArray = npt.NDArray[np.bool_]
FloatArray = npt.NDArray[np.float64]


@dataclass(frozen=True, slots=True)
class CautionThresholds:
    """Screening thresholds (negative numbers: heat released); None disables one."""

    kind: str  # "dissolution" or "reaction", used in the message
    per_mol: float | None  # kJ/mol
    per_kg: float | None  # kJ/kg
    mass_basis: str  # what the kilogram is of, for the message


SOLUTION = CautionThresholds("dissolution", -40.0, None, "of salt")
REACTION = CautionThresholds("reaction", -100.0, -400.0, "of reactants")


def heat_per_kg(
    delta_h_kj_per_mol: npt.ArrayLike, molar_mass_g_per_mol: npt.ArrayLike
) -> FloatArray:
    """kJ/kg = (kJ/mol) / (g/mol) · 1000; NaN where the molar mass is missing or not > 0."""
    dh = np.asarray(delta_h_kj_per_mol, dtype=float)
    m = np.asarray(molar_mass_g_per_mol, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(m > 0, dh / m * 1000.0, np.nan)


def caution_mask(
    delta_h_kj_per_mol: npt.ArrayLike,
    molar_mass_g_per_mol: npt.ArrayLike,
    thresholds: CautionThresholds = REACTION,
) -> BoolArray:
    """True where a caution is due (vectorized); NaN enthalpies never get one."""
    dh = np.asarray(delta_h_kj_per_mol, dtype=float)
    per_kg = heat_per_kg(dh, molar_mass_g_per_mol)
    due = np.zeros(np.broadcast_shapes(dh.shape, per_kg.shape), dtype=bool)
    if thresholds.per_mol is not None:
        due |= dh <= thresholds.per_mol
    if thresholds.per_kg is not None:
        due |= per_kg <= thresholds.per_kg  # NaN compares False
    return due & ~np.isnan(dh)


def _round(x: float) -> str:
    """Three significant figures, written without exponent: 851.5 -> '852', 3985 -> '3990'."""
    if x == 0 or not math.isfinite(x):
        return f"{x:g}"
    digits = 3 - math.floor(math.log10(abs(x))) - 1
    r = round(x, digits)
    return f"{r:.{max(digits, 0)}f}"


def caution_for(
    delta_h_kj_per_mol: float,
    molar_mass_g_per_mol: float,
    thresholds: CautionThresholds = REACTION,
) -> str | None:
    """The caution text for one value, or None when no threshold is passed."""
    if not bool(caution_mask(delta_h_kj_per_mol, molar_mass_g_per_mol, thresholds)):
        return None
    released = -float(delta_h_kj_per_mol)
    per_kg = float(heat_per_kg(delta_h_kj_per_mol, molar_mass_g_per_mol))
    amount = f"about {_round(released)} kJ per mol"
    if math.isfinite(per_kg):
        amount += f" ({_round(-per_kg)} kJ per kg {thresholds.mass_basis})"
    return (
        f"strongly exothermic {thresholds.kind}: releases {amount}; this is an estimate from "
        "tabulated data; calorimetry and a hazard assessment come before any scale-up; "
        "local codes and licensed practice govern."
    )
