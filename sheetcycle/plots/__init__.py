"""Pictures of cycles: energy-level diagrams and parity plots (matplotlib, Agg only)."""

from __future__ import annotations

from sheetcycle.plots.levels import Arrow, Level, LevelDiagram, cycle_levels, draw_levels
from sheetcycle.plots.parity import parity_plot

__all__ = ["Arrow", "Level", "LevelDiagram", "cycle_levels", "draw_levels", "parity_plot"]
