"""Chemistry: formula parsing and ion assignment for binary ionic compounds."""

from __future__ import annotations

from sheetcycle.chem.elements import SYMBOLS
from sheetcycle.chem.formula import Formula, parse_formula
from sheetcycle.chem.ions import USUAL_ANION_CHARGES, IonAssignment, assign_ions

__all__ = [
    "SYMBOLS",
    "USUAL_ANION_CHARGES",
    "Formula",
    "IonAssignment",
    "assign_ions",
    "parse_formula",
]
