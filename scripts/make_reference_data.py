"""Regenerate the built-in per-element reference tables in sheetcycle/data/.

Run from the repository root:

    python scripts/make_reference_data.py

It reads the element tables shipped inside the mendeleev package (a development/test
dependency; sheetcycle itself never imports it) and a few hand-listed values below, each
with its own source text, and writes three CSV files:

    sheetcycle/data/elements.csv          Z, symbol, name, atomic_mass, source
    sheetcycle/data/element_values.csv    long format: element,quantity,index,value,unit,
                                          uncertainty,source
    sheetcycle/data/oxidation_states.csv  element, cation_charges, anion_charge, source

The output is deterministic for a given mendeleev version: rows are in atomic-number order,
numbers are written with a fixed format, and nothing depends on the clock or the machine.
``--check`` compares freshly generated text with the committed files instead of writing.
"""

from __future__ import annotations

import argparse
import csv
import io
import math
import sys
import warnings
from pathlib import Path
from typing import Any

EV_TO_KJ_PER_MOL = 96.485332  # CODATA 2018: e * N_A = 96 485.332 12 J/mol per eV
DATA_DIR = Path(__file__).resolve().parent.parent / "sheetcycle" / "data"
MAX_Z_VALUES = 103  # thermochemical values for Z = 1..103; elements.csv lists all 118
MIN_IONIZATION_STEPS = 4  # always keep IE1..IE4 where NIST has them

# --- source texts -------------------------------------------------------------------------

CRC_2014 = "CRC Handbook of Chemistry and Physics, 95th ed. (W. M. Haynes, ed., 2014)"
NIST_ASD = "NIST Atomic Spectra Database ionization energies (parsed 2024-10-19)"
IUPAC_WEIGHTS = (
    "IUPAC CIAAW standard atomic weight (Meija et al., Pure Appl. Chem. 88, 265 (2016);"
    " conventional value for elements given as an interval)"
)
NO_STANDARD_WEIGHT = (
    "no standard atomic weight: relative mass of the longest-lived isotope (CIAAW practice)"
)
COMMON_PRACTICE = "common practice, no source"

# Electron affinities that mendeleev annotates with a publication other than the CRC
# Handbook (mendeleev's property metadata for `electron_affinity`).
EA_OTHER_PUBLICATION = {
    "Nb": "Luo et al. (2016)",
    "Co": "Chen et al. (2016)",
    "Pb": "Chen et al. (2016)",
}

# Electron affinities not shipped although mendeleev has a positive value: the CRC 2014
# value differs by more than 2 kJ/mol from the value in pymatgen-core's element table,
# which holds later photodetachment measurements (lanthanide anions in particular were
# revised from ~1-2 eV to ~0.1 eV). None of these elements forms a monatomic anion in a
# Born-Haber cycle; a user who needs one supplies it as an override.
EA_NOT_SHIPPED = frozenset(
    {"Ga", "In", "Tl", "La", "Ce", "Pr", "Nd", "Eu", "Tb", "Dy", "Lu", "Hf", "Re", "Os", "Po"}
)

# Electron affinities replaced by hand (value in eV, uncertainty in eV, source text).
EA_BY_HAND: dict[str, tuple[float, float, str]] = {
    # CRC 2014 lists an old estimate of 2.8 eV; the first measurement came later.
    "At": (2.41578, 0.00007, "Leimbach et al., Nat. Commun. 11, 3824 (2020) (from memory)"),
}

# Second electron-gain enthalpies X-(g) + e- -> X2-(g), kJ/mol, endothermic. These are
# DEFAULTS: they are not measured but back-calculated from Born-Haber cycles of oxides and
# chalcogenides, and tables disagree by tens of kJ/mol. Users override them.
SECOND_ELECTRON_GAIN: dict[str, tuple[float, str]] = {
    "O": (
        798.0,
        "default: commonly tabulated Born-Haber-derived value (from memory);"
        " other tables give up to +844 kJ/mol",
    ),
    "S": (
        649.0,
        "default: commonly tabulated Born-Haber-derived value (from memory);"
        " other tables give values as low as +456 kJ/mol",
    ),
    "Se": (
        420.0,
        "default: Born-Haber-derived value (from memory, low confidence);"
        " tables disagree by tens of kJ/mol",
    ),
}

# Elements whose standard state is the monatomic gas: atomization enthalpy 0.
NOBLE_GASES = ("He", "Ne", "Ar", "Kr", "Xe", "Rn")

# Monatomic anion charges used when a formula is split into ions.
ANION_CHARGE = {
    "H": -1,  # hydride
    "F": -1,
    "Cl": -1,
    "Br": -1,
    "I": -1,
    "At": -1,
    "O": -2,
    "S": -2,
    "Se": -2,
    "Te": -2,
    "N": -3,
    "P": -3,
}

