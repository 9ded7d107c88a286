"""One exception family for structural problems.

Data problems in a row are never exceptions: they become :class:`~sheetcycle.model.Flag`
values and the batch goes on. Exceptions are for things that stop a whole file or a whole
call: an unreadable workbook, an unknown unit in a header, a malformed chemical formula
given to a function directly.

Every subclass also inherits the builtin a caller would expect (``UnitError`` is a
``ValueError``) and builds its message from structured fields in ``__str__``, so the text
says what was wrong, what was expected and what was found.
"""

from __future__ import annotations

__all__ = [
    "ChemistryError",
    "FormulaSyntaxError",
    "ReadError",
    "SheetcycleError",
    "UnitError",
    "UsageError",
    "WriteError",
]


class SheetcycleError(Exception):
    """Base class of every error sheetcycle raises on purpose."""

    def __init__(
        self,
        problem: str,
        *,
        file: str | None = None,
        sheet: str | None = None,
        cell: str | None = None,
        found: object = None,
        expected: str | None = None,
    ) -> None:
        super().__init__(problem)
        self.problem = problem
        self.file = file
        self.sheet = sheet
        self.cell = cell
        self.found = found
        self.expected = expected

    def where(self) -> str:
        """'file.xlsx, Sheet1!B7' or as much of it as is known."""
        parts: list[str] = []
        if self.file:
            parts.append(str(self.file))
        if self.sheet and self.cell:
            parts.append(f"{self.sheet}!{self.cell}")
        elif self.sheet:
            parts.append(f"sheet '{self.sheet}'")
        elif self.cell:
            parts.append(self.cell)
        return ", ".join(parts)

    def __str__(self) -> str:
        text = self.problem
        if self.expected is not None:
            text += f": expected {self.expected}"
            if self.found is not None:
                text += f", found {self.found!r}"
        elif self.found is not None:
            text += f": found {self.found!r}"
        where = self.where()
        return f"{where}: {text}" if where else text


class UnitError(SheetcycleError, ValueError):
    """A unit text that cannot be parsed, or a unit of the wrong dimension."""


class FormulaSyntaxError(SheetcycleError, ValueError):
    """A chemical formula or reaction equation that cannot be parsed."""


class ChemistryError(SheetcycleError, ValueError):
    """A formula that parses but cannot be assigned ions, balanced, or looked up."""


class ReadError(SheetcycleError, OSError):
    """A file that cannot be read as a workbook (or is refused as unsafe)."""


class WriteError(SheetcycleError, OSError):
    """An output that cannot be written; nothing partial is left behind."""


class UsageError(SheetcycleError, ValueError):
    """Bad options or arguments from the caller (exit code 2 on the command line)."""
