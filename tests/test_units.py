"""Unit parsing and conversion to the internal basis.

Reference values come from scipy.constants (scipy 1.17 ships CODATA 2022; e, N_A, h and c
are exact SI-2019 values, identical in CODATA 2018 and 2022; the hartree differs between
the two by about 1e-12 relative, far below the tolerances used here). They are computed
independently of pint, which sheetcycle uses for the conversions.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.constants as sc
from hypothesis import given, settings
from hypothesis import strategies as st

from sheetcycle import units
from sheetcycle.errors import SheetcycleError, UnitError, UsageError

# --------------------------------------------------------------------------- reference values
# CODATA via scipy.constants: energy per particle * N_A, in kJ/mol.
EV_KJ_MOL = sc.e * sc.N_A / 1000  # 96.4853321... kJ/mol
CM1_KJ_MOL = sc.h * sc.c * 100 * sc.N_A / 1000  # 0.0119626566 kJ/mol
HARTREE_KJ_MOL = sc.physical_constants["Hartree energy"][0] * sc.N_A / 1000  # 2625.4996 kJ/mol
RYDBERG_KJ_MOL = sc.physical_constants["Rydberg constant times hc in J"][0] * sc.N_A / 1000
KCAL_KJ = sc.calorie_th  # thermochemical calorie: 4.184 J, so 1 kcal = 4.184 kJ


def test_reference_values_are_the_published_ones() -> None:
    # The same numbers as printed in the CODATA tables (rounded there), so a wrong scipy
    # constant name cannot slip through: 96.485 332 1 kJ/mol per eV; 2625.4996 kJ/mol.
    assert EV_KJ_MOL == pytest.approx(96.4853321, abs=1e-7)
    assert HARTREE_KJ_MOL == pytest.approx(2625.4996, abs=1e-4)
    assert CM1_KJ_MOL == pytest.approx(0.01196266, abs=1e-8)


@pytest.mark.parametrize(
    ("unit", "expected"),
    [
        ("eV", EV_KJ_MOL),
        ("eV/particle", EV_KJ_MOL),
        ("eV/f.u.", EV_KJ_MOL),
        ("meV/f.u.", EV_KJ_MOL / 1000),
        ("kcal/mol", KCAL_KJ),
        ("kcal mol-1", KCAL_KJ),
        ("kJ/mol", 1.0),
        ("kJ mol-1", 1.0),
        ("kJ·mol⁻¹", 1.0),
        ("kJ/mole", 1.0),
        ("KJ/mol", 1.0),
        ("J/mol", 1e-3),
        ("cm-1", CM1_KJ_MOL),
        ("cm⁻¹", CM1_KJ_MOL),
        ("Ha", HARTREE_KJ_MOL),
        ("hartree", HARTREE_KJ_MOL),
        ("Ry", RYDBERG_KJ_MOL),
    ],
)
def test_energy_factors_against_codata(unit: str, expected: float) -> None:
    conv = units.conversion(unit, "energy")
    assert conv.factor == pytest.approx(expected, rel=1e-9)
    assert conv.offset == 0.0


def test_kcal_is_the_thermochemical_calorie() -> None:
    # calorie_th = 4.184 J exactly (scipy.constants); not the IT calorie 4.1868 J.
    assert units.conversion("kcal/mol", "energy").factor == pytest.approx(4.184, abs=1e-12)
    assert sc.calorie_th == 4.184


def test_unicode_minus_is_not_read_as_a_product() -> None:
    # 'kJ mol−1' (U+2212) must be kJ per mol; read naively it is kJ·mol (factor would not
    # exist for an energy column at all).
    for text in ("kJ mol−1", "kJ mol–1", "kJ mol⁻¹", "kJ·mol−1"):
        assert units.parse_unit(text) == units.parse_unit("kJ/mol"), text
        assert units.conversion(text, "energy").factor == pytest.approx(1.0)


def test_per_atom_needs_atoms_per_formula_unit() -> None:
    conv = units.conversion("eV/atom", "energy")
    assert conv.per_entity == "atom"
    # eV/atom with 2 atoms per formula unit: twice the per-particle value.
    out = units.to_internal(np.array([1.0, 1.0]), conv, atoms_per_formula_unit=np.array([2, 3]))
    np.testing.assert_allclose(out, [2 * EV_KJ_MOL, 3 * EV_KJ_MOL], rtol=1e-12)
    assert units.to_internal([1.0], conv, 2)[0] == pytest.approx(2 * EV_KJ_MOL)
    with pytest.raises(UnitError, match="per atom"):
        units.to_internal(np.array([1.0]), conv)
    meV = units.conversion("meV/atom", "energy")
    assert units.to_internal([1000.0], meV, 2)[0] == pytest.approx(2 * EV_KJ_MOL)


def test_per_entity_labels() -> None:
    assert units.conversion("eV", "energy").per_entity == "formula_unit"
    assert units.conversion("eV/f.u.", "energy").per_entity == "formula_unit"
    assert units.conversion("cm-1", "energy").per_entity == "formula_unit"
    assert units.conversion("kJ/mol", "energy").per_entity is None
    assert units.conversion("pm", "length").per_entity is None
    assert units.conversion("Å3/atom", "volume").per_entity == "atom"


@pytest.mark.parametrize(
    ("unit", "kind", "expected"),
    [
        # scipy.constants: angstrom = 1e-10 m, pico = 1e-12, nano = 1e-9.
        ("Å", "length", sc.angstrom / sc.pico),
        ("A", "length", sc.angstrom / sc.pico),  # bare A is ångström for lengths
        ("nm", "length", sc.nano / sc.pico),
        ("pm", "length", 1.0),
        ("g/cm3", "density", 1.0),
        ("g cm-3", "density", 1.0),
        ("kg/m3", "density", sc.kilo / (sc.centi**-3)),  # 1 kg/m3 = 1e-3 g/cm3
        ("Å3", "volume", (sc.angstrom / sc.nano) ** 3),
        ("A^3", "volume", (sc.angstrom / sc.nano) ** 3),
        ("nm3", "volume", 1.0),
        # 1 cm3/mol = 1e-6 m3 / N_A per formula unit = 1/602.214076 nm3.
        ("cm3/mol", "volume", sc.centi**3 / sc.N_A / sc.nano**3),
        ("J/(mol K)", "heat_capacity", 1.0),
        ("J K-1 mol-1", "heat_capacity", 1.0),
        ("J mol^{-1} K^{-1}", "heat_capacity", 1.0),
        ("cal/(mol K)", "heat_capacity", sc.calorie_th),
        ("K", "temperature", 1.0),
        ("%", "dimensionless", 0.01),
        ("", "dimensionless", 1.0),
    ],
)
def test_other_kinds(unit: str, kind: str, expected: float) -> None:
    assert units.conversion(unit, kind).factor == pytest.approx(expected, rel=1e-12)


def test_cm3_per_mol_value() -> None:
    # The brief's figure: 1 cm3/mol -> 1/602.214076 nm3 per formula unit (N_A exact, SI 2019).
    assert units.conversion("cm3/mol", "volume").factor == pytest.approx(1 / 602.214076, rel=1e-12)


def test_celsius_offset() -> None:
    # scipy.constants.zero_Celsius = 273.15 K.
    conv = units.conversion("°C", "temperature")
    assert (conv.factor, conv.offset) == (1.0, pytest.approx(sc.zero_Celsius))
    out = units.to_internal(np.array([0.0, 25.0, np.nan]), conv)
    np.testing.assert_allclose(out[:2], [273.15, 298.15])
    assert math.isnan(out[2])
    # °F: scipy.constants.convert_temperature as the independent reference.
    f = units.conversion("°F", "temperature")
    assert units.to_internal([212.0], f)[0] == pytest.approx(
        sc.convert_temperature(212.0, "Fahrenheit", "Kelvin")
    )


def test_nan_stays_nan_and_shape_is_kept() -> None:
    conv = units.conversion("eV", "energy")
    values = np.array([[1.0, np.nan], [np.nan, 2.0]])
    out = units.to_internal(values, conv)
    assert out.shape == (2, 2)
    assert np.isnan(out[0, 1]) and np.isnan(out[1, 0])
    assert out[1, 1] == pytest.approx(2 * EV_KJ_MOL)
    atoms = units.to_internal([1.0, 1.0], units.conversion("eV/atom", "energy"), [2.0, np.nan])
    assert math.isnan(atoms[1])


def test_j_per_k_rejected_with_a_clear_message() -> None:
    with pytest.raises(UnitError) as info:
        units.conversion("J/K", "energy")
    err = info.value
    assert isinstance(err, SheetcycleError) and isinstance(err, ValueError)
    assert err.found == "J/K"
    assert str(err) == (
        "unit 'J/K' is an entropy/heat capacity, not an energy per amount: expected an "
        "energy per mole such as kJ/mol, kcal/mol or eV, found 'J/K'"
    )


@pytest.mark.parametrize(
    ("unit", "kind", "words"),
    [
        ("kJ", "energy", "an energy without 'per mole'"),
        ("kcal", "energy", "an energy without 'per mole'"),
        ("J/K", "heat_capacity", "an entropy/heat capacity"),
        ("J/(g K)", "heat_capacity", "a specific heat capacity"),
        ("kJ/mol-1", "energy", "an energy times an amount"),
        ("A", "energy", "an electric current"),
        ("pm", "energy", "a length"),
        ("kJ/mol", "length", "an energy per amount, not a length"),
        ("g/mol", "density", "a molar mass"),
        ("kJ/mol", "temperature", "not a temperature"),
        ("eV", "dimensionless", "not a pure number"),
        ("", "energy", "no unit given"),
        ("   ", "length", "no unit given"),
    ],
)
def test_wrong_dimension_rejected(unit: str, kind: str, words: str) -> None:
    with pytest.raises(UnitError, match=words.replace("(", r"\(").replace(")", r"\)")):
        units.conversion(unit, kind)


@pytest.mark.parametrize(
    "text", ["foo", "kJ/mool", "10^3 kJ/mol", "kJ mol - 1", "2 eV", "kJ/(mol", "m**99"]
)
def test_unparseable_units(text: str) -> None:
    with pytest.raises(UnitError) as info:
        units.parse_unit(text)
    assert info.value.found == text
    assert info.value.expected


def test_unknown_kind_is_a_usage_error() -> None:
    with pytest.raises(UsageError):
        units.conversion("kJ/mol", "enthalpy")


@pytest.mark.parametrize(
    ("text", "expected"),
    [
        ("kJ mol-1", "kJ*mol**-1"),
        ("kJ·mol⁻¹", "kJ*mol**-1"),
        ("kJ mol−1", "kJ*mol**-1"),
        ("kJ × mol⁻¹", "kJ*mol**-1"),
        ("kcal mol^-1", "kcal*mol**-1"),
        ("g cm-3", "g*cm**-3"),
        ("J/(mol K)", "J/(mol*K)"),
        ("J K-1 mol-1", "J*K**-1*mol**-1"),
        ("(kJ/mol)", "kJ/mol"),
        ("[eV]", "eV"),
        ("eV per atom", "eV/atom"),
        ("eV/f.u.", "eV/formula_unit"),
        ("Å3", "angstrom**3"),
        ("°C", "degC"),
        ("cm⁻¹", "cm**-1"),
    ],
)
def test_normalise_unit_text(text: str, expected: str) -> None:
    assert units.normalise_unit_text(text) == expected
    # normalising twice changes nothing
    assert units.normalise_unit_text(expected) == expected


def test_bare_a_is_angstrom_only_for_lengths_and_volumes() -> None:
    assert units.normalise_unit_text("A", kind="length") == "angstrom"
    assert units.normalise_unit_text("A3", kind="volume") == "angstrom**3"
    assert units.normalise_unit_text("A") == "A"


def test_registry_is_built_once() -> None:
    assert units.registry() is units.registry()
    # the per-entity counts are defined and equal to pint's particle
    ureg = units.registry()
    assert ureg.Quantity(1, "atom").to("particle").magnitude == pytest.approx(1.0)
    assert ureg.Quantity(1, "formula_unit").to("mol").magnitude == pytest.approx(1 / sc.N_A)


def test_conversion_is_cached() -> None:
    assert units.conversion("kJ mol-1", "energy") is units.conversion("kJ mol-1", "energy")


def test_100k_values_convert_as_one_column() -> None:
    values = np.random.default_rng(0).normal(size=100_000)
    conv = units.conversion("eV/atom", "energy")
    atoms = np.full(100_000, 2.0)
    units.to_internal(values, conv, atoms)  # warm-up
    out = units.to_internal(values, conv, atoms)  # whole column at once (speed: tests/bench)
    np.testing.assert_allclose(out, values * 2 * EV_KJ_MOL, rtol=1e-12)


# --------------------------------------------------------------------------- round trip

_ROUND_TRIP_UNITS = [
    ("kJ/mol", "energy", "kJ/mol"),
    ("kcal/mol", "energy", "kcal/mol"),
    ("eV", "energy", "eV/particle"),
    ("eV/atom", "energy", "eV/particle"),  # per atom: 1 atom per formula unit in the test
    ("Ha", "energy", "hartree/particle"),
    ("J K-1 mol-1", "heat_capacity", "J/(mol*K)"),
    ("Å", "length", "angstrom"),
    ("nm", "length", "nm"),
    ("g cm-3", "density", "g/cm**3"),
    ("kg/m3", "density", "kg/m**3"),
    ("cm3/mol", "volume", "cm**3/mol"),
    ("Å3", "volume", "angstrom**3"),
    ("°C", "temperature", "degC"),
    ("°F", "temperature", "degF"),
    ("K", "temperature", "K"),
]


@settings(max_examples=200, deadline=None)
@given(
    st.sampled_from(_ROUND_TRIP_UNITS),
    st.floats(min_value=-1e6, max_value=1e6, allow_nan=False),
)
def test_round_trip_through_pint(case: tuple[str, str, str], value: float) -> None:
    unit_text, kind, pint_unit = case
    ureg = units.registry()
    conv = units.conversion(unit_text, kind)
    internal = units.to_internal(np.array([value]), conv, atoms_per_formula_unit=1.0)[0]
    internal_unit = {
        "energy": "kJ/mol",
        "heat_capacity": "J/(mol*K)",
        "length": "pm",
        "density": "g/cm**3",
        "volume": "nm**3/particle",
        "temperature": "K",
    }[kind]
    if kind == "volume" and "mol" not in pint_unit:
        internal_unit = "nm**3"
    back = ureg.Quantity(internal, internal_unit).to(pint_unit).magnitude
    assert back == pytest.approx(value, rel=1e-9, abs=1e-9)
    # and sheetcycle's own inverse agrees
    assert units.from_internal([internal], conv, 1.0)[0] == pytest.approx(value, rel=1e-9, abs=1e-9)


@settings(max_examples=300, deadline=None)
@given(st.text(max_size=30))
def test_parse_unit_raises_only_unit_error(text: str) -> None:
    try:
        units.parse_unit(text)
    except UnitError:
        pass
    assert isinstance(units.looks_like_unit(text), bool)
