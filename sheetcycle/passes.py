"""The registry of passes that run after every compound table's cycles are closed.

Data as data: each kind of further work (theoretical lattice energies, solution enthalpies,
reactions, reconciliation …) is one function in its own module, listed here in the order it
runs. A table pass gets one :class:`~sheetcycle.pipeline.TableContext` and adds values and
flags to its rows; a workbook pass gets the :class:`~sheetcycle.pipeline.WorkbookContext`
and returns any new rows (for tables that are not compound tables, such as reactions).
"""

from __future__ import annotations

from collections.abc import Callable
from typing import TYPE_CHECKING

if TYPE_CHECKING:
    from sheetcycle.model import RowResult
    from sheetcycle.pipeline import TableContext, WorkbookContext

__all__ = ["TABLE_PASSES", "WORKBOOK_PASSES"]

TABLE_PASSES: list[Callable[[TableContext], None]] = []
WORKBOOK_PASSES: list[Callable[[WorkbookContext], list[RowResult]]] = []


def _solution(ctx: TableContext) -> None:
    from sheetcycle.solution_pass import solution_pass

    solution_pass(ctx)


TABLE_PASSES.append(_solution)


def _reactions(ctx: WorkbookContext) -> list[RowResult]:
    from sheetcycle.reaction_pass import reaction_pass

    return reaction_pass(ctx)


WORKBOOK_PASSES.append(_reactions)


def _user_cycles(ctx: WorkbookContext) -> list[RowResult]:
    from sheetcycle.cycle_pass import cycle_pass

    return cycle_pass(ctx)


WORKBOOK_PASSES.append(_user_cycles)


def _theory(ctx: TableContext) -> None:
    __import__("sheetcycle.theory").theory.theory_pass(ctx)


TABLE_PASSES.append(_theory)


def _reconcile(ctx: WorkbookContext) -> list[RowResult]:
    if not ctx.settings.reconcile:
        return []  # without importing scipy (a second of start-up)
    from sheetcycle.reconcile_pass import reconcile_pass

    return reconcile_pass(ctx)


WORKBOOK_PASSES.append(_reconcile)  # only with Settings.reconcile