# Elements listed by mendeleev with positive oxidation states that are not monatomic
# cations in ionic solids (nonmetals, halogens, noble-gas compounds): no cation charges.
NO_CATIONS = frozenset(
    {"C", "N", "P", "S", "Se", "Te", "Cl", "Br", "I", "At", "Kr", "Xe"}
)

# Cation charges edited by hand relative to mendeleev's "main" oxidation states.
CATION_CHARGES_BY_HAND: dict[str, tuple[int, ...]] = {
    "Ti": (2, 3, 4),
    "V": (2, 3, 4, 5),
    "Cr": (2, 3, 6),
    "Mn": (2, 3, 4, 7),
    "Cu": (1, 2),
    "In": (1, 3),
    "Sm": (2, 3),
    "Yb": (2, 3),
    "Re": (4, 7),
    "Au": (1, 3),
    "U": (3, 4, 6),
}

# --- helpers ------------------------------------------------------------------------------


def fmt(x: float, decimals: int = 4) -> str:
    """Fixed-decimal text without trailing zeros ("1312.0498", "249.229", "0")."""
    text = f"{x:.{decimals}f}".rstrip("0").rstrip(".")
    return "0" if text in ("-0", "") else text


def fmt_unc(u: float | None) -> str:
    """Two significant digits, blank when unknown."""
    if u is None or not math.isfinite(u):
        return ""
    return f"{u:.2g}"


def is_missing(x: Any) -> bool:
    return x is None or (isinstance(x, float) and math.isnan(x))


Records = list[dict[str, Any]]


def load_mendeleev() -> tuple[str, Records, Records, Records]:
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        import mendeleev
        from mendeleev.fetch import fetch_table

        elements = fetch_table("elements").to_dict("records")
        ies = fetch_table("ionizationenergies").to_dict("records")
        oxs = fetch_table("oxidationstates").to_dict("records")
    return str(mendeleev.__version__), elements, ies, oxs


# --- table builders -----------------------------------------------------------------------


