"""Recognising column headers: which quantity a column holds, in which unit and convention.

Data, not an if-chain: :data:`REGISTRY` lists every quantity with the spellings
practitioners type (regular expressions over a normalised label), and :data:`REJECTED`
lists headers that look close but must not be read, each with the reason
:func:`explain` gives. docs/headers.md holds the table of spellings; the tests parse it
and check it against this module, so the two cannot drift.

How a header is read:

1. :func:`split_header` separates the label from the unit part: a trailing bracket group
   ('dHf (kcal/mol)', 'IE1 [eV]'), ' in ' ('EA1 in eV'), a slash ('ΔfH° / kJ mol⁻¹',
   'T/K'), a comma ('Hf, kJ·mol-1') or trailing unit words ('IE1 eV'). A part counts as a
   unit only if pint reads it as a unit of a dimension a header can carry; a header that
   is a known label as a whole ('ΔatH(M)', 'Shomate (A)') has no unit part.
2. The label is normalised (NFKC, Unicode minus and dashes to '-', '∆' to 'Δ', '_' and
   LaTeX braces/carets dropped, whitespace collapsed, a trailing temperature such as
   '(298 K)' or '298.15' and a state such as '(s)' or '(cr)' removed).
3. Uncertainty forms ('±', 'u(ΔfH)', 'ΔfH error' …) are tried first, then every spelling
   of every quantity. Matching is case-insensitive except where the case carries the
   meaning (U, T, Z, D(X–X) bond vs d(M-X) distance, u for uncertainty).

An uncertainty column comes back with ``quantity == "uncertainty"``, ``uncertainty=True``
and ``target`` the quantity named inside it; with no target, ``kind == "paired"``: take the
kind and unit from the column it belongs to (the one to its left).
"""

from __future__ import annotations

import re
import unicodedata
from dataclasses import dataclass
from functools import lru_cache

from sheetcycle import units

__all__ = [
    "QUANTITIES",
    "QUANTITY_KINDS",
    "REGISTRY",
    "REJECTED",
    "UNCERTAINTY",
    "HeaderMatch",
    "Quantity",
    "Spelling",
    "explain",
    "recognise",
    "split_header",
]

UNCERTAINTY = "uncertainty"


@dataclass(frozen=True)
class HeaderMatch:
    """What a recognised header says about its column."""

    quantity: str  # registry key, or "uncertainty"
    index: int  # 1..n for ionization_energy / electron_affinity, 0 otherwise
    kind: str  # units.conversion kind, "text", or "paired" (uncertainty without target)
    unit_text: str | None  # the unit part as written (trimmed), None if none
    convention: (
        str | None
    )  # "dissociation"/"formation", "released"/"gain", "conventional"/"absolute"
    uncertainty: bool  # True when the column holds the uncertainty of another column
    target: str | None  # for uncertainty columns: the quantity named inside, else None


@dataclass(frozen=True)
class Spelling:
    """One way of writing a quantity: a regular expression over the normalised label."""

    pattern: str
    convention: str | None = None
    index: int | None = None  # fixed index; None: from the pattern's group, else the default
    case_sensitive: bool = False


@dataclass(frozen=True)
class Quantity:
    key: str
    kind: str
    title: str  # plain words for explain()
    spellings: tuple[Spelling, ...]
    qualifiers: tuple[tuple[str, str], ...] = ()  # (regex, convention) before/after the label
    default_index: int = 0


# --------------------------------------------------------------------------- building blocks
D = r"(?:Δ|delta ?|d)"  # the Greek capital, the word, or a Latin d/D
S = r"(?: ?(?:°|⦵|⊖|o|0))?"  # standard-state mark, optional
ORD = r"\(?(?P<n>[1-9])\)?"
ORDW = r"(?P<w>1st|2nd|3rd|4th|5th|first|second|third|fourth|fifth)"
ORD12 = r"(?:\(?(?P<n>[12])\)?)"
ORDW12 = r"(?P<w>1st|2nd|first|second)"
IEW = r"(?:IE|IP|ioni[sz]ation (?:energy|enthalpy|potential))"
AT = (
    rf"(?:{D} ?(?:at|atom|atm|a) ?H{S}|{D} ?H{S} ?(?:at|atom|atm|a)|"
    r"(?:enthalpy|heat) of atomi[sz]ation|atomi[sz]ation(?: enthalpy| energy)?)"
)
SUB = (
    rf"(?:{D} ?sub ?H{S}|{D} ?H{S} ?sub|(?:enthalpy|heat) of sublimation|"
    r"sublimation(?: enthalpy| energy)?)"
)
METAL = r"(?: ?\( ?(?:M|metal) ?\)| ?,? (?:of )?(?:the )?metal| M)"
NONMETAL = r"(?: ?\( ?(?:X|non-?metal|non metal) ?\)| ?,? (?:of )?(?:the )?non[- ]?metal| X)"
HYD = (
    rf"(?:{D} ?hyd ?H{S}|{D} ?H{S} ?hyd|(?:enthalpy|heat) of hydration|"
    r"hydration (?:enthalpy|energy|heat))"
)
CATION = (
    r"(?: ?\( ?(?:M ?(?:[1-9]|n|z)? ?\+|M|cations?) ?\)| ?,? (?:of )?(?:the )?cations?"
    r"| ?M ?(?:[1-9]|n|z)? ?\+)"
)
ANION = (
    r"(?: ?\( ?(?:X ?(?:[1-9]|n|z)? ?-|X|anions?) ?\)| ?,? (?:of )?(?:the )?anions?"
    r"| ?X ?(?:[1-9]|n|z)? ?-)"
)
LATT = r"(?:L|latt?|lattice)"


