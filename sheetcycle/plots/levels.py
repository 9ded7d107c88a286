"""Enthalpy level diagrams of Born-Haber cycles.

:func:`cycle_levels` turns one row's cycle terms into a :class:`LevelDiagram`: pure data (the
levels, their enthalpies relative to the elements in their standard states, the species at
each level, and the arrows between them), no matplotlib. :func:`draw_levels` draws it to
scale and saves it as PNG or SVG.

Steps, in order: atomize the metal, ionize it (IE1 + … + IEp as one arrow, because the cycle
engine carries the ionization energies as one summed term), atomize the non-metal, first
electron gain, the higher electron gains together (only for anions of charge 2− or more),
the lattice step down to the solid (ions → solid, i.e. −ΔH_L with ΔH_L in the dissociation
convention), and the formation arrow straight from the elements to the solid.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass
from typing import IO

import numpy as np
from matplotlib.axes import Axes
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure

from sheetcycle.engine.born_haber import TERMS, cycle_coefficients
from sheetcycle.errors import UsageError

__all__ = ["Arrow", "Level", "LevelDiagram", "cycle_levels", "draw_levels"]

# Standard states at 298.15 K and 1 bar (common practice, no source). Everything not listed
# is written as a monatomic solid, X(s).
_DIATOMIC_GAS = frozenset({"H", "N", "O", "F", "Cl"})
_DIATOMIC_CONDENSED = {"Br": "l", "I": "s"}
_LIQUID = frozenset({"Hg"})

#: Colours of the drawing (our own palette).
INK = "#1f2a36"
MUTED = "#56657a"
ENDOTHERMIC = "#b5523b"
EXOTHERMIC = "#2e7d6b"
UNKNOWN = "#7b3fa0"
GRID = "#e4e8ee"


@dataclass(frozen=True)
class Level:
    """One enthalpy level: kJ/mol relative to the elements in their standard states."""

    name: str
    enthalpy: float
    species: str


@dataclass(frozen=True)
class Arrow:
    """One step of the cycle, from one level to another.

    ``value`` is the enthalpy change of the step (end − start, kJ/mol of formula unit);
    ``term_value`` the cycle term it comes from (per atom or ion, as the engine holds it:
    the lattice term in the dissociation convention) and ``coefficient`` its multiplier,
    so that value = coefficient · term_value.
    """

    start: str
    end: str
    term: str
    symbol: str
    value: float
    term_value: float
    coefficient: float
    is_unknown: bool


@dataclass(frozen=True)
class LevelDiagram:
    """The levels and arrows of one compound's cycle.

    ``closure_residual`` is (solid reached step by step) − (ΔfH as given), kJ/mol: 0 when a
    term was derived. When it is not 0 the formation arrow ends on a level of its own,
    ``solid_from_formation``, so both routes are visible.
    """

    formula: str
    levels: tuple[Level, ...]
    arrows: tuple[Arrow, ...]
    unknown: str | None
    derived_value: float | None
    closure_residual: float

    def level(self, name: str) -> Level:
        for lv in self.levels:
            if lv.name == name:
                return lv
        raise KeyError(name)


def _coef(x: float) -> str:
    """A stoichiometric prefix: '' for 1, '2', '½', '³⁄₂'."""
    if x == 1:
        return ""
    if x == 0.5:
        return "½"
    if float(x).is_integer():
        return f"{int(x)}"
    twice = 2 * x
    if float(twice).is_integer():
        sup = str(int(twice)).translate(str.maketrans("0123456789", "⁰¹²³⁴⁵⁶⁷⁸⁹"))
        return f"{sup}⁄₂"
    return f"{x:g} "


def _charge(z: int, sign: str) -> str:
    return sign if z == 1 else f"{z}{sign}"


def _electrons(n: float) -> str:
    return f"{_coef(n)}e−"


def _element_standard(symbol: str, n_atoms: float) -> str:
    if symbol in _DIATOMIC_GAS:
        return f"{_coef(n_atoms / 2)}{symbol}2(g)"
    if symbol in _DIATOMIC_CONDENSED:
        return f"{_coef(n_atoms / 2)}{symbol}2({_DIATOMIC_CONDENSED[symbol]})"
    state = "l" if symbol in _LIQUID else "s"
    return f"{_coef(n_atoms)}{symbol}({state})"


def _join(*parts: str) -> str:
    return " + ".join(parts)


def cycle_levels(
    formula_label: str,
    a: int,
    b: int,
    p: int,
    q: int,
    cation: str,
    anion: str,
    terms: Mapping[str, float],
    unknown: str | None,
) -> LevelDiagram:
    """The level diagram of the cycle of M_a X_b with ions M^p+ and X^q−.

    ``terms`` maps names from :data:`~sheetcycle.engine.born_haber.TERMS` to kJ/mol values
    as the engine holds them (per atom or ion; lattice enthalpy in the dissociation
    convention, electron-gain enthalpies with the thermochemical sign). ``unknown`` names
    the term to derive from the others (its value in ``terms``, if any, is not used); with
    ``unknown=None`` every term must be given and the closure residual is recorded.
    """
    if min(a, b, p, q) < 1 or a * p != b * q:
        raise UsageError(
            f"cannot draw the cycle of {formula_label}: the ions are not neutral",
            expected="positive integers with a·p = b·q",
            found=(a, b, p, q),
        )
    if unknown is not None and unknown not in TERMS:
        raise UsageError("unknown term name", expected=f"one of {TERMS}", found=unknown)
    coefs = dict(
        zip(
            TERMS,
            cycle_coefficients(np.array([a], float), np.array([b], float), np.array([q], float))[0],
            strict=True,
        )
    )
    needed = [t for t in TERMS if coefs[t] != 0.0]
    if unknown is not None and unknown not in needed:
        raise UsageError(
            f"the cycle of {formula_label} has no term '{unknown}'",
            expected=f"one of {needed}",
            found=unknown,
        )
    values = {t: float(terms.get(t, math.nan)) for t in needed}
    coefs = {t: float(c) for t, c in coefs.items()}
    absent = [t for t in needed if t != unknown and not math.isfinite(values[t])]
    if absent:
        raise UsageError(
            f"cannot draw the cycle of {formula_label}: no value for "
            + ", ".join(map(repr, absent)),
            expected="every term but the unknown",
            found=sorted(k for k, v in terms.items() if math.isfinite(float(v))),
        )
    derived: float | None = None
    if unknown is not None:
        rest = sum(coefs[t] * values[t] for t in needed if t != unknown)
        derived = float(-rest / coefs[unknown])
        values[unknown] = derived

    m_ion = f"{_coef(a)}{cation}{_charge(p, '+')}(g)"
    x_std = _element_standard(anion, b)
    electrons = a * p
    step = [
        ("elements", _join(_element_standard(cation, a), x_std), None),
        ("metal_atoms", _join(f"{_coef(a)}{cation}(g)", x_std), "atomization_metal"),
        ("cations", _join(m_ion, _electrons(electrons), x_std), "ionization"),
        (
            "nonmetal_atoms",
            _join(m_ion, f"{_coef(b)}{anion}(g)", _electrons(electrons)),
            "atomization_nonmetal",
        ),
    ]
    if q == 1:
        step.append(("anions", _join(m_ion, f"{_coef(b)}{anion}−(g)"), "electron_gain_1"))
    else:
        step.append(
            (
                "anions_1",
                _join(m_ion, f"{_coef(b)}{anion}−(g)", _electrons(b * (q - 1))),
                "electron_gain_1",
            )
        )
        step.append(
            (
                "anions",
                _join(m_ion, f"{_coef(b)}{anion}{_charge(q, '−')}(g)"),
                "electron_gain_higher",
            )
        )

    symbols = _symbols(formula_label, a, b, p, q, cation, anion)
    levels: list[Level] = []
    arrows: list[Arrow] = []
    h = 0.0
    for name, species, term in step:
        if term is not None:
            dv = coefs[term] * values[term]
            arrows.append(
                Arrow(
                    levels[-1].name,
                    name,
                    term,
                    symbols[term],
                    float(dv),
                    values[term],
                    float(coefs[term]),
                    term == unknown,
                )
            )
            h += dv
        levels.append(Level(name, float(h), species))
    lattice = values["lattice_enthalpy"]
    solid_h = float(h - lattice)
    levels.append(Level("solid", solid_h, f"{formula_label}(s)"))
    arrows.append(
        Arrow(
            "anions",
            "solid",
            "lattice_enthalpy",
            symbols["lattice_enthalpy"],
            -lattice,
            lattice,
            -1.0,
            unknown == "lattice_enthalpy",
        )
    )
    formation = values["formation_enthalpy"]
    residual = 0.0 if unknown is not None else solid_h - formation
    scale = max(1.0, *(abs(v) for v in values.values()))
    end = "solid"
    if abs(residual) > 1e-9 * scale:
        end = "solid_from_formation"
        levels.append(Level(end, formation, f"{formula_label}(s) from ΔfH"))
    arrows.append(
        Arrow(
            "elements",
            end,
            "formation_enthalpy",
            symbols["formation_enthalpy"],
            formation,
            formation,
            1.0,
            unknown == "formation_enthalpy",
        )
    )
    return LevelDiagram(formula_label, tuple(levels), tuple(arrows), unknown, derived, residual)


def _symbols(
    formula: str, a: int, b: int, p: int, q: int, cation: str, anion: str
) -> dict[str, str]:
    def times(n: int, text: str) -> str:
        return text if n == 1 else f"{n} × {text}"

    ie = "IE1" if p == 1 else ("IE1 + IE2" if p == 2 else f"IE1 + … + IE{p}")
    eg = "ΔegH2" if q == 2 else f"ΔegH2 + … + ΔegH{q}"
    return {
        "atomization_metal": times(a, f"ΔatH({cation})"),
        "ionization": times(a, f"{ie}({cation})" if p == 1 else f"[{ie}]({cation})"),
        "atomization_nonmetal": times(b, f"ΔatH({anion})"),
        "electron_gain_1": times(b, f"ΔegH1({anion})"),
        "electron_gain_higher": times(b, f"{eg}({anion})"),
        "lattice_enthalpy": f"−ΔH_L({formula}), ions → solid",
        "formation_enthalpy": f"ΔfH({formula})",
    }


# --- drawing ------------------------------------------------------------------------------

_FIRST_ARROW = 1.6  # x of the first step arrow
_STEP = 1.9  # horizontal distance between step arrows
_OVERHANG = 0.18  # how far a level line runs past its arrows
_SHORT = 0.07  # arrows shorter than this fraction of the height get their label outside


def _fmt(value: float) -> str:
    return f"{value:+.1f} kJ/mol".replace("-", "−")


def _layout(diagram: LevelDiagram) -> tuple[dict[str, tuple[float, float]], dict[str, float]]:
    """x extent of every level line and x of every arrow (a staircase, left to right)."""
    steps = [lv.name for lv in diagram.levels if not lv.name.startswith("solid")]
    arrow_x = {
        ar.start: _FIRST_ARROW + i * _STEP
        for i, ar in enumerate(ar for ar in diagram.arrows if ar.term != "formation_enthalpy")
    }
    spans: dict[str, tuple[float, float]] = {}
    prev = 0.0 + _OVERHANG
    for name in steps:
        spans[name] = (prev - _OVERHANG, arrow_x[name] + _OVERHANG)
        prev = arrow_x[name]
    last = arrow_x[steps[-1]]
    spans["solid"] = (-0.2, last + 0.6)
    spans["solid_from_formation"] = (-0.2, 1.0)
    xs = {
        ar.term: (0.35 if ar.term == "formation_enthalpy" else arrow_x[ar.start])
        for ar in diagram.arrows
    }
    return spans, xs


def draw_levels(
    diagram: LevelDiagram,
    path_or_buffer: str | IO[bytes] | None,
    format: str = "png",
    *,
    highlight_unknown: bool = True,
) -> Figure:
    """Draw ``diagram`` to scale and save it (PNG or SVG); return the Figure.

    The figure is built without pyplot (on an Agg canvas), so no window opens and nothing
    stays registered after saving: there is no pyplot figure to close.
    ``path_or_buffer=None`` only builds the figure. Each level line carries the gid
    ``level:<name>``, each arrow ``arrow:<term>`` and its label ``arrow-label:<term>``, so
    the drawing can be read back.
    """
    if format not in ("png", "svg"):
        raise UsageError("unsupported image format", expected="'png' or 'svg'", found=format)
    spans, xs = _layout(diagram)
    right = max(b for _, b in spans.values())
    fig = Figure(figsize=(max(8.0, 0.95 * (right + 2.6)), 7.5), layout="constrained")
    FigureCanvasAgg(fig)
    ax = fig.add_subplot()
    ys = [lv.enthalpy for lv in diagram.levels]
    span_y = max(ys) - min(ys) or 1.0
    pad = 0.012 * span_y

    for lv in diagram.levels:
        xa, xb = spans[lv.name]
        ax.plot(
            [xa, xb],
            [lv.enthalpy, lv.enthalpy],
            color=INK,
            lw=2.2,
            solid_capstyle="butt",
            ls="--" if lv.name == "solid_from_formation" else "-",
            gid=f"level:{lv.name}",
        )
        if lv.name.startswith("solid"):
            ax.text(
                xb - 0.05,
                lv.enthalpy - pad,
                lv.species,
                ha="right",
                va="top",
                fontsize=9,
                color=INK,
                fontweight="bold",
                gid=f"species:{lv.name}",
            )
        else:
            ax.text(
                (xa + xb) / 2,
                lv.enthalpy + pad,
                lv.species,
                ha="center",
                va="bottom",
                fontsize=8.5,
                color=INK,
                gid=f"species:{lv.name}",
            )

    for ar in diagram.arrows:
        y0 = diagram.level(ar.start).enthalpy
        y1 = diagram.level(ar.end).enthalpy
        x = xs[ar.term]
        unknown = highlight_unknown and ar.is_unknown
        colour = UNKNOWN if unknown else (ENDOTHERMIC if ar.value > 0 else EXOTHERMIC)
        ax.annotate(
            "",
            xy=(x, y1),
            xytext=(x, y0),
            gid=f"arrow:{ar.term}",
            arrowprops=dict(
                arrowstyle="-|>,head_length=0.6,head_width=0.3",
                color=colour,
                lw=2.4 if unknown else 1.6,
                ls="--" if unknown else "-",
                shrinkA=0,
                shrinkB=0,
            ),
        )
        text = f"{ar.symbol}\n{_fmt(ar.value)}"
        if unknown:
            text += "  ? derived"
        if abs(y1 - y0) >= _SHORT * span_y:
            where, va = (y0 + y1) / 2, "center"
        else:  # too short to hold its label: put it under the lower level
            where, va = min(y0, y1) - 2 * pad, "top"
        ax.text(
            x + 0.08,
            where,
            text,
            ha="left",
            va=va,
            fontsize=8.5,
            color=colour,
            fontweight="bold" if unknown else "normal",
            gid=f"arrow-label:{ar.term}",
            bbox=dict(boxstyle="round,pad=0.25", fc="white", ec="none", alpha=0.85),
        )

    if diagram.closure_residual != 0.0:
        ax.text(
            1.1,
            diagram.level("solid_from_formation").enthalpy,
            f"closure residual {_fmt(diagram.closure_residual)}",
            ha="left",
            va="center",
            fontsize=8.5,
            color=UNKNOWN,
            gid="closure-residual",
        )

    ax.set_xlim(-0.5, right + 2.0)
    ax.set_ylim(min(ys) - 0.09 * span_y, max(ys) + 0.08 * span_y)
    ax.set_xticks([])
    ax.set_ylabel("enthalpy relative to the elements in their standard states (kJ/mol)")
    title = f"Born-Haber cycle of {diagram.formula}"
    if diagram.unknown is not None:
        title += f" — derived: {diagram.unknown.replace('_', ' ')}"
    ax.set_title(title, loc="left", fontsize=12, color=INK)
    _style(ax)
    if path_or_buffer is not None:
        fig.savefig(path_or_buffer, format=format, dpi=150)
    return fig


def _style(ax: Axes) -> None:
    for side in ("top", "right", "bottom"):
        ax.spines[side].set_visible(False)
    ax.spines["left"].set_color(MUTED)
    ax.tick_params(axis="y", colors=MUTED, labelsize=9)
    ax.yaxis.label.set_color(MUTED)
    ax.grid(axis="y", color=GRID, lw=0.8)
    ax.set_axisbelow(True)
