"""sheetcycle: closes Born-Haber and Hess's-law cycles in thermochemistry lab workbooks.

The public surface is what ``__all__`` lists; everything else is an implementation detail.

>>> import sheetcycle
>>> rows = sheetcycle.solve_cycles(["NaCl"], formation_enthalpy=[-411.2])
>>> 780 < rows[0].values["lattice_enthalpy"].value < 795
True
"""

__version__ = "0.1.0"

from sheetcycle.api import Inspection, annotate, inspect, load_reference_file, solve_cycles
from sheetcycle.engine.born_haber import CycleSolution, CycleTerms, close_cycles
from sheetcycle.engine.lattice_models import born_lande, born_mayer, kapustinskii, volume_based
from sheetcycle.errors import (
    ChemistryError,
    FormulaSyntaxError,
    ReadError,
    SheetcycleError,
    UnitError,
    UsageError,
    WriteError,
)
from sheetcycle.io.tables import ColumnOverride
from sheetcycle.model import ComputedValue, Flag, RowResult, RunResult, Severity
from sheetcycle.pipeline import Settings

__all__ = [
    "ChemistryError",
    "ColumnOverride",
    "ComputedValue",
    "CycleSolution",
    "CycleTerms",
    "Flag",
    "FormulaSyntaxError",
    "Inspection",
    "ReadError",
    "RowResult",
    "RunResult",
    "Settings",
    "Severity",
    "SheetcycleError",
    "UnitError",
    "UsageError",
    "WriteError",
    "__version__",
    "annotate",
    "born_lande",
    "born_mayer",
    "close_cycles",
    "inspect",
    "kapustinskii",
    "load_reference_file",
    "solve_cycles",
    "volume_based",
]
