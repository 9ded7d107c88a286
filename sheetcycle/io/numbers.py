"""Numbers typed as text in a cell: '−349', '12.3 ± 0.4', '12.3(4)', '1,234.5', 'n/a', '#REF!'.

:func:`parse_number_text` never raises. It returns ``(value, uncertainty, reason)``:

* a plain number: ``(value, nan, None)``; with an uncertainty: ``(value, u, None)``;
* a number kept with a warning: ``(value, u, reason)``, for approximate values ('~5',
  'approx. 5', 'ca. 5', '≈5'), values in parentheses ('(5)', often an estimate) and
  asymmetric uncertainties ('5 +0.4/-0.3', the larger side is kept);
* no number: ``(nan, nan, reason)``, for blanks, missing markers ('n/a', '-', 'nd' …),
  spreadsheet errors ('#REF!' gives "spreadsheet error #REF!"), bounds ('<5', '>5'), and
  anything else that is not a plain number (including a unit inside the cell).

Separators (the rule, in order):

1. Spaces inside the number are not allowed, except thin, narrow no-break and no-break
   spaces between groups of exactly three digits ('1 234.5').
2. Both ',' and '.' present: the one that comes last is the decimal separator and the other
   must group the integer part in threes ('1,234.5' = 1234.5; '1.234,5' = 1234.5).
3. Only '.': one '.' is a decimal point ('1.234' = 1.234); several must group in threes
   ('1.234.567' = 1234567).
4. Only ',': several must group in threes ('1,234,567'); a single ',' is a decimal comma
   when it cannot be a thousands separator: the integer part is 0 or the comma is not
   followed by exactly three digits ('12,5' = 12.5, '0,234' = 0.234). '1,234' is
   ambiguous (1234 or 1.234) and gives NaN with a reason, never a guess.

Concise uncertainty '12.3(4)' applies the digits in parentheses to the last digits of the
value (12.3 ± 0.4; '1.234(15)' = 1.234 ± 0.015); '12.3(0.4)' with a decimal point is
literal (± 0.4).
"""

from __future__ import annotations

import math
import re
import unicodedata

__all__ = ["is_missing_marker", "parse_number_text"]

NAN = math.nan

_MISSING_WORDS = frozenset(
    {
        "",
        "n/a",
        "na",
        "n.a.",
        "n.a",
        "-",
        "--",
        "---",
        "?",
        "??",
        "nd",
        "n.d.",
        "n.d",
        "nan",
        "none",
        "null",
        "nil",
        "missing",
        "unknown",
        "not measured",
        "not determined",
        "not available",
        "not known",
        "no data",
        "...",
        "…",
        "tbd",
    }
)
# Spreadsheet error values (as the applications display them).
_SPREADSHEET_ERRORS = frozenset(
    {
        "#N/A",
        "#DIV/0!",
        "#REF!",
        "#VALUE!",
        "#NAME?",
        "#NUM!",
        "#NULL!",
        "#SPILL!",
        "#CALC!",
        "#GETTING_DATA",
        "#FIELD!",
        "#BLOCKED!",
        "#CONNECT!",
        "#BUSY!",
        "#UNKNOWN!",
        "#N/A!",
    }
)

_DASHES = dict.fromkeys(map(ord, "\u2212\u2012\u2013\u2014\u2010\u2011\ufe63\uff0d"), "-")
_GROUP_SPACES = "\u2009\u202f\u00a0"
_GROUP = "\x00"  # group spaces are held as this mark while the text is cleaned
_SPACES = re.compile(r"\s+")

# A number with its separators still in: digits, ',', '.', group spaces; optional exponent.
_BODY = r"[0-9][0-9,.\x00]*|[.,][0-9]+"
_EXP = r"(?:[eE][+-]?[0-9]+|\s?[x×·]\s?10\^?([+-]?[0-9]+))?"
_NUM = rf"(?P<sign>[+-]?)\s?(?P<body>{_BODY})(?P<exp>{_EXP})"
_NUM_RE = re.compile(rf"^{_NUM}$")
_PLUSMINUS_RE = re.compile(r"^(?P<v>.+?)\s*(?:±|\+/-|\+-|\+ / -)\s*(?P<u>.+)$")
_CONCISE_RE = re.compile(r"^(?P<v>[+-]?[0-9][0-9.,]*)\((?P<u>[0-9.,]+)\)(?P<exp>[eE][+-]?[0-9]+)?$")
_ASYM_RE = re.compile(r"^(?P<v>.+?)\s*\+\s*(?P<up>[0-9][0-9.,]*)\s*/?\s*-\s*(?P<dn>[0-9][0-9.,]*)$")
_APPROX_RE = re.compile(
    r"^(?:~|∼|≈|≃|approx\.?|approximately|ca\.?|circa|about|c\.)\s*(?P<v>.+)$", re.IGNORECASE
)
_BOUND_RE = re.compile(r"^(?:<=|>=|<|>|≤|≥|≦|≧|≪|≫)")
_PAREN_RE = re.compile(r"^\((?P<v>[^()]+)\)$")


