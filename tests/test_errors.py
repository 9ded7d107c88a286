"""The error family: structured fields, builtin bases, messages that say where and what."""

from __future__ import annotations

import pytest

from sheetcycle.errors import (
    ChemistryError,
    FormulaSyntaxError,
    ReadError,
    SheetcycleError,
    UnitError,
    UsageError,
    WriteError,
)


@pytest.mark.parametrize(("cls", "builtin"), [
    (UnitError, ValueError), (FormulaSyntaxError, ValueError), (ChemistryError, ValueError),
    (UsageError, ValueError), (ReadError, OSError), (WriteError, OSError)])
def test_each_error_is_also_the_builtin_a_caller_expects(cls, builtin) -> None:
    err = cls("unit not understood", file="salts.xlsx", sheet="Salts", cell="C4",
              found="kJ mol", expected="an energy per mole such as kJ/mol")
    assert isinstance(err, builtin) and isinstance(err, SheetcycleError)
    assert (err.file, err.sheet, err.cell) == ("salts.xlsx", "Salts", "C4")
    assert str(err) == ("salts.xlsx, Salts!C4: unit not understood: expected an energy per "
                        "mole such as kJ/mol, found 'kJ mol'")


def test_message_without_location() -> None:
    assert str(ReadError("not a workbook")) == "not a workbook"
    assert str(ReadError("not a workbook", file="x.txt")) == "x.txt: not a workbook"
