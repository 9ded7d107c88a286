"""Parity plot: lattice enthalpy from the cycle against a theoretical (ionic-model) value."""

from __future__ import annotations

from collections.abc import Sequence
from typing import IO

import numpy as np
import numpy.typing as npt
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure

from sheetcycle.errors import UsageError
from sheetcycle.plots.levels import ENDOTHERMIC, GRID, INK, MUTED, UNKNOWN

__all__ = ["BAND", "parity_plot"]

#: Half-width of the agreement band around y = x (a fraction of the cycle value).
BAND = 0.05


def parity_plot(
    cycle_values: npt.ArrayLike,
    model_values: npt.ArrayLike,
    labels: Sequence[str],
    flagged_mask: npt.ArrayLike,
    path: str | IO[bytes] | None,
    *,
    model_name: str,
    format: str = "png",
) -> Figure:
    """Cycle lattice enthalpy (x) against the model's (y), y = x, a ±5 % band, flags named.

    Rows where either value is NaN are left out. Unflagged points carry the gid
    ``points:ok``, flagged ones ``points:flagged``; each flagged point is labelled.
    Built without pyplot (Agg canvas): no window, nothing to close.
    """
    x = np.asarray(cycle_values, dtype=float).reshape(-1)
    y = np.asarray(model_values, dtype=float).reshape(-1)
    flagged = np.asarray(flagged_mask, dtype=bool).reshape(-1)
    if not (x.shape == y.shape == flagged.shape) or len(labels) != x.shape[0]:
        raise UsageError(
            "parity plot inputs differ in length",
            expected="one cycle value, model value, label and flag per compound",
            found=(x.shape[0], y.shape[0], len(labels), flagged.shape[0]),
        )
    if format not in ("png", "svg"):
        raise UsageError("unsupported image format", expected="'png' or 'svg'", found=format)
    ok = np.isfinite(x) & np.isfinite(y)
    fig = Figure(figsize=(6.5, 6.5), layout="constrained")
    FigureCanvasAgg(fig)
    ax = fig.add_subplot()
    both = np.concatenate([x[ok], y[ok]])
    lo, hi = (float(both.min()), float(both.max())) if both.size else (0.0, 1.0)
    margin = 0.08 * (hi - lo or abs(hi) or 1.0)
    lo, hi = lo - margin, hi + margin
    line = np.linspace(lo, hi, 2)
    ax.fill_between(
        line,
        line * (1 - BAND),
        line * (1 + BAND),
        color=GRID,
        lw=0,
        label=f"±{BAND:.0%} of the cycle value",
        gid="band",
    )
    ax.plot(line, line, color=MUTED, lw=1.0, ls="--", label="y = x", gid="identity")
    plain = ok & ~flagged
    marked = ok & flagged
    ax.scatter(
        x[plain],
        y[plain],
        s=28,
        color=ENDOTHERMIC,
        alpha=0.85,
        edgecolors="white",
        linewidths=0.5,
        label="compounds",
        gid="points:ok",
    )
    ax.scatter(
        x[marked],
        y[marked],
        s=46,
        marker="D",
        color=UNKNOWN,
        edgecolors="white",
        linewidths=0.5,
        label="flagged",
        gid="points:flagged",
    )
    for i in np.nonzero(marked)[0].tolist():
        ax.annotate(
            labels[i],
            (x[i], y[i]),
            xytext=(5, 5),
            textcoords="offset points",
            fontsize=8.5,
            color=UNKNOWN,
            gid=f"label:{i}",
        )
    ax.set_xlim(lo, hi)
    ax.set_ylim(lo, hi)
    ax.set_aspect("equal")
    ax.set_xlabel("lattice enthalpy from the Born-Haber cycle (kJ/mol)", color=MUTED)
    ax.set_ylabel(f"lattice energy, {model_name} (kJ/mol)", color=MUTED)
    ax.set_title(f"Cycle against {model_name}", loc="left", color=INK)
    ax.grid(color=GRID, lw=0.6)
    ax.set_axisbelow(True)
    ax.tick_params(colors=MUTED, labelsize=9)
    for side in ("top", "right"):
        ax.spines[side].set_visible(False)
    ax.legend(frameon=False, fontsize=8.5, loc="upper left")
    if path is not None:
        fig.savefig(path, format=format, dpi=150)
    return fig