def _clean(text: str) -> str:
    text = unicodedata.normalize("NFKC", text)
    # NFKC turns no-break spaces into plain spaces; restore group spaces before it does.
    return text.translate(_DASHES).strip()


def _number_body(body: str) -> tuple[str | None, str | None]:
    """Apply the separator rule: (the number as 'digits.digits', None) or (None, reason)."""
    if _GROUP in body:
        parts = body.split(_GROUP)
        if not (
            1 <= len(parts[0]) <= 3
            and parts[0].isdigit()
            and all(len(p) == 3 and p.isdigit() for p in parts[1:-1])
            and len(re.split(r"[.,]", parts[-1])[0]) == 3
        ):
            return None, "digit groups that are not groups of three"
        body = body.replace(_GROUP, "")
    has_comma, has_dot = "," in body, "." in body
    if has_comma and has_dot:
        decimal = "," if body.rfind(",") > body.rfind(".") else "."
        group = "." if decimal == "," else ","
        intpart, _, frac = body.rpartition(decimal)
        if decimal in intpart or not _grouped(intpart, group):
            return None, "mixed ',' and '.' that are not thousands groups and a decimal mark"
        if not frac.isdigit():
            return None, "nothing after the decimal mark"
        return intpart.replace(group, "") + "." + frac, None
    if has_dot:
        if body.count(".") == 1:
            return (body, None) if _is_decimal(body, ".") else (None, "not a number")
        if _grouped(body, "."):
            return body.replace(".", ""), None
        return None, "several decimal points"
    if has_comma:
        if body.count(",") > 1:
            if _grouped(body, ","):
                return body.replace(",", ""), None
            return None, "several commas"
        intpart, _, frac = body.partition(",")
        if not _is_decimal(body, ","):
            return None, "not a number"
        if len(frac) == 3 and intpart.strip("0") != "":
            return None, "ambiguous comma: thousands separator or decimal comma"
        return (intpart or "0") + "." + (frac or "0"), None
    return (body, None) if body.isdigit() else (None, "not a number")


def _is_decimal(body: str, mark: str) -> bool:
    intpart, _, frac = body.partition(mark)
    return ((intpart.isdigit() or intpart == "") and frac.isdigit()) or (
        intpart.isdigit() and frac == ""
    )


def _grouped(intpart: str, sep: str) -> bool:
    groups = intpart.split(sep)
    return (
        1 <= len(groups[0]) <= 3
        and groups[0].isdigit()
        and all(len(g) == 3 and g.isdigit() for g in groups[1:])
    )


def _plain(text: str) -> float | str:
    """A single number (no uncertainty): the float, or a reason why not."""
    m = _NUM_RE.match(text)
    if not m:
        return "not a number"
    digits, reason = _number_body(m.group("body"))
    if digits is None:
        return reason or "not a number"
    exp = m.group("exp")
    power = ""
    if exp:
        power = "e" + (exp[1:] if exp[0] in "eE" else re.sub(r"^\s?[x×·]\s?10\^?", "", exp))
    sign = "-" if m.group("sign") == "-" else ""
    if digits.endswith("."):
        digits += "0"
    if digits.startswith("."):
        digits = "0" + digits
    value = float(sign + digits + power)
    if not math.isfinite(value):
        return "out of range"
    return value


def _concise(m: re.Match[str]) -> tuple[float, float] | None:
    v, u, exp = m.group("v"), m.group("u"), m.group("exp") or ""
    value = _plain(v + exp)
    if isinstance(value, str):
        return None
    if "." in u or "," in u:
        unc = _plain(u + exp)
        return None if isinstance(unc, str) else (value, unc)
    if not u.isdigit():
        return None
    mantissa = v.lstrip("+-")
    decimals = len(mantissa.split(".")[1]) if "." in mantissa else 0
    if "," in mantissa:
        return None
    power = -decimals + (int(exp[1:]) if exp else 0)
    return value, float(f"{int(u)}e{power}")


