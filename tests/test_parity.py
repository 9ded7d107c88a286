"""Parity plot: read the points, the identity line, the band and the labels back."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from sheetcycle.plots.parity import BAND, parity_plot

# Lattice enthalpies, kJ/mol: cycle values from the CRC Handbook "Lattice energies" table and
# Kapustinskii-type estimates; all from memory, used only as plausible coordinates.
CYCLE = [787.0, 2526.0, 915.0, np.nan, 3791.0]
MODEL = [770.0, 2440.0, 830.0, 700.0, 3800.0]
LABELS = ["NaCl", "MgCl2", "AgCl", "KBr", "MgO"]
FLAGGED = [False, False, True, False, False]


def test_points_band_and_labels_match_the_inputs(tmp_path: Path) -> None:
    out = tmp_path / "parity.png"
    fig = parity_plot(CYCLE, MODEL, LABELS, FLAGGED, str(out), model_name="Kapustinskii")
    ax = fig.axes[0]
    coll = {c.get_gid(): c for c in ax.collections}
    ok = coll["points:ok"].get_offsets()
    flagged = coll["points:flagged"].get_offsets()
    # KBr has no cycle value: left out
    assert np.asarray(ok).tolist() == [[787.0, 770.0], [2526.0, 2440.0], [3791.0, 3800.0]]
    assert np.asarray(flagged).tolist() == [[915.0, 830.0]]
    names = [t.get_text() for t in ax.texts]
    assert names == ["AgCl"]
    identity = next(ln for ln in ax.get_lines() if ln.get_gid() == "identity")
    assert np.allclose(identity.get_xdata(), identity.get_ydata())
    band = coll["band"].get_paths()[0].vertices
    xs, ys = band[:, 0], band[:, 1]
    assert np.all(ys <= xs * (1 + BAND) + 1e-6) and np.all(ys >= xs * (1 - BAND) - 1e-6)
    assert BAND == 0.05
    assert "Kapustinskii" in ax.get_ylabel()
    assert out.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"  # PNG signature (ISO/IEC 15948)


def test_lengths_must_agree() -> None:
    from sheetcycle.errors import UsageError

    with pytest.raises(UsageError, match="differ in length"):
        parity_plot([1.0], [1.0, 2.0], ["a"], [False], None, model_name="m")