def _sp(*patterns: str, **kw: object) -> tuple[Spelling, ...]:
    return tuple(Spelling(p, **kw) for p in patterns)  # type: ignore[arg-type]


_LATTICE_QUALIFIERS = (
    (r"formation|form\.?", "formation"),
    (r"dissociation|diss\.?", "dissociation"),
)
_HYDRATION_QUALIFIERS = (
    (r"conventional|conv\.?|H\+ ?= ?0|conventional scale", "conventional"),
    (r"absolute|abs\.?|absolute scale", "absolute"),
)

_SHOMATE_KIND = {"A": "heat_capacity", "B": "heat_capacity", "C": "heat_capacity",
                 "D": "heat_capacity", "E": "heat_capacity", "F": "energy",
                 "G": "heat_capacity", "H": "energy"}  # fmt: skip


def _shomate(letter: str) -> Quantity:
    L = f"(?:{letter})"
    return Quantity(
        f"shomate_{letter.lower()}",
        _SHOMATE_KIND[letter],
        f"Shomate coefficient {letter}",
        _sp(
            rf"(?:shomate|C ?p) ?(?:coefficient|coeff\.?|coef\.?|parameter|param\.?|term)? ?{L}",
            rf"{L} ?\( ?(?:shomate|C ?p) ?\)",
            rf"shomate ?\( ?{L} ?\)",
        ),
    )