def build(version: str, elements: Records, ies: Records, oxs: Records) -> dict[str, str]:
    via = f"via mendeleev {version}"
    elements = sorted(elements, key=lambda e: int(e["atomic_number"]))
    by_z = {int(e["atomic_number"]): e for e in elements}
    symbol = {z: str(e["symbol"]) for z, e in by_z.items()}
    z_of = {s: z for z, s in symbol.items()}
    assert set(ANION_CHARGE) | set(NO_CATIONS) | set(CATION_CHARGES_BY_HAND) <= set(z_of)
    assert set(EA_NOT_SHIPPED) | set(EA_BY_HAND) | set(SECOND_ELECTRON_GAIN) <= set(z_of)

    no_weight = {"Tc", "Pm", "Po", "At", "Rn", "Fr", "Ra", "Ac"} | {
        s for z, s in symbol.items() if z >= 93
    }

    # elements.csv
    out = io.StringIO()
    w = csv.writer(out, lineterminator="\n")
    w.writerow(["Z", "symbol", "name", "atomic_mass", "source"])
    for z, e in by_z.items():
        src = NO_STANDARD_WEIGHT if symbol[z] in no_weight else IUPAC_WEIGHTS
        w.writerow([z, symbol[z], e["name"], fmt(float(e["atomic_weight"]), 6), f"{src}, {via}"])
    elements_csv = out.getvalue()

    # oxidation_states.csv
    main_states: dict[int, list[int]] = {}
    for o in oxs:
        if o["category"] == "main":
            main_states.setdefault(int(o["atomic_number"]), []).append(int(o["oxidation_state"]))
    ox_src = (
        f"mendeleev {version} main oxidation states (from the Wikipedia 'List of oxidation"
        " states of the elements', revision 1102394064), positive values"
    )
    cations: dict[str, tuple[int, ...]] = {}
    out = io.StringIO()
    w = csv.writer(out, lineterminator="\n")
    w.writerow(["element", "cation_charges", "anion_charge", "source"])
    for z in range(1, MAX_Z_VALUES + 1):
        s = symbol[z]
        positive = tuple(sorted({q for q in main_states.get(z, []) if q > 0}))
        parts: list[str] = []
        if s in NO_CATIONS:
            charges: tuple[int, ...] = ()
            if positive:
                parts.append(
                    "no cation charges: positive oxidation states in mendeleev's list ("
                    + " ".join(map(str, positive))
                    + f") are not monatomic cations in ionic solids ({COMMON_PRACTICE})"
                )
        elif s in CATION_CHARGES_BY_HAND:
            charges = CATION_CHARGES_BY_HAND[s]
            edits = []
            added = sorted(set(charges) - set(positive))
            dropped = sorted(set(positive) - set(charges))
            if added:
                edits.append("added " + " ".join(map(str, added)))
            if dropped:
                edits.append("dropped " + " ".join(map(str, dropped)))
            parts.append(f"{ox_src}, edited by hand: {', '.join(edits)} ({COMMON_PRACTICE})")
        else:
            charges = positive
            if charges:
                parts.append(ox_src)
        cations[s] = charges
        anion = ANION_CHARGE.get(s)
        if anion is not None:
            parts.append(f"anion charge {anion}: usual monatomic anion ({COMMON_PRACTICE})")
        if not parts:
            parts.append(f"no common monatomic ion: {ox_src} lists no positive state")
        w.writerow([s, " ".join(map(str, charges)), "" if anion is None else anion,
                    "; ".join(parts)])
    oxidation_csv = out.getvalue()

    # element_values.csv
    ie_by_z: dict[int, dict[int, dict[str, Any]]] = {}
    for r in ies:
        if not is_missing(r["ionization_energy"]):
            ie_by_z.setdefault(int(r["atomic_number"]), {})[int(r["ion_charge"]) + 1] = r

    out = io.StringIO()
    w = csv.writer(out, lineterminator="\n")
    w.writerow(["element", "quantity", "index", "value", "unit", "uncertainty", "source"])
    for z in range(1, MAX_Z_VALUES + 1):
        s = symbol[z]
        e = by_z[z]
        # atomization enthalpy = standard enthalpy of formation of the monatomic gas
        if s in NOBLE_GASES:
            w.writerow([s, "atomization_enthalpy", 0, "0", "kJ/mol", "0",
                        f"0 by definition: the standard state is the monatomic gas"
                        f" ({COMMON_PRACTICE})"])
        elif not is_missing(e["heat_of_formation"]):
            w.writerow([s, "atomization_enthalpy", 0, fmt(float(e["heat_of_formation"]), 4),
                        "kJ/mol", "",
                        f"{CRC_2014}, enthalpy of formation of the gaseous atom, {via}"])
        # ionization energies IE1..IEk
        k = max(MIN_IONIZATION_STEPS, *cations[s]) if cations[s] else MIN_IONIZATION_STEPS
        for n in range(1, k + 1):
            ie = ie_by_z.get(z, {}).get(n)
            if ie is None:
                continue
            value = float(ie["ionization_energy"]) * EV_TO_KJ_PER_MOL
            unc = None if is_missing(ie["uncertainty"]) else float(ie["uncertainty"])
            src = f"{NIST_ASD}, {via}, eV x {EV_TO_KJ_PER_MOL}"
            if bool(ie["is_theoretical"]):
                src += "; NIST marks it theoretical"
            elif bool(ie["is_semi_empirical"]):
                src += "; NIST marks it semi-empirical"
            w.writerow([s, "ionization_energy", n, fmt(value, 4), "kJ/mol",
                        fmt_unc(None if unc is None else unc * EV_TO_KJ_PER_MOL), src])
        # first electron affinity, energy-released convention
        if s in EA_BY_HAND:
            ea_ev, ea_unc, src = EA_BY_HAND[s]
            w.writerow([s, "electron_affinity", 1, fmt(ea_ev * EV_TO_KJ_PER_MOL, 4), "kJ/mol",
                        fmt_unc(ea_unc * EV_TO_KJ_PER_MOL), f"{src}, eV x {EV_TO_KJ_PER_MOL}"])
        elif not is_missing(e["electron_affinity"]) and s not in EA_NOT_SHIPPED:
            ea_ev = float(e["electron_affinity"])
            if ea_ev > 0:  # unbound/metastable anions (He, Be, N, Ar, Xe, Yb) left out
                pub = EA_OTHER_PUBLICATION.get(s, CRC_2014)
                w.writerow([s, "electron_affinity", 1, fmt(ea_ev * EV_TO_KJ_PER_MOL, 4),
                            "kJ/mol", "", f"{pub}, {via}, eV x {EV_TO_KJ_PER_MOL}"])
        # second electron-gain enthalpy defaults
        if s in SECOND_ELECTRON_GAIN:
            value, src = SECOND_ELECTRON_GAIN[s]
            w.writerow([s, "electron_gain_enthalpy", 2, fmt(value, 4), "kJ/mol", "", src])
    values_csv = out.getvalue()

    return {
        "elements.csv": elements_csv,
        "element_values.csv": values_csv,
        "oxidation_states.csv": oxidation_csv,
    }


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--check", action="store_true",
                        help="compare with the committed files instead of writing them")
    parser.add_argument("--out", type=Path, default=DATA_DIR, help="output folder")
    args = parser.parse_args(argv)
    tables = build(*load_mendeleev())
    stale = []
    for name, text in tables.items():
        path = args.out / name
        if args.check:
            if not path.exists() or path.read_text(encoding="utf-8") != text:
                stale.append(name)
        else:
            path.write_text(text, encoding="utf-8", newline="")
            print(f"wrote {path} ({text.count(chr(10)) - 1} rows)")
    if stale:
        print("out of date: " + ", ".join(stale), file=sys.stderr)
        return 1
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
