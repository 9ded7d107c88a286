"""Energy-level diagrams: the data of the cycle, and the figure read back from its artists."""

from __future__ import annotations

import io
import math
from pathlib import Path

import pytest
from defusedxml import ElementTree
from hypothesis import given, settings
from hypothesis import strategies as st
from matplotlib.colors import to_hex
from matplotlib.lines import Line2D
from matplotlib.text import Annotation

from sheetcycle.errors import UsageError
from sheetcycle.plots.levels import UNKNOWN, LevelDiagram, cycle_levels, draw_levels

# NaCl, kJ/mol, from memory of the NIST-JANAF / CODATA key values used by handbook cycle
# tables: ΔfH(NaCl,s) −411.2, ΔatH(Na) 107.3, IE1(Na) 495.8, ΔatH(Cl) 121.3 (½D(Cl2)),
# ΔegH(Cl) −348.6. Cycle lattice enthalpy 787 kJ/mol: CRC Handbook of Chemistry and Physics,
# "Lattice energies" table (from memory).
NACL = dict(
    formation_enthalpy=-411.2,
    atomization_metal=107.3,
    ionization=495.8,
    atomization_nonmetal=121.3,
    electron_gain_1=-348.6,
)
# MgO, from memory of the same sources: ΔfH −601.6, ΔatH(Mg) 147.1, IE1 + IE2(Mg)
# 737.7 + 1450.7, ΔatH(O) 249.2 (½D(O2)), ΔegH1(O) −141.0; cycle lattice enthalpy 3791
# (CRC "Lattice energies", from memory).
MGO = dict(
    formation_enthalpy=-601.6,
    atomization_metal=147.1,
    ionization=737.7 + 1450.7,
    atomization_nonmetal=249.2,
    electron_gain_1=-141.0,
    lattice_enthalpy=3791.0,
)


def nacl() -> LevelDiagram:
    return cycle_levels("NaCl", 1, 1, 1, 1, "Na", "Cl", NACL, "lattice_enthalpy")


def assert_consistent(d: LevelDiagram) -> None:
    for ar in d.arrows:
        assert d.level(ar.end).enthalpy - d.level(ar.start).enthalpy == pytest.approx(
            ar.value, abs=1e-9
        )
        assert ar.value == pytest.approx(ar.coefficient * ar.term_value, abs=1e-9)
    steps = sum(ar.value for ar in d.arrows if ar.term != "formation_enthalpy")
    formation = next(ar for ar in d.arrows if ar.term == "formation_enthalpy")
    assert steps - formation.value == pytest.approx(d.closure_residual, abs=1e-9)
    assert d.levels[0].enthalpy == 0.0


def test_nacl_levels_follow_the_handbook_terms() -> None:
    d = nacl()
    assert [(lv.name, lv.species) for lv in d.levels] == [
        ("elements", "Na(s) + ½Cl2(g)"),
        ("metal_atoms", "Na(g) + ½Cl2(g)"),
        ("cations", "Na+(g) + e− + ½Cl2(g)"),
        ("nonmetal_atoms", "Na+(g) + Cl(g) + e−"),
        ("anions", "Na+(g) + Cl−(g)"),
        ("solid", "NaCl(s)"),
    ]
    expected = [
        0.0,
        107.3,
        107.3 + 495.8,
        107.3 + 495.8 + 121.3,
        107.3 + 495.8 + 121.3 - 348.6,
        -411.2,
    ]
    assert [lv.enthalpy for lv in d.levels] == pytest.approx(expected, abs=1e-9)
    assert d.derived_value == pytest.approx(787.0, abs=1.0)  # CRC, from memory
    lattice = next(ar for ar in d.arrows if ar.term == "lattice_enthalpy")
    assert lattice.is_unknown and lattice.value == pytest.approx(-787.0, abs=1.0)
    assert [ar.term for ar in d.arrows] == [
        "atomization_metal",
        "ionization",
        "atomization_nonmetal",
        "electron_gain_1",
        "lattice_enthalpy",
        "formation_enthalpy",
    ]
    assert d.closure_residual == 0.0
    assert_consistent(d)