REGISTRY: tuple[Quantity, ...] = (
    Quantity("formula", "text", "chemical formula", _sp(
        r"(?:chemical |compound |molecular |empirical |salt )?formula",
        r"compound|salt|species|substance|material|ionic compound",
    )),
    Quantity("name", "text", "compound name", _sp(
        r"(?:compound |chemical |salt |substance )?name",
    )),
    Quantity("state", "text", "physical state", _sp(r"(?:physical )?state|phase|state of matter")),
    Quantity("charge_cation", "dimensionless", "charge of the cation", _sp(
        r"z ?\+|q ?\+|z ?\( ?(?:M|cation|\+) ?\)|z ?M",
        r"(?:cation|cationic) charge|charge (?:of (?:the )?)?cation|charge \(cation\)",
    )),
    Quantity("charge_anion", "dimensionless", "charge of the anion", _sp(
        r"z ?-|q ?-|z ?\( ?(?:X|anion|-) ?\)|z ?X",
        r"(?:anion|anionic) charge|charge (?:of (?:the )?)?anion|charge \(anion\)",
    )),
    Quantity("element", "text", "element symbol", _sp(r"elements?|(?:element )?symbol")),
    Quantity("formation_enthalpy", "energy", "standard enthalpy of formation", _sp(
        rf"{D} ?f ?H{S}",
        rf"{D} ?H{S} ?f{S}",
        rf"H{S} ?f{S}",
        r"(?:(?:std\.?|standard) )?(?:molar )?(?:enthalpy|heat) of formation",
        r"(?:(?:std\.?|standard) )?(?:molar )?formation enthalpy",
    )),
    Quantity("lattice_enthalpy", "energy", "lattice enthalpy", _sp(
        rf"{D} ?{LATT} ?H{S}",
        rf"{D} ?H{S} ?{LATT}",
        r"lattice enthalpy|enthalpy of lattice",
    ) + _sp(
        r"lattice formation enthalpy|lattice enthalpy of formation|enthalpy of lattice formation",
        convention="formation",
    ) + _sp(
        r"lattice dissociation enthalpy|lattice enthalpy of dissociation"
        r"|enthalpy of lattice dissociation",
        convention="dissociation",
    ), qualifiers=_LATTICE_QUALIFIERS),
    Quantity("lattice_energy", "energy", "lattice energy (U, 0 K)", _sp(
        r"U|U ?L|U ?0|U ?pot|U ?latt?|U ?lattice",
        case_sensitive=True,
    ) + _sp(
        r"lattice energy(?: U)?|E ?latt?(?:ice)?",
    ) + _sp(
        r"lattice formation energy|lattice energy of formation", convention="formation",
    ) + _sp(
        r"lattice dissociation energy|lattice energy of dissociation", convention="dissociation",
    ), qualifiers=_LATTICE_QUALIFIERS),
    Quantity("atomization_metal", "energy", "atomization enthalpy of the metal", _sp(
        AT + METAL,
        SUB + METAL + "?",
    )),
    Quantity("atomization_nonmetal", "energy", "atomization enthalpy of the non-metal", _sp(
        AT + NONMETAL,
        r"(?:1 ?[/⁄] ?2|half) ?D ?\( ?X ?- ?X ?\)",
    )),
    Quantity("atomization", "energy", "atomization enthalpy", _sp(AT)),
    Quantity("bond_dissociation", "energy", "bond dissociation enthalpy", _sp(
        r"D ?\( ?X ?- ?X ?\)|D ?\( ?X ?2 ?\)|D ?0|D ?\( ?(?P<e>[A-Z][a-z]?) ?- ?(?P=e) ?\)",
        case_sensitive=True,
    ) + _sp(
        r"BDE|bond dissociation (?:enthalpy|energy)|bond (?:enthalpy|energy)",
    )),
    Quantity("ionization_energy", "energy", "ionization energy", _sp(
        rf"(?:IE|IP|I) ?{ORD}",
        rf"{ORDW} {IEW}",
        rf"{IEW} ?{ORD}",
        rf"{IEW} \(?{ORDW}\)?",
        rf"{D} ?(?:ie|i|ion) ?H{S} ?{ORD}",
        rf"{D} ?H{S} ?(?:ie|i|ion) ?{ORD}",
    ) + _sp(
        r"(?:IE|IP|I) ?1 ?\+ ?(?:IE|IP|I) ?2(?: ?\+ ?(?:IE|IP|I) ?[3-9])*",
        r"(?:Σ|sum(?: of)?|total) ?"
        r"(?:IE|IP|I|ioni[sz]ation (?:energies|energy|enthalpies|enthalpy))s?",
        index=0,
    )),
    Quantity("electron_affinity", "energy", "electron affinity", _sp(
        rf"(?:EA|E ?ea) ?{ORD12}?",
        rf"{ORDW12} (?:EA|electron affinity)",
        rf"electron affinity ?{ORD12}?",
        rf"electron affinity \(?{ORDW12}\)?",
        convention="released",
    ) + _sp(
        rf"{D} ?(?:eg|ea) ?H{S} ?{ORD12}?",
        rf"{D} ?H{S} ?(?:eg|ea) ?{ORD12}?",
        rf"EGE ?{ORD12}?",
        rf"electron[ -]gain (?:enthalpy|energy) ?{ORD12}?",
        rf"{ORDW12} electron[ -]gain (?:enthalpy|energy)",
        rf"(?:enthalpy|energy) of electron gain ?{ORD12}?",
        convention="gain",
    ), default_index=1),
    Quantity("hydration_cation", "energy", "hydration enthalpy of the cation", _sp(
        HYD + CATION,
        rf"(?:cation|cationic) {HYD}",
    ), qualifiers=_HYDRATION_QUALIFIERS),
    Quantity("hydration_anion", "energy", "hydration enthalpy of the anion", _sp(
        HYD + ANION,
        rf"(?:anion|anionic) {HYD}",
    ), qualifiers=_HYDRATION_QUALIFIERS),
    Quantity("hydration", "energy", "hydration enthalpy", _sp(HYD),
             qualifiers=_HYDRATION_QUALIFIERS),
    Quantity("solution_enthalpy", "energy", "enthalpy of solution", _sp(
        rf"{D} ?(?:sol|soln) ?H{S}",
        rf"{D} ?H{S} ?(?:sol|soln|solution)",
        r"(?:enthalpy|heat) of (?:solution|dissolution)|(?:solution|dissolution) enthalpy",
    )),
    Quantity("radius_cation", "length", "ionic radius of the cation", _sp(
        r"r ?\+|r ?\( ?(?:M ?(?:[1-9]|n|z)? ?\+?|cation|\+) ?\)|r ?(?:cation|cat|M)",
        r"(?:ionic )?radius (?:of )?(?:the )?cation|cation(?:ic)? (?:ionic )?radius",
        r"(?:ionic )?radius \(cation\)",
    )),
    Quantity("radius_anion", "length", "ionic radius of the anion", _sp(
        r"r ?-|r ?\( ?(?:X ?(?:[1-9]|n|z)? ?-?|anion|-) ?\)|r ?(?:anion|an|X)",
        r"(?:ionic )?radius (?:of )?(?:the )?anion|anion(?:ic)? (?:ionic )?radius",
        r"(?:ionic )?radius \(anion\)",
    )),
    Quantity("interionic_distance", "length", "interionic distance", _sp(
        r"d ?0|d ?\( ?M ?- ?X ?\)",
        case_sensitive=True,
    ) + _sp(
        r"r ?0|r ?\( ?M ?- ?X ?\)|r ?\+ ?\+ ?r ?-",
        r"(?:inter-?ionic|cation-anion|M-X) (?:distance|separation)|distance M-X",
        r"sum of (?:ionic )?radii",
    )),
    Quantity("density", "density", "density", _sp(
        r"(?:crystal |x-?ray |calculated |calc\.? |measured |exp\.? |bulk )?density",
        r"(?:ρ|rho)(?: ?(?:calc|exp|x|m|x-?ray))?",
    )),
    Quantity("molar_volume", "volume", "molar (formula-unit) volume", _sp(
        r"V ?m|V ?mol|molar volume|V ?f\.?u\.?|V ?\(f\.?u\.?\)",
        r"(?:formula[- ]unit|f\.u\.) volume|volume (?:per|/) (?:formula[- ]unit|f\.u\.)",
    )),
    Quantity("cell_volume", "volume", "unit-cell volume", _sp(
        r"(?:unit[- ])?cell volume|V ?cell|V ?\(cell\)|volume of (?:the )?(?:unit )?cell|V ?uc",
    )),
    Quantity("formula_units_per_cell", "dimensionless", "formula units per cell", _sp(
        r"Z", case_sensitive=True,
    ) + _sp(
        r"formula units per (?:unit )?cell|f\.?u\.? per cell|Z \(?formula units(?: per cell)?\)?",
    )),
    Quantity("structure_type", "text", "structure type", _sp(
        r"structure(?:[- ]type)?|lattice type|crystal structure|structural type"
        r"|(?:structure )?prototype",
    )),
    Quantity("heat_capacity", "heat_capacity", "heat capacity Cp", _sp(
        rf"C ?p(?: ?,? ?m)?{S}",
        r"(?:molar |isobaric |standard )?heat capacity",
    )),
    *(_shomate(letter) for letter in "ABCDEFGH"),
    Quantity("temperature", "temperature", "temperature", _sp(
        r"T", case_sensitive=True,
    ) + _sp(r"temperature|temp\.?")),
    Quantity("reaction_equation", "text", "reaction equation", _sp(
        r"(?:balanced |chemical |reaction )?equation|reaction|rxn",
    )),
    Quantity("reaction_enthalpy", "energy", "reaction enthalpy", _sp(
        rf"{D} ?r ?H{S}",
        rf"{D} ?H{S} ?(?:r|rxn|reaction)",
        rf"{D} ?rxn ?H{S}",
        r"(?:enthalpy|heat) of reaction|reaction (?:enthalpy|heat)",
    )),
    # User-defined cycles: a table of steps anchored by a process column. A bare 'ΔH' stays
    # refused (see REJECTED): the step enthalpy needs its word, 'ΔH (step)' or 'step ΔH'.
    Quantity("process", "text", "process of a cycle step", _sp(
        r"(?:cycle )?steps?|process(?:es)?|process step|step (?:process|equation|reaction)",
    )),
    Quantity("step_enthalpy", "energy", "enthalpy of a cycle step", _sp(
        rf"{D} ?H{S} ?\( ?(?:step|process) ?\)|{D} ?H{S} (?:of )?(?:the )?(?:step|process)",
        rf"(?:step|process) ?{D} ?H{S}",
        r"(?:step|process) (?:enthalpy|enthalpy change|heat)"
        r"|(?:enthalpy|enthalpy change|heat) of (?:the )?(?:step|process)",
    )),
    Quantity("step_multiplier", "dimensionless", "multiplier of a cycle step", _sp(
        r"(?:step )?(?:multiplier|factor)|mult\.?|times|×|how many times|number of times",
    ) + _sp(r"n", case_sensitive=True)),
    Quantity("cycle_id", "text", "cycle name or number", _sp(
        r"(?:cycle|loop)(?: ?(?:id|no\.?|number|name|label|#))?",
    )),
    Quantity("source", "text", "literature reference", _sp(
        r"(?:data )?sources?|references?|refs?\.?|citations?|lit(?:erature)?\.?|doi|bibliography",
    )),
    Quantity("notes", "text", "notes", _sp(r"notes?|comments?|remarks?|annotations?")),
)  # fmt: skip

