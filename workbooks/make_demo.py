"""Build workbooks/demo_salts.xlsx, the bundled demo workbook.

The scenario is our own and every number in it is invented for the demonstration: a small
(fictional) kiln-works laboratory screening salts for pigments and thermal storage keeps its
enthalpy data the way lab workbooks usually look: a title above the table, units in the
headers, an uncertainty column, notes beside the data, a sheet of values typed per element,
an older sheet in kcal/mol, and the usual slips for sheetcycle to catch.

Run: python workbooks/make_demo.py  (rewrites the file deterministically)
"""

from __future__ import annotations

import datetime as dt
from pathlib import Path

import xlsxwriter

OUT = Path(__file__).with_name("demo_salts.xlsx")

ABOUT = [
    "Larkspur Kiln Works — salt screening notebook (DEMO)",
    "",
    "This workbook is an invented example made for sheetcycle's demonstration.",
    "The laboratory, the people and every number in it are fictional. The values are",
    "only roughly like real ones, some are wrong on purpose, and none may be used for",
    "any real purpose. Take real data from evaluated compilations.",
    "",
    "What it shows: a compound table with a title above the header, units in the header,",
    "an uncertainty column and notes; a sheet of values typed per element; an older",
    "sheet in kcal/mol; and slips that sheetcycle flags (a value in eV where kJ/mol",
    "is stated, an electron affinity typed with the other sign convention, a blank",
    "formation enthalpy, a mixed-valence oxide, a lattice value that does not close).",
]

# formula, state, ΔfH (kJ/mol), ±, literature lattice enthalpy (kJ/mol, dissociation), note
SALTS: list[tuple[str, str, object, object, object, str]] = [
    ("NaCl", "s", -411.0, 0.2, 787.0, "batch K-12, glaze flux"),
    ("KCl", "s", -436.9, 0.3, None, "thermal-storage candidate"),
    ("LiF", "s", -616.5, 0.8, 1037.0, ""),
    ("KBr", "s", -393.6, 0.4, None, ""),
    ("CsI", "s", -346.7, 0.8, None, ""),
    ("MgO", "s", -601.8, 0.3, None, "refractory lining"),
    ("CaO", "s", -635.0, 0.9, None, ""),
    ("CaF2", "s", -1228.5, 2.0, 2630.0, ""),
    ("MgCl2", "s", -641.5, 0.8, 2526.0, ""),
    ("Al2O3", "s", -1675.5, 1.3, None, "corundum grit"),
    ("FeCl3", "s", -399.6, 2.0, None, "pigment precursor"),
    ("CuCl", "s", -137.3, 1.0, 996.0, "colourant trial"),
    ("AgCl", "s", -127.1, 0.2, 915.0, ""),
    ("ZnS", "s", "=-49.2*4.184", 3.0, None, "converted from kcal/mol by a cell formula"),
    ("BaCl2", "s", None, None, 2056.0, "formation enthalpy still to be looked up"),
    ("CaCl2", "s", -795.6, 1.0, 1485.0, "lit. value copied from an old report"),
    ("Fe3O4", "s", -1118.0, 3.0, None, "magnetite: mixed valence"),
    ("SrO", "s", "n/a", None, None, "not measured yet"),
]


def build(path: Path = OUT) -> Path:
    wb = xlsxwriter.Workbook(str(path), {"strings_to_numbers": False})
    wb.set_properties(
        {
            "title": "Larkspur Kiln Works salt screening (invented demo data)",
            "author": "sheetcycle demo",
            "created": dt.datetime(2026, 1, 1),
        }
    )
    bold = wb.add_format({"bold": True})
    title = wb.add_format({"bold": True, "font_size": 14})
    head = wb.add_format({"bold": True, "bg_color": "#DDE4EE", "border": 1, "text_wrap": True})
    num = wb.add_format({"num_format": "0.0"})

    about = wb.add_worksheet("About")
    about.set_column(0, 0, 90)
    for r, line in enumerate(ABOUT):
        about.write_string(r, 0, line, title if r == 0 else None)

    ws = wb.add_worksheet("Salts")
    ws.write_string(
        0, 0, "Salt screening — formation and lattice data (invented demo values)", title
    )
    ws.write_string(1, 0, "Compiled by the (fictional) analytical group; values at 298.15 K")
    headers = [
        "Compound",
        "State",
        "ΔfH° / kJ mol⁻¹",
        "±",
        "Lattice enthalpy (lit.) / kJ mol⁻¹",
        "Notes",
    ]
    for c, h in enumerate(headers):
        ws.write_string(3, c, h, head)
    for r, (f, state, dfh, unc, lat, note) in enumerate(SALTS, start=4):
        ws.write_string(r, 0, f)
        ws.write_string(r, 1, state)
        for c, v in ((2, dfh), (3, unc), (4, lat)):
            if isinstance(v, str) and v.startswith("="):
                # xlsxwriter caches 0 for a formula: the trap sheetcycle must not fall into
                ws.write_formula(r, c, v, num)
            elif isinstance(v, str):
                ws.write_string(r, c, v)
            elif v is not None:
                ws.write_number(r, c, v, num)
        if note:
            ws.write_string(r, 5, note)
    ws.set_column(0, 1, 10)
    ws.set_column(2, 4, 16)
    ws.set_column(5, 5, 36)
    ws.freeze_panes(4, 0)

    # An older table in kcal/mol and eV, with one IE typed in the wrong unit.
    old = wb.add_worksheet("Older data")
    old.write_string(0, 0, "Values from a 1970s lab report (invented), in kcal/mol", bold)
    for c, h in enumerate(["Formula", "dHf (kcal/mol)", "IE1 [eV]", "Comment"]):
        old.write_string(2, c, h, head)
    older = [
        ("NaF", -137.1, 5.139, ""),
        ("KI", -78.4, 4.341, ""),
        ("RbCl", -104.1, 4.177, ""),
        ("LiCl", -97.7, 5.392, ""),
        ("NaBr", -86.3, 496.0, "IE typed in kJ/mol by mistake"),
    ]
    for r, (f, h, ie, note) in enumerate(older, start=3):
        old.write_string(r, 0, f)
        old.write_number(r, 1, h)
        old.write_number(r, 2, ie)
        if note:
            old.write_string(r, 3, note)
    old.set_column(0, 3, 18)

    el = wb.add_worksheet("Elements")
    el.write_string(
        0, 0, "Element values typed by the lab (invented; override the built-in ones)", bold
    )
    for c, h in enumerate(["Element", "EA1 (kJ/mol)", "Source"]):
        el.write_string(2, c, h, head)
    # typed as electron-gain enthalpies (negative) under an 'EA' header: sheetcycle reads
    # the convention from the signs and says so
    for r, (sym, ea, src) in enumerate(
        [
            ("Cl", -349.0, "lab handbook p. 12 (fictional)"),
            ("Br", -324.6, "lab handbook p. 12 (fictional)"),
        ],
        start=3,
    ):
        el.write_string(r, 0, sym)
        el.write_number(r, 1, ea)
        el.write_string(r, 2, src)
    el.set_column(0, 2, 18)
    wb.close()
    return path


if __name__ == "__main__":
    print(build())
