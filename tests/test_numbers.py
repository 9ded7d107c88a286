"""Numbers typed as text in cells.

Sources for the conventions checked here:
- Concise uncertainty notation '12.3(4)' = 12.3 ± 0.4, the digits in parentheses applying
  to the last digits of the value: JCGM 100:2008 (GUM) §7.2.2, from memory; CODATA tables
  print their values this way (e.g. the Hartree energy 4.359 744 722 2060(48) e-18 J in
  scipy.constants' CODATA 2022 table, with uncertainty 4.8e-30 J), used below.
- Decimal sign: a point or a comma; digits may be grouped in threes separated by a (thin)
  space: ISO 80000-1:2009 §7.3.1, from memory.
- Spreadsheet error values '#N/A', '#DIV/0!', '#REF!', '#VALUE!', '#NAME?', '#NUM!',
  '#NULL!': ECMA-376 Part 1 §18.17.2 (error values), from memory.
"""

from __future__ import annotations

import math

import pytest
import scipy.constants as sc
from hypothesis import given, settings
from hypothesis import strategies as st

from sheetcycle.io.numbers import is_missing_marker, parse_number_text

NAN = float("nan")


def same(a: float, b: float) -> bool:
    return (math.isnan(a) and math.isnan(b)) or a == pytest.approx(b, rel=1e-12, abs=1e-15)


@pytest.mark.parametrize(
    ("text", "value", "unc"),
    [
        ("−349", -349.0, NAN),  # U+2212 minus
        ("–349", -349.0, NAN),  # en dash typed as minus
        ("- 349", -349.0, NAN),
        ("+5", 5.0, NAN),
        ("12.3 ± 0.4", 12.3, 0.4),
        ("12.3±0.4", 12.3, 0.4),
        ("12.3+/-0.4", 12.3, 0.4),
        ("12.3 +- 0.4", 12.3, 0.4),
        ("−349 ± 2", -349.0, 2.0),
        ("12.3(4)", 12.3, 0.4),  # GUM §7.2.2 concise form
        ("1.234(15)", 1.234, 0.015),
        ("1234(5)", 1234.0, 5.0),
        ("-0.5(1)", -0.5, 0.1),
        ("1.23(4)e3", 1230.0, 40.0),
        ("12.3(0.4)", 12.3, 0.4),  # explicit decimal: literal uncertainty
        ("1.5e3", 1500.0, NAN),
        ("1.5E-3", 0.0015, NAN),
        ("1.5×10⁻³", 0.0015, NAN),
        ("2.5 x 10^4", 25000.0, NAN),
        ("1,234.5", 1234.5, NAN),
        ("1,234,567", 1234567.0, NAN),
        ("1.234,5", 1234.5, NAN),
        ("1.234.567", 1234567.0, NAN),
        ("1\u2009234.5", 1234.5, NAN),  # thin-space grouping (ISO 80000-1)
        ("1\u00a0234", 1234.0, NAN),
        ("  7 ", 7.0, NAN),
        ("12,5", 12.5, NAN),  # decimal comma, unambiguous
        ("0,234", 0.234, NAN),
        ("-12,50", -12.5, NAN),
        ("12,3 ± 0,4", 12.3, 0.4),
        (".5", 0.5, NAN),
        ("5.", 5.0, NAN),
        ("0", 0.0, NAN),  # a literal zero is zero
    ],
)
def test_plain_numbers(text: str, value: float, unc: float) -> None:
    v, u, reason = parse_number_text(text)
    assert reason is None, reason
    assert same(v, value), (text, v)
    assert same(u, unc), (text, u)


def test_codata_concise_value() -> None:
    # CODATA 2022 Hartree energy as printed in concise form, checked against the separate
    # value and uncertainty that scipy.constants carries for it.
    value, _, unc = sc.physical_constants["Hartree energy"]  # (value, unit, uncertainty)
    v, u, reason = parse_number_text("4.3597447222060(48)e-18")
    assert reason is None
    assert v == pytest.approx(value, rel=1e-15)
    assert u == pytest.approx(unc, rel=1e-9)