QUANTITIES: dict[str, str] = {q.key: q.kind for q in REGISTRY}
QUANTITY_KINDS = QUANTITIES  # the same mapping under the name the table reader uses

# Headers that look like data but are not read, with the reason explain() gives ({h}: header).
_AMBIGUOUS_H = (
    "'{h}' is ambiguous: which enthalpy? Add the process: ΔfH (formation), ΔH_L (lattice), "
    "ΔsolH (solution), ΔhydH (hydration), ΔatH (atomization), ΔrH (reaction)"
)
REJECTED: tuple[tuple[str, str], ...] = (
    (r"V",
     "'{h}' is ambiguous: write 'V_cell' / 'cell volume' for the unit cell or 'Vm' / "
     "'molar volume' per formula unit"),
    (r"[A-H]",
     "'{h}' is a single letter, not a quantity; for a Shomate coefficient write 'Shomate {h}'"),
    (rf"{D} ?f ?G{S}|{D} ?G{S}(?: ?f)?|{D} ?r ?G{S}|(?:standard )?gibbs(?: free)? energy"
     r"(?: of formation)?|free energy(?: of formation)?",
     "'{h}' is a Gibbs energy, not an enthalpy; not used"),
    (rf"S{S}|S ?m{S}|{D} ?f ?S{S}|{D} ?S{S}|{D} ?r ?S{S}|(?:standard |molar )?entropy"
     r"(?: of formation)?",
     "'{h}' is an entropy, not an enthalpy; not used"),
    (r"melting (?:point|temperature)|m\.?p\.?|T ?m|T ?fus|boiling (?:point|temperature)|b\.?p\.?"
     r"|T ?b|T ?boil|decomposition (?:point|temperature)|T ?dec",
     "'{h}' is a melting/boiling point, not a temperature of the data; not used"),
    (r"M ?r|M ?w|molar mass|molecular (?:weight|mass)|formula (?:weight|mass)|MW|FW",
     "'{h}' is a molar mass: not read (sheetcycle computes molar masses from the formula)"),
    (r"CAS(?: (?:no\.?|number|rn|#))?|ID|index|idx|no\.?|#|row|entry|serial|sample(?: id)?",
     "'{h}' is an identifier column; not used"),
    (r"E ?(?:°|⦵|⊖|0|o)(?: ?\(V\))?|(?:standard )?(?:electrode|reduction|redox|oxidation)"
     r" potential",
     "'{h}' is an electrode potential, not an enthalpy; not used"),
    (r"pK ?a|pK ?b|pH|K ?sp|solubility(?: product)?|log ?K|K ?eq",
     "'{h}' is not a thermochemical quantity sheetcycle uses; not used"),
    (r"bond (?:length|distance)",
     "'{h}' is ambiguous: write 'interionic distance' or 'd(M-X)' for the cation-anion "
     "distance in the solid"),
    (rf"{D} ?H{S}|H|enthalpy(?: change)?|heat", _AMBIGUOUS_H),
    (r"energy|energies|E",
     "'{h}' is ambiguous: which energy? Write e.g. 'lattice energy', 'IE1', 'EA1' or "
     "'bond dissociation energy'"),
    (r"E ?a|activation energy",
     "'{h}' is an activation energy, not used (write 'EA' for an electron affinity)"),
    (rf"{IEW}|I|ioni[sz]ation energies|{D} ?(?:ie|i) ?H{S}|{D} ?H{S} ?(?:ie|i)",
     "'{h}': which ionization? Write IE1, IE2 … (or 'IE1+IE2' for a sum)"),
    (r"(?:IE|IP|I) ?[1-9][0-9]+|(?:EA|E ?ea) ?[3-9]",
     "'{h}': no such ionization energy or electron affinity is used in a cycle"),
    (r"r|radius|radii|ionic radi(?:us|i)|r ?ion",
     "'{h}': which ion? Write 'r+' / 'cation radius' or 'r-' / 'anion radius'"),
    (rf"{D} ?(?:vap|fus|c|comb) ?H{S}|{D} ?H{S} ?(?:vap|fus|c|comb)|(?:enthalpy|heat) of "
     r"(?:vapou?ri[sz]ation|fusion|combustion)|(?:vapou?ri[sz]ation|fusion|combustion) enthalpy",
     "'{h}' is an enthalpy of vaporization, fusion or combustion: not a term sheetcycle uses "
     "(give ΔfH or a reaction)"),
    (r"lattice(?: (?:constants?|parameters?))?|a ?0|cell (?:parameters?|edge|length)",
     "'{h}' is a lattice parameter or too vague to read; not used"),
    (r"values?|data|results?|quantity|amount|measurements?|x|y",
     "'{h}' says no quantity: name what the column holds (e.g. 'ΔfH°')"),
    (r"[^\W\d_]",
     "'{h}' is a single letter, not a quantity sheetcycle reads (the letters it reads alone "
     "are T, U and Z, and n for the multiplier of a cycle step)"),
)  # fmt: skip


