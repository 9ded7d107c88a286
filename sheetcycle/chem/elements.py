"""Element symbols in order of atomic number (Z = 1..118).

The symbols are a fact of the trade (IUPAC names and symbols, including the four named in
2016: Nh, Mc, Ts, Og). ``SYMBOLS[z - 1]`` is the symbol of element ``z``.
"""

from __future__ import annotations

__all__ = ["SYMBOLS", "atomic_number"]

SYMBOLS: tuple[str, ...] = (
    "H", "He",
    "Li", "Be", "B", "C", "N", "O", "F", "Ne",
    "Na", "Mg", "Al", "Si", "P", "S", "Cl", "Ar",
    "K", "Ca", "Sc", "Ti", "V", "Cr", "Mn", "Fe", "Co", "Ni", "Cu", "Zn",
    "Ga", "Ge", "As", "Se", "Br", "Kr",
    "Rb", "Sr", "Y", "Zr", "Nb", "Mo", "Tc", "Ru", "Rh", "Pd", "Ag", "Cd",
    "In", "Sn", "Sb", "Te", "I", "Xe",
    "Cs", "Ba",
    "La", "Ce", "Pr", "Nd", "Pm", "Sm", "Eu", "Gd", "Tb", "Dy", "Ho", "Er", "Tm", "Yb", "Lu",
    "Hf", "Ta", "W", "Re", "Os", "Ir", "Pt", "Au", "Hg",
    "Tl", "Pb", "Bi", "Po", "At", "Rn",
    "Fr", "Ra",
    "Ac", "Th", "Pa", "U", "Np", "Pu", "Am", "Cm", "Bk", "Cf", "Es", "Fm", "Md", "No", "Lr",
    "Rf", "Db", "Sg", "Bh", "Hs", "Mt", "Ds", "Rg", "Cn",
    "Nh", "Fl", "Mc", "Lv", "Ts", "Og",
)  # fmt: skip

_Z: dict[str, int] = {symbol: z for z, symbol in enumerate(SYMBOLS, start=1)}


def atomic_number(symbol: str) -> int | None:
    """Atomic number of an element symbol (case-sensitive), or None if it is not one."""
    return _Z.get(symbol)
