"""sheetcycle: closes Born-Haber and Hess's-law cycles in thermochemistry lab workbooks."""

from __future__ import annotations

__version__ = "0.1.0"

__all__ = ["__version__"]