# --------------------------------------------------------------------------- compiled tables

_FLAGS = re.IGNORECASE
_QUAL_WRAP = r"[ ,;]*\(?(?:{q})\)?[ ,;]*"


@dataclass(frozen=True)
class _Compiled:
    quantity: Quantity
    spelling: Spelling
    regex: re.Pattern[str]


@lru_cache(maxsize=1)
def _compiled() -> tuple[_Compiled, ...]:
    out = []
    for q in REGISTRY:
        for sp in q.spellings:
            flags = 0 if sp.case_sensitive else _FLAGS
            out.append(_Compiled(q, sp, re.compile(sp.pattern, flags)))
    return tuple(out)


@lru_cache(maxsize=1)
def _compiled_rejected() -> tuple[tuple[re.Pattern[str], str], ...]:
    return tuple((re.compile(p, _FLAGS), reason) for p, reason in REJECTED)


@lru_cache(maxsize=1)
def _compiled_qualifiers() -> dict[str, tuple[tuple[re.Pattern[str], re.Pattern[str], str], ...]]:
    out: dict[str, tuple[tuple[re.Pattern[str], re.Pattern[str], str], ...]] = {}
    for q in REGISTRY:
        rows = []
        for pattern, convention in q.qualifiers:
            wrap = _QUAL_WRAP.format(q=pattern)
            rows.append(
                (re.compile(f"^(?P<rest>.+?){wrap}$", _FLAGS),
                 re.compile(f"^{wrap}(?P<rest>.+?)$", _FLAGS), convention)
            )  # fmt: skip
        out[q.key] = tuple(rows)
    return out


