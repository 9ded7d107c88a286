"""Regenerate sheetcycle/data/ionic_radii.csv.

Two kinds of rows:

* ``shannon``: effective ionic radii of Shannon, Acta Cryst. A32 (1976) 751, by element,
  charge, coordination number and spin state, taken from the tables that pymatgen-core ships
  (``Element(...).data["Shannon radii"]``, the ``ionic_radius`` field, in Å, written here in
  pm). pymatgen-core is needed only to run this script; sheetcycle never imports it.
* ``thermochemical``: thermochemical radii of polyatomic ions for use with the Kapustinskii
  equation. The list below is typed in, each row with its own source text; values recalled
  rather than looked up say "from memory".

Run from the repository root:  python scripts/make_ionic_radii.py
"""

from __future__ import annotations

import csv
import sys
from pathlib import Path

OUT = Path(__file__).resolve().parents[1] / "sheetcycle" / "data" / "ionic_radii.csv"

ROMAN = {
    "I": 1, "II": 2, "III": 3, "IV": 4, "V": 5, "VI": 6, "VII": 7, "VIII": 8,
    "IX": 9, "X": 10, "XI": 11, "XII": 12, "XIV": 14,
}  # fmt: skip
GEOMETRY = {"SQ": "square planar", "PY": "pyramidal"}

_JENKINS_CRC = "Jenkins & Roobottom, CRC Handbook of Chemistry and Physics, 'Lattice Energies'"
_ROOBOTTOM = "Roobottom, Jenkins, Passmore & Glasser, J. Chem. Educ. 76 (1999) 1570"
# (ion, charge, radius in pm, source). Radii in nm in the sources; x1000 here.
THERMOCHEMICAL: list[tuple[str, int, float, str]] = [
    ("NH4", 1, 136.0, f"{_JENKINS_CRC}, Table 2 worked example"),
    ("HF2", -1, 172.0, f"{_JENKINS_CRC}, Table 2 worked example"),
    ("OH", -1, 133.0, f"{_ROOBOTTOM}, from memory"),
    ("NO3", -1, 179.0, f"{_ROOBOTTOM}, from memory"),
    ("CN", -1, 191.0, f"{_ROOBOTTOM}, from memory"),
    ("ClO4", -1, 225.0, f"{_ROOBOTTOM}, from memory"),
    ("CO3", -2, 178.0, f"{_ROOBOTTOM}, from memory"),
    ("SO4", -2, 218.0, f"{_ROOBOTTOM}, from memory"),
]

HEADER = ["kind", "element", "charge", "coordination", "geometry", "spin", "radius_pm", "source"]


def _coordination(label: str) -> tuple[int, str]:
    for suffix, name in GEOMETRY.items():
        if label.endswith(suffix):
            return ROMAN[label[: -len(suffix)]], name
    return ROMAN[label], ""


def shannon_rows() -> list[list[str]]:
    from importlib.metadata import version

    from pymatgen.core.periodic_table import Element

    source = f"Shannon, Acta Cryst. A32 (1976) 751, via pymatgen-core {version('pymatgen-core')}"
    rows: list[list[str]] = []
    for el in Element:
        table = el.data.get("Shannon radii") or {}
        for charge, by_cn in table.items():
            if not charge.lstrip("-").isdigit():
                # pymatgen-core carries one Eu entry with an empty charge key; a radius
                # without its oxidation state cannot be used, so it is left out.
                continue
            for label, by_spin in by_cn.items():
                cn, geometry = _coordination(label)
                for spin, radii in by_spin.items():
                    radius_pm = round(float(radii["ionic_radius"]) * 100.0, 1)
                    rows.append(
                        [
                            "shannon",
                            el.symbol,
                            str(int(charge)),
                            str(cn),
                            geometry,
                            spin.lower(),
                            f"{radius_pm:g}",
                            source,
                        ]
                    )
    rows.sort(key=lambda r: (r[1], int(r[2]), int(r[3]), r[4], r[5]))
    return rows


def thermochemical_rows() -> list[list[str]]:
    return [
        ["thermochemical", ion, str(charge), "", "", "", f"{r:g}", src]
        for ion, charge, r, src in THERMOCHEMICAL
    ]


def main() -> int:
    rows = shannon_rows() + thermochemical_rows()
    with OUT.open("w", newline="", encoding="utf-8") as fh:
        writer = csv.writer(fh, lineterminator="\n")
        writer.writerow(HEADER)
        writer.writerows(rows)
    print(f"wrote {len(rows)} rows to {OUT}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