def test_mgo_shows_both_electron_gains_and_the_second_is_derived() -> None:
    d = cycle_levels("MgO", 1, 1, 2, 2, "Mg", "O", MGO, "electron_gain_higher")
    assert [lv.species for lv in d.levels] == [
        "Mg(s) + ½O2(g)",
        "Mg(g) + ½O2(g)",
        "Mg2+(g) + 2e− + ½O2(g)",
        "Mg2+(g) + O(g) + 2e−",
        "Mg2+(g) + O−(g) + e−",
        "Mg2+(g) + O2−(g)",
        "MgO(s)",
    ]
    by_hand = (
        MGO["lattice_enthalpy"]
        + MGO["formation_enthalpy"]
        - (
            MGO["atomization_metal"]
            + MGO["ionization"]
            + MGO["atomization_nonmetal"]
            + MGO["electron_gain_1"]
        )
    )
    assert d.derived_value == pytest.approx(by_hand, abs=1e-9)
    # published second electron gains of oxygen, all cycle-derived, spread over roughly
    # +700 to +900 kJ/mol (from memory)
    assert 700 < d.derived_value < 900
    assert d.level("solid").enthalpy == pytest.approx(-601.6, abs=1e-9)
    assert_consistent(d)


def test_mgcl2_multiplies_the_chlorine_terms_by_two() -> None:
    # MgCl2, from memory (NIST-JANAF key values): ΔfH −641.3; handbook lattice 2526
    # (CRC "Lattice energies", from memory).
    terms = dict(
        formation_enthalpy=-641.3,
        atomization_metal=147.1,
        ionization=2188.4,
        atomization_nonmetal=121.3,
        electron_gain_1=-348.6,
    )
    d = cycle_levels("MgCl2", 1, 2, 2, 1, "Mg", "Cl", terms, "lattice_enthalpy")
    assert d.levels[0].species == "Mg(s) + Cl2(g)"
    assert d.level("nonmetal_atoms").species == "Mg2+(g) + 2Cl(g) + 2e−"
    assert d.level("anions").species == "Mg2+(g) + 2Cl−(g)"
    at = next(ar for ar in d.arrows if ar.term == "atomization_nonmetal")
    assert at.value == pytest.approx(242.6) and at.symbol == "2 × ΔatH(Cl)"
    assert d.derived_value == pytest.approx(2526, abs=5)
    assert_consistent(d)


def test_a_cycle_that_does_not_close_keeps_both_routes() -> None:
    terms = dict(NACL, lattice_enthalpy=770.0)  # 17 kJ/mol short of the handbook value
    d = cycle_levels("NaCl", 1, 1, 1, 1, "Na", "Cl", terms, None)
    assert d.closure_residual == pytest.approx(787.0 - 770.0, abs=1.0)
    assert d.level("solid_from_formation").enthalpy == -411.2
    assert d.arrows[-1].end == "solid_from_formation"
    assert_consistent(d)


def test_missing_terms_and_bad_ions_are_usage_errors() -> None:
    with pytest.raises(UsageError, match="no value for 'ionization'"):
        cycle_levels(
            "NaCl",
            1,
            1,
            1,
            1,
            "Na",
            "Cl",
            {
                "formation_enthalpy": -411.2,
                "atomization_metal": 107.3,
                "atomization_nonmetal": 121.3,
                "electron_gain_1": -348.6,
            },
            "lattice_enthalpy",
        )
    with pytest.raises(UsageError, match="not neutral"):
        cycle_levels("NaCl2", 1, 2, 1, 1, "Na", "Cl", NACL, "lattice_enthalpy")
    with pytest.raises(UsageError, match="no term 'electron_gain_higher'"):
        cycle_levels("NaCl", 1, 1, 1, 1, "Na", "Cl", NACL, "electron_gain_higher")


def lines_by_gid(fig) -> dict[str, Line2D]:  # type: ignore[no-untyped-def]
    ax = fig.axes[0]
    return {ln.get_gid(): ln for ln in ax.get_lines() if (ln.get_gid() or "").startswith("level:")}