# --------------------------------------------------------------------------- normalising

_DASHES = dict.fromkeys(map(ord, "\u2212\u2012\u2013\u2014\u2010\u2011\ufe63\uff0d"), "-")
_SPACE = re.compile(r"\s+")
_TEMPERATURE = re.compile(
    r"(?:[ ,;]*[(\[] ?(?:at |T ?= ?)?\d+(?:\.\d+)? ?(?:K|°C|C) ?[)\]]"
    r"|[ ,;]+(?:at |T ?= ?)?\d+(?:\.\d+)? ?(?:K|°C)"
    r"|(?<=\D) ?298(?:\.15)?)$"
)
_STATE = re.compile(r" ?\((?:s|cr|c|cryst\.?|solid|crystal)\)$", re.IGNORECASE)
_ORDINAL = {"1st": 1, "first": 1, "2nd": 2, "second": 2, "3rd": 3, "third": 3,
            "4th": 4, "fourth": 4, "5th": 5, "fifth": 5}  # fmt: skip


def _normalise_label(text: str) -> str:
    text = unicodedata.normalize("NFKC", text)
    text = text.replace("∆", "Δ").replace("∑", "Σ").translate(_DASHES)
    text = text.replace("_", " ").replace("{", "").replace("}", "").replace("^", "")
    text = _SPACE.sub(" ", text).strip().rstrip(":").strip()
    for _ in range(3):
        new = _STATE.sub("", _TEMPERATURE.sub("", text)).strip()
        if new == text or not new:
            break
        text = new
    return text


# --------------------------------------------------------------------------- matching


@dataclass(frozen=True)
class _LabelMatch:
    quantity: Quantity
    index: int
    convention: str | None


def _match_spellings(label: str) -> list[_LabelMatch]:
    """Every quantity whose spellings match ``label`` exactly (normally zero or one)."""
    found: list[_LabelMatch] = []
    seen: set[str] = set()
    candidates: list[tuple[str, str | None, str | None]] = [(label, None, None)]
    for key, rows in _compiled_qualifiers().items():
        for trailing, leading, qualified in rows:
            for rx in (trailing, leading):
                m = rx.match(label)
                if m:
                    candidates.append((m.group("rest").strip(), qualified, key))
    for text, qualifier_convention, qualifier_key in candidates:
        for c in _compiled():
            if c.quantity.key in seen:
                continue
            if qualifier_key is not None and c.quantity.key != qualifier_key:
                continue
            m = c.regex.fullmatch(text)
            if not m:
                continue
            groups = m.groupdict()
            if c.spelling.index is not None:
                index = c.spelling.index
            elif groups.get("n"):
                index = int(groups["n"])
            elif groups.get("w"):
                index = _ORDINAL[groups["w"].lower()]
            else:
                index = c.quantity.default_index
            convention: str | None = c.spelling.convention or qualifier_convention
            if (
                c.spelling.convention
                and qualifier_convention
                and (c.spelling.convention != qualifier_convention)
            ):
                continue  # 'lattice formation enthalpy (dissociation)': contradictory
            found.append(_LabelMatch(c.quantity, index, convention))
            seen.add(c.quantity.key)
    return found


_UNC_WORD = (
    r"(?:±|\+/-|\+-|unc\.?|uncert\.?|uncertainty|standard uncertainty|err\.?|error|(?-i:σ)|sd"
    r"|s\.d\.|std\.? ?dev\.?|standard deviation|esd|e\.s\.d\.|(?-i:δ))"
)
_UNC_BARE = re.compile(rf"{_UNC_WORD}|(?-i:u)", _FLAGS)
_UNC_FORMS = tuple(
    re.compile(p, _FLAGS)
    for p in (
        rf"(?:{_UNC_WORD}|(?-i:u)) ?\((?P<inner>.+)\)",
        r"(?:±|\+/-|\+-) ?(?P<inner>.+)",
        r"(?:uncertainty|unc\.?|error|err\.?|sd|(?-i:σ)|std\.? ?dev\.?|standard deviation)"
        r" (?:of|in|on|for) (?P<inner>.+)",
        rf"(?P<inner>.+?) ?\( ?{_UNC_WORD} ?\)",
        rf"(?P<inner>.+?)[ ,]+{_UNC_WORD}",
        r"(?P<inner>.+?) ?(?:±|\+/-)",
    )
)


