"""The public surface is exactly __all__: nothing leaks by accident, nothing listed is missing."""

from __future__ import annotations

import types

import sheetcycle


def test_all_is_sorted_and_complete() -> None:
    assert sheetcycle.__all__ == sorted(sheetcycle.__all__)
    for name in sheetcycle.__all__:
        assert hasattr(sheetcycle, name), name


def test_nothing_public_outside_all() -> None:
    public = {n for n, v in vars(sheetcycle).items()
              if not n.startswith("_") and not isinstance(v, types.ModuleType)}
    assert public == set(sheetcycle.__all__) - {"__version__"}


def test_public_callables_have_docstrings() -> None:
    for name in sheetcycle.__all__:
        obj = getattr(sheetcycle, name)
        if callable(obj):
            assert obj.__doc__, name
