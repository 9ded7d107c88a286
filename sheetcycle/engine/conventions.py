"""Sign conventions: decide a column's convention, convert it to the internal one, flag misfits.

Internal conventions (what the engine's arrays always hold):

* lattice enthalpy: dissociation, MaXb(s) → gaseous ions, positive;
* electron gain: thermochemical electron-gain enthalpy ΔegH, negative when energy is released
  (Cl: ≈ −349 kJ/mol), positive for a second electron gain (O⁻ → O²⁻);
* ionization energies and atomization enthalpies: positive, always.

A column's convention comes from its header words where they say it, otherwise from the signs
of its values. Cells that contradict the column's convention are returned as codes so that
the caller can flag them cell by cell; nothing here raises for bad data.
"""

from __future__ import annotations

from dataclasses import dataclass
from enum import IntEnum

import numpy as np
import numpy.typing as npt

__all__ = [
    "CellIssue",
    "ColumnConvention",
    "electron_gain_from_column",
    "lattice_from_column",
    "positive_quantity",
]

FloatArray = npt.NDArray[np.float64]


class CellIssue(IntEnum):
    """Per-cell outcome of a convention check (0 = fine)."""

    OK = 0
    MIXED_SIGN = 1  # sign disagrees with the rest of the column; magnitude used
    IMPOSSIBLE = 2  # sign impossible under the column's stated convention; value not used


@dataclass(frozen=True)
class ColumnConvention:
    """The convention a column was read in, how it was decided, and the converted values."""

    convention: str  # e.g. "dissociation", "formation", "released", "gain"
    decided_by: str  # "header" or "signs" (plain words for messages)
    values: FloatArray  # converted to the internal convention; NaN where not usable
    issues: npt.NDArray[np.int8]  # CellIssue per cell
    mixed: bool  # True when the column holds both signs
    contradicts_header: bool = False  # the signs overruled the header's convention word


def _signs(values: FloatArray) -> tuple[int, int]:
    finite = values[np.isfinite(values) & (values != 0)]
    return int((finite > 0).sum()), int((finite < 0).sum())


def lattice_from_column(values: FloatArray, hint: str | None) -> ColumnConvention:
    """Read a lattice-enthalpy column and return dissociation-convention values.

    With a header that names the convention, a value of the impossible sign (a positive
    lattice enthalpy in the formation convention, a negative one in the dissociation
    convention) is not used. Without one, the majority sign decides; the magnitude of a
    minority-sign value is still unambiguous, so it is used and flagged as a mixed column.
    """
    values = np.asarray(values, dtype=float)
    pos, neg = _signs(values)
    issues = np.zeros(values.shape, dtype=np.int8)
    if hint in ("dissociation", "formation"):
        convention, decided_by = hint, "header"
        wrong = values > 0 if hint == "formation" else values < 0
        issues[wrong] = CellIssue.IMPOSSIBLE
        out = np.where(wrong, np.nan, np.abs(values))
        return ColumnConvention(convention, decided_by, out, issues, pos > 0 and neg > 0)
    convention = "formation" if neg > pos else "dissociation"
    minority = values > 0 if convention == "formation" else values < 0
    issues[minority] = CellIssue.MIXED_SIGN
    return ColumnConvention(convention, "signs", np.abs(values), issues, pos > 0 and neg > 0)


def electron_gain_from_column(values: FloatArray, hint: str | None, index: int) -> ColumnConvention:
    """Read an electron-affinity / electron-gain column into electron-gain enthalpies.

    ``index`` 1 is the first electron gain (X → X⁻), 2 the second (X⁻ → X²⁻).

    * First gain: under "released" (physics tables, EA of Cl = +349 kJ/mol) the gain
      enthalpy is −EA; under "gain" it is the value itself. The majority sign decides
      (positive majority → released), because a header such as "EA" is often used for
      either; the header word only breaks a tie, and a contradiction is reported. Minority
      cells are flagged as mixed but still converted by the column's convention.
    * Second gain: always endothermic (the second electron is repelled by the anion), so the
      gain enthalpy is +|value| whatever the header says; a value whose sign contradicts a
      stated convention is flagged as mixed.
    """
    values = np.asarray(values, dtype=float)
    pos, neg = _signs(values)
    issues = np.zeros(values.shape, dtype=np.int8)
    mixed = pos > 0 and neg > 0
    if index >= 2:
        if hint in ("released", "gain"):
            convention, decided_by = hint, "header"
        else:
            convention, decided_by = ("released" if neg > pos else "gain"), "signs"
        wrong = values > 0 if convention == "released" else values < 0
        issues[wrong] = CellIssue.MIXED_SIGN
        return ColumnConvention(convention, decided_by, np.abs(values), issues, mixed)
    # A bare "EA" header names a quantity more than a convention, and the first electron
    # gain of nearly every element of a salt is exothermic: the signs are the better witness.
    if pos != neg:
        convention, decided_by = ("gain" if neg > pos else "released"), "signs"
    else:
        convention, decided_by = (hint or "released"), ("header" if hint else "default")
    contradicts = hint in ("released", "gain") and hint != convention
    minority = values < 0 if convention == "released" else values > 0
    issues[minority] = CellIssue.MIXED_SIGN
    out = -values if convention == "released" else values.copy()
    return ColumnConvention(convention, decided_by, out, issues, mixed, contradicts)


def positive_quantity(values: FloatArray) -> tuple[FloatArray, npt.NDArray[np.int8]]:
    """Ionization energies, atomization and bond enthalpies: a negative value is impossible.

    Returns the values with impossible ones set to NaN, and the per-cell issues.
    """
    values = np.asarray(values, dtype=float)
    bad = values < 0
    issues = np.where(bad, CellIssue.IMPOSSIBLE, CellIssue.OK).astype(np.int8)
    return np.where(bad, np.nan, values), issues