def _uncertainty(label: str) -> tuple[bool, _LabelMatch | None, str | None]:
    """(is an uncertainty form, what it refers to, the inner text when not recognised)."""
    if _UNC_BARE.fullmatch(label):
        return True, None, None
    unmatched: str | None = None
    for rx in _UNC_FORMS:
        m = rx.fullmatch(label)
        if not m:
            continue
        inner = _normalise_label(m.group("inner"))
        if not inner:
            continue
        matches = _match_spellings(inner)
        if matches:
            return True, matches[0], None
        unmatched = unmatched or inner
    return (unmatched is not None), None, unmatched


@lru_cache(maxsize=4096)
def _match_label(label_text: str) -> HeaderMatch | None:
    label = _normalise_label(label_text)
    if not label:
        return None
    is_unc, target, unmatched = _uncertainty(label)
    if is_unc:
        if unmatched is not None:
            return None
        if target is None:
            return HeaderMatch(UNCERTAINTY, 0, "paired", None, None, True, None)
        return HeaderMatch(
            UNCERTAINTY, target.index, target.quantity.kind, None, target.convention, True,
            target.quantity.key,
        )  # fmt: skip
    matches = _match_spellings(label)
    if not matches:
        return None
    m = matches[0]
    return HeaderMatch(m.quantity.key, m.index, m.quantity.kind, None, m.convention, False, None)


# --------------------------------------------------------------------------- splitting

_ELEMENTS = frozenset(
    "H He Li Be B C N O F Ne Na Mg Al Si P S Cl Ar Ca Sc Ti V Cr Mn Fe Co Ni Cu Zn Ga Ge "
    "As Se Br Kr Rb Sr Y Zr Nb Mo Tc Ru Rh Pd Ag Cd In Sn Sb Te I Xe Cs Ba La Ce Pr Nd Pm "
    "Sm Eu Gd Tb Dy Ho Er Tm Yb Lu Hf Ta W Re Os Ir Pt Au Hg Tl Pb Bi Po At Rn Fr Ra Ac Th "
    "Pa U Np Pu Am Cm Bk Cf Es Fm Md No Lr Rf Db Sg Bh Hs Mt Ds Rg Cn Nh Fl Mc Lv Ts Og".split()
)
# Bracketed words that qualify a label and must never be taken for a unit ('K' is kelvin).
_NOT_UNITS = (_ELEMENTS - {"K"}) | {"M", "X", "s", "l", "g", "c", "aq", "cr", "am", "sln"}

_UNIT_DIMENSIONS = (
    "[energy]/[substance]", "[energy]", "[energy]*[substance]", "[energy]/[temperature]",
    "[energy]/[temperature]/[substance]", "[energy]/[mass]/[temperature]", "[energy]/[mass]",
    "1/[length]", "1/[time]", "[length]", "[length]**3", "[length]**3/[substance]",
    "[mass]/[length]**3", "[mass]/[substance]", "[temperature]",
)  # fmt: skip


@lru_cache(maxsize=1)
def _unit_dimensions() -> tuple[object, ...]:
    ureg = units.registry()
    return tuple(ureg.get_dimensionality(d) for d in _UNIT_DIMENSIONS)


@lru_cache(maxsize=4096)
def _is_unit(text: str) -> bool:
    text = text.strip()
    if not text or len(text) > 40 or text in _NOT_UNITS or not re.search(r"[A-Za-zÅ°%µμ]", text):
        return False
    if not units.looks_like_unit(text, "volume"):  # 'volume' lets a bare 'A' be ångström
        return False
    try:
        dim = units.parse_unit(text, "volume").dimensionality
    except Exception:
        return False
    return dim in _unit_dimensions()


def _trailing_group(text: str) -> tuple[str, str] | None:
    """('head', 'content') for a balanced (...) or [...] group ending the text."""
    if not text or text[-1] not in ")]":
        return None
    close = text[-1]
    open_ = "(" if close == ")" else "["
    depth = 0
    for i in range(len(text) - 1, -1, -1):
        if text[i] == close:
            depth += 1
        elif text[i] == open_:
            depth -= 1
            if depth == 0:
                return text[:i], text[i + 1 : -1]
    return None


def _tidy(text: str) -> str:
    return _SPACE.sub(" ", unicodedata.normalize("NFC", text)).strip()