def _not_plain(original: str, why: str) -> tuple[float, float, str]:
    return NAN, NAN, f"not a plain number: {original!r} ({why})"


def _parse(text: str, original: str) -> tuple[float, float, str | None]:
    m = _CONCISE_RE.match(text)
    if m:
        got = _concise(m)
        if got is not None:
            return got[0], got[1], None
    m = _PLUSMINUS_RE.match(text)
    if m:
        value, unc = _plain(m.group("v")), _plain(m.group("u"))
        if isinstance(value, str):
            return _not_plain(original, value)
        if isinstance(unc, str) or unc < 0:
            return _not_plain(original, "the uncertainty after '±' is not a number >= 0")
        return value, unc, None
    m = _ASYM_RE.match(text)
    if m:
        value, up, dn = _plain(m.group("v")), _plain(m.group("up")), _plain(m.group("dn"))
        if not any(isinstance(x, str) for x in (value, up, dn)):
            assert isinstance(value, float) and isinstance(up, float) and isinstance(dn, float)
            return (
                value,
                max(up, dn),
                f"asymmetric uncertainty in {original!r}: the larger side is used",
            )
    value = _plain(text)
    if isinstance(value, str):
        if (
            value == "not a number"
            and re.search(r"[0-9]\s*[A-Za-zÅ°%µμ]", text)
            and re.match(r"^[+-]?[0-9.,]", text)
        ):
            return _not_plain(original, "text after the number; put units in the header")
        return _not_plain(original, value)
    return value, NAN, None


def is_missing_marker(text: str) -> bool:
    """True for a blank, a missing-value marker ('n/a', '-', 'nd' …) or a spreadsheet error."""
    if not isinstance(text, str):
        return False
    cleaned = _SPACES.sub(" ", _clean(text))
    return cleaned.lower() in _MISSING_WORDS or cleaned.upper() in _SPREADSHEET_ERRORS


def parse_number_text(text: str) -> tuple[float, float, str | None]:
    """(value, uncertainty, reason) for the text of one cell. Never raises."""
    try:
        return _parse_number_text(text)
    except Exception as exc:  # a bug here must not stop a batch: report it as the reason
        return NAN, NAN, f"could not read {text!r} as a number ({type(exc).__name__})"


def _parse_number_text(text: str) -> tuple[float, float, str | None]:
    if isinstance(text, bool) or not isinstance(text, (str, int, float)):
        return NAN, NAN, f"not text: {type(text).__name__}"
    if isinstance(text, (int, float)):
        value = float(text)
        return (value, NAN, None) if math.isfinite(value) else (NAN, NAN, "not a finite number")
    # Keep group spaces (NFKC would turn them into plain spaces).
    protected = text.replace(_GROUP, "").translate({ord(c): _GROUP for c in _GROUP_SPACES})
    cleaned = _SPACES.sub(" ", _clean(protected).strip(_GROUP + " \t\r\n")).strip()
    original = text.strip()
    if cleaned == "":
        return NAN, NAN, "blank"
    if cleaned.upper() in _SPREADSHEET_ERRORS:
        return NAN, NAN, f"spreadsheet error {cleaned.upper()}"
    if cleaned.lower() in _MISSING_WORDS:
        return NAN, NAN, f"marked as missing: {original!r}"
    if cleaned.startswith("#"):
        return NAN, NAN, f"spreadsheet error {cleaned}"
    if _BOUND_RE.match(cleaned):
        return _not_plain(original, "a bound, not a value")
    m = _APPROX_RE.match(cleaned)
    if m:
        value, unc, reason = _parse(m.group("v").strip(), original)
        if reason is None or not math.isnan(value):
            note = "approximate value" + (f"; {reason}" if reason else "")
            return value, unc, note
        return value, unc, reason
    m = _PAREN_RE.match(cleaned)
    if m:
        value, unc, reason = _parse(m.group("v").strip(), original)
        if not math.isnan(value):
            return value, unc, "value in parentheses (often marks an estimate)"
        return value, unc, reason
    return _parse(cleaned, original)