def test_drawn_levels_and_arrows_match_the_numbers() -> None:
    d = nacl()
    fig = draw_levels(d, None)
    ax = fig.axes[0]
    lines = lines_by_gid(fig)
    assert set(lines) == {f"level:{lv.name}" for lv in d.levels}
    for lv in d.levels:
        ydata = list(lines[f"level:{lv.name}"].get_ydata())
        assert ydata == pytest.approx([lv.enthalpy, lv.enthalpy], abs=1e-9)
    arrows = {t.get_gid(): t for t in ax.texts if isinstance(t, Annotation)}
    labels = {t.get_gid(): t for t in ax.texts if (t.get_gid() or "").startswith("arrow-label:")}
    for ar in d.arrows:
        ann = arrows[f"arrow:{ar.term}"]
        assert ann.xyann[1] == pytest.approx(d.level(ar.start).enthalpy)
        assert ann.xy[1] == pytest.approx(d.level(ar.end).enthalpy)
        text = labels[f"arrow-label:{ar.term}"].get_text()
        assert f"{abs(ar.value):.1f}" in text and ar.symbol in text
    unknown = labels["arrow-label:lattice_enthalpy"]
    assert "?" in unknown.get_text() and "787.0" in unknown.get_text()
    assert to_hex(unknown.get_color()) == UNKNOWN
    assert all(
        to_hex(t.get_color()) != UNKNOWN
        for g, t in labels.items()
        if g != "arrow-label:lattice_enthalpy"
    )
    species = {t.get_text() for t in ax.texts if (t.get_gid() or "").startswith("species:")}
    assert species == {lv.species for lv in d.levels}
    # the vertical axis spans every level: drawn to scale in kJ/mol
    lo, hi = ax.get_ylim()
    assert lo < -411.2 and hi > 724.4


def test_without_highlight_the_unknown_is_drawn_like_the_others() -> None:
    fig = draw_levels(nacl(), None, highlight_unknown=False)
    labels = [t for t in fig.axes[0].texts if t.get_gid() == "arrow-label:lattice_enthalpy"]
    assert "?" not in labels[0].get_text() and to_hex(labels[0].get_color()) != UNKNOWN


def test_png_and_svg_files_are_valid(tmp_path: Path) -> None:
    png, svg = tmp_path / "nacl.png", tmp_path / "nacl.svg"
    draw_levels(nacl(), str(png), "png")
    draw_levels(nacl(), str(svg), "svg")
    # PNG signature: ISO/IEC 15948 (PNG specification), section 5.2
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    root = ElementTree.fromstring(svg.read_bytes())
    assert root.tag == "{http://www.w3.org/2000/svg}svg"  # SVG 1.1 namespace (W3C)
    buf = io.BytesIO()
    draw_levels(nacl(), buf, "png")
    assert buf.getvalue()[:8] == b"\x89PNG\r\n\x1a\n"
    with pytest.raises(UsageError, match="unsupported image format"):
        draw_levels(nacl(), buf, "gif")


finite = st.floats(-3000, 3000, allow_nan=False)


@settings(max_examples=60, deadline=None)
@given(
    st.integers(1, 3),
    st.integers(1, 3),
    st.sampled_from([*NACL, "lattice_enthalpy"]),
    st.lists(finite, min_size=7, max_size=7),
)
def test_levels_are_consistent_whatever_the_numbers(
    p: int, q: int, unknown: str, vals: list[float]
) -> None:
    g = math.gcd(p, q)
    a, b = q // g, p // g
    names = [
        "formation_enthalpy",
        "lattice_enthalpy",
        "atomization_metal",
        "ionization",
        "atomization_nonmetal",
        "electron_gain_1",
        "electron_gain_higher",
    ]
    terms = dict(zip(names, vals, strict=True))
    d = cycle_levels("MX", a, b, p, q, "M", "X", terms, unknown)
    assert d.closure_residual == 0.0
    assert_consistent(d)