@pytest.mark.parametrize(
    ("text", "reason"),
    [
        ("", "blank"),
        ("   ", "blank"),
        ("n/a", "marked as missing: 'n/a'"),
        ("NA", "marked as missing: 'NA'"),
        ("N/A", "marked as missing: 'N/A'"),
        ("-", "marked as missing: '-'"),
        ("—", "marked as missing: '—'"),
        ("?", "marked as missing: '?'"),
        ("nd", "marked as missing: 'nd'"),
        ("n.d.", "marked as missing: 'n.d.'"),
        ("not measured", "marked as missing: 'not measured'"),
        ("#N/A", "spreadsheet error #N/A"),
        ("#DIV/0!", "spreadsheet error #DIV/0!"),
        ("#REF!", "spreadsheet error #REF!"),
        ("#VALUE!", "spreadsheet error #VALUE!"),
        ("#NAME?", "spreadsheet error #NAME?"),
        ("#NUM!", "spreadsheet error #NUM!"),
        ("#NULL!", "spreadsheet error #NULL!"),
        ("<5", "not a plain number: '<5' (a bound, not a value)"),
        (">5", "not a plain number: '>5' (a bound, not a value)"),
        ("≤ 5", "not a plain number: '≤ 5' (a bound, not a value)"),
        (
            "1,234",
            "not a plain number: '1,234' (ambiguous comma: thousands separator or decimal comma)",
        ),
        (
            "12.3 kJ/mol",
            "not a plain number: '12.3 kJ/mol' (text after the number; put units in the header)",
        ),
        ("abc", "not a plain number: 'abc' (not a number)"),
        ("1e999", "not a plain number: '1e999' (out of range)"),
        ("inf", "not a plain number: 'inf' (not a number)"),
        ("1,2,3", "not a plain number: '1,2,3' (several commas)"),
        (
            "12.3 ± -0.4",
            "not a plain number: '12.3 ± -0.4' (the uncertainty after '±' is not a number >= 0)",
        ),
    ],
)
def test_missing_and_refused(text: str, reason: str) -> None:
    v, u, why = parse_number_text(text)
    assert math.isnan(v) and math.isnan(u)
    assert why == reason


@pytest.mark.parametrize(
    ("text", "value", "reason"),
    [
        ("~5", 5.0, "approximate value"),
        ("∼5", 5.0, "approximate value"),
        ("≈5", 5.0, "approximate value"),
        ("approx 5", 5.0, "approximate value"),
        ("approx. −12.5", -12.5, "approximate value"),
        ("ca. 12", 12.0, "approximate value"),
        ("(5)", 5.0, "value in parentheses (often marks an estimate)"),
        ("5 +0.4/-0.3", 5.0, "asymmetric uncertainty in '5 +0.4/-0.3': the larger side is used"),
    ],
)
def test_kept_with_a_warning(text: str, value: float, reason: str) -> None:
    v, _, why = parse_number_text(text)
    assert v == pytest.approx(value)
    assert why == reason


def test_approximate_keeps_uncertainty() -> None:
    assert parse_number_text("~12.3 ± 0.4")[:2] == (12.3, 0.4)
    assert parse_number_text("5 +0.4/-0.3")[1] == pytest.approx(0.4)


@pytest.mark.parametrize(
    "text", ["", " ", "n/a", "N/A", "NA", "-", "—", "?", "nd", "not measured", "#N/A", "#REF!"]
)
def test_missing_markers(text: str) -> None:
    assert is_missing_marker(text)


@pytest.mark.parametrize("text", ["0", "5", "~5", "<5", "abc", "1,234"])
def test_not_missing_markers(text: str) -> None:
    assert not is_missing_marker(text)


@settings(max_examples=500, deadline=None)
@given(st.text(max_size=40))
def test_never_raises(text: str) -> None:
    v, u, reason = parse_number_text(text)
    assert isinstance(v, float) and isinstance(u, float)
    assert reason is None or isinstance(reason, str)
    # the catch-all fallback is a safety net, not a code path
    assert reason is None or not reason.startswith("could not read")
    if reason is None:
        assert math.isfinite(v)
    assert isinstance(is_missing_marker(text), bool)


@settings(max_examples=300, deadline=None)
@given(st.text(alphabet="0123456789.,-+±()eE ~<>#/naNA\u2212\u2009", max_size=20))
def test_never_raises_on_number_like_text(text: str) -> None:
    _, u, reason = parse_number_text(text)
    assert reason is None or not reason.startswith("could not read")
    assert math.isnan(u) or u >= 0


@settings(max_examples=300, deadline=None)
@given(st.floats(allow_nan=False, allow_infinity=False))
def test_repr_of_a_float_reads_back(x: float) -> None:
    v, u, reason = parse_number_text(repr(x))
    assert reason is None
    assert v == x and math.isnan(u)


@settings(max_examples=200, deadline=None)
@given(
    st.floats(min_value=-1e6, max_value=1e6, allow_nan=False),
    st.floats(min_value=0, max_value=1e3, allow_nan=False),
)
def test_plus_minus_reads_back(x: float, u: float) -> None:
    v, unc, reason = parse_number_text(f"{x!r} ± {u!r}")
    assert reason is None
    assert (v, unc) == (x, u)


@settings(max_examples=200, deadline=None)
@given(st.integers(min_value=10**6, max_value=10**15))
def test_thousands_commas_read_back(n: int) -> None:
    # two or more commas: always thousands groups ('1,234' alone is ambiguous, see above)
    v, _, reason = parse_number_text(f"{n:,}")
    assert reason is None and v == float(n)