@lru_cache(maxsize=4096)
def _split(text: str) -> tuple[str, str | None]:
    t = _tidy(text)
    if not t or _match_label(t) is not None:
        return t, None
    group = _trailing_group(t)
    if group and group[0].strip(" /,") and _is_unit(group[1]):
        return group[0].strip().rstrip("/,").strip(), units.tidy_unit_text(group[1])
    head, sep, tail = t.rpartition(" in ")
    if sep and head.strip() and _is_unit(tail):
        return head.strip(), units.tidy_unit_text(tail)
    for i, ch in enumerate(t):
        if ch == "/" and t[:i].strip() and _is_unit(t[i + 1 :]):
            return t[:i].strip(), units.tidy_unit_text(t[i + 1 :])
    head, sep, tail = t.rpartition(", ")
    if sep and head.strip() and _is_unit(tail):
        return head.strip(), units.tidy_unit_text(tail)
    words = t.split(" ")
    for k in range(min(3, len(words) - 1), 0, -1):
        tail = " ".join(words[-k:])
        head = " ".join(words[:-k])
        if len(tail) > 1 and not tail[0].isdigit() and _is_unit(tail) and _match_label(head):
            return head, units.tidy_unit_text(tail)
    return t, None


def split_header(text: str) -> tuple[str, str | None]:
    """(label, unit part) of a header; the unit part is None when the header has none."""
    if not isinstance(text, str):
        return "", None
    if len(text) > MAX_HEADER_LENGTH:
        return text[:MAX_HEADER_LENGTH], None  # a note or a pasted block, not a header
    try:
        return _split(text)
    except RecursionError:  # pathological nesting: treat as a label without a unit
        return _tidy(text), None


#: Words that say where a value came from, not what it is ('ΔLH lit.', 'ΔfH (exp.)'):
#: a header that is recognised once they are taken out is read without them.
_PROVENANCE = re.compile(
    r"[ ,;/_-]*\(?\b(?:lit|literature|exp|expt|experimental|measured|meas|calc|calcd|"
    r"calculated|ref|tabulated|tab|obs|observed|est|estimated|published|handbook)\b\.?\)?",
    re.IGNORECASE,
)


#: Longer cell texts are never headers (a 10 MB text with slashes would otherwise be cut
#: and unit-parsed at every slash).
MAX_HEADER_LENGTH = 256


def recognise(text: str) -> HeaderMatch | None:
    """The quantity a header names, or None when it is not recognised (see :func:`explain`)."""
    if not isinstance(text, str) or len(text) > MAX_HEADER_LENGTH:
        return None
    label, unit = split_header(text)
    match = _match_label(label)
    if match is None:
        bare = _PROVENANCE.sub(" ", label).strip(" ,;")
        if bare and bare != label.strip():
            match = _match_label(bare)
            if match is not None and unit is None:
                unit = split_header(bare)[1]
    if match is None:
        return None
    if unit is None:
        return match
    return HeaderMatch(
        match.quantity, match.index, match.kind, unit, match.convention, match.uncertainty,
        match.target,
    )  # fmt: skip


def _title(quantity: str) -> str:
    for q in REGISTRY:
        if q.key == quantity:
            return q.title
    return quantity


def explain(text: str) -> str:
    """Plain words for `sheetcycle inspect`: how a header was read, or why it was not."""
    if not isinstance(text, str):
        return f"not text: {type(text).__name__}"
    shown = _tidy(text)
    if not shown:
        return "empty header: nothing to read"
    match = recognise(text)
    if match is not None:
        return _explain_match(shown, match)
    label, unit = split_header(text)
    norm = _normalise_label(label)
    is_unc, _, unmatched = _uncertainty(norm) if norm else (False, None, None)
    if is_unc and unmatched:
        why = _reason_for(unmatched) or f"'{unmatched}' is not a header sheetcycle knows"
        return f"'{shown}' looks like an uncertainty column, but of something not read: {why}"
    reason = _reason_for(norm) or (_reason_for(_normalise_label(shown)) if unit else None)
    if reason:
        return reason
    return (
        f"'{shown}' is not a header sheetcycle knows; see docs/headers.md for the spellings "
        "it reads"
    )


def _reason_for(label: str) -> str | None:
    for rx, reason in _compiled_rejected():
        if rx.fullmatch(label):
            return reason.format(h=label)
    return None


def _explain_match(shown: str, m: HeaderMatch) -> str:
    unit = f", unit '{m.unit_text}'" if m.unit_text else ", no unit in the header"
    if m.uncertainty:
        what = (
            f"uncertainty of the {_title(m.target)}" + (f" {m.index}" if m.index else "")
            if m.target
            else "uncertainty of the column to its left"
        )
        return f"'{shown}': {what}{unit}"
    index = f" {m.index}" if m.index else ""
    if m.quantity == "ionization_energy" and m.index == 0:
        index = " (a sum of ionization energies)"
    text = f"'{shown}': {_title(m.quantity)}{index} ({m.quantity}, {m.kind}){unit}"
    if m.convention:
        text += f"; convention: {m.convention}"
    elif m.quantity in ("lattice_enthalpy", "lattice_energy"):
        text += "; the header does not say formation or dissociation"
    elif m.quantity.startswith("hydration"):
        text += "; the header does not say which scale (conventional or absolute)"
    return text
