"""The machine-readable report of a run: one JSON document, strictly valid, deterministic.

Missing numbers (NaN) and infinities become ``null``; keys keep a fixed order, so the
same run always gives the same bytes.
"""

from __future__ import annotations

import json
import math
from enum import Enum
from pathlib import Path, PurePath
from typing import Any

import numpy as np

from sheetcycle.io.atomic import atomic_output, write_error
from sheetcycle.model import Column, Flag, RowResult, RunResult, Severity, Table

__all__ = ["INDENT_ROWS", "report_dict", "report_text", "to_json_value", "write_json"]

#: Reports of more rows than this are written without indentation (about 10x faster).
INDENT_ROWS = 2000


def to_json_value(x: Any) -> Any:
    """Plain JSON value for ``x``: non-finite floats → None, numpy/Path/Enum → plain types."""
    if x is None or isinstance(x, bool | str):
        return x
    if isinstance(x, Enum):
        return to_json_value(x.value)
    if isinstance(x, int | np.integer):
        return int(x)
    if isinstance(x, float | np.floating):
        return float(x) if math.isfinite(x) else None
    if isinstance(x, dict):
        return {str(k): to_json_value(v) for k, v in x.items()}
    if isinstance(x, list | tuple | np.ndarray):
        return [to_json_value(v) for v in x]
    if isinstance(x, set | frozenset):
        return sorted((to_json_value(v) for v in x), key=repr)
    if isinstance(x, PurePath):
        return str(x)
    return str(x)


def _flag(f: Flag, *, with_sheet: bool) -> dict[str, Any]:
    d: dict[str, Any] = {"code": f.code, "severity": Severity(f.severity).value}
    if with_sheet:
        d["sheet"] = f.sheet
    d["cell"] = f.cell
    d["message"] = f.message
    return d


def _column(c: Column) -> dict[str, Any]:
    return {"header": c.header, "quantity": c.quantity, "unit": c.unit}


def _table(t: Table) -> dict[str, Any]:
    return {
        "sheet": t.sheet,
        "header_row": t.header_row,
        "columns": [_column(c) for c in t.columns],
    }


def _row(r: RowResult) -> dict[str, Any]:
    # already plain: ComputedValue.as_dict turns non-finite numbers into None
    return {
        "sheet": r.sheet,
        "row": int(r.row),
        "formula": r.formula,
        "values": {name: v.as_dict() for name, v in r.values.items()},
        "flags": [_flag(f, with_sheet=False) for f in r.flags],
    }


def report_dict(run: RunResult) -> dict[str, Any]:
    """The report as plain JSON-ready values, keys in their documented order."""
    head = to_json_value({
        "version": run.version,
        "input": run.input,
        "settings": run.settings,
        "tables": [_table(t) for t in run.tables],
    })
    # The rows are most of a big report and are built from plain values already; walking
    # them again through to_json_value cost more than building them.
    return {
        **head,
        "rows": [_row(r) for r in run.rows],
        "references": to_json_value([ref.as_dict() for ref in run.references]),
        "file_flags": [_flag(f, with_sheet=True) for f in run.file_flags],
    }


def report_text(run: RunResult) -> str:
    """The report as JSON text (UTF-8 safe, NaN-free, indented by one space)."""
    return json.dumps(report_dict(run), ensure_ascii=False, indent=1, allow_nan=False) + "\n"


def _stream(run: RunResult, fh: Any) -> None:
    """The report written piece by piece: the same JSON document as :func:`report_dict`,
    compact, without ever holding the whole tree or the whole text (a million-row run's
    report is gigabytes)."""
    def dump(x: Any) -> str:
        return json.dumps(x, ensure_ascii=False, allow_nan=False, separators=(",", ":"))

    head = to_json_value({"version": run.version, "input": run.input,
                          "settings": run.settings,
                          "tables": [_table(t) for t in run.tables]})
    fh.write(dump(head)[:-1] + ',"rows":[')
    for k, r in enumerate(run.rows):
        fh.write(("," if k else "") + dump(_row(r)))
    fh.write('],"references":' + dump(to_json_value([ref.as_dict() for ref in run.references])))
    fh.write(',"file_flags":' + dump([_flag(f, with_sheet=True) for f in run.file_flags]))
    fh.write("}\n")


def write_json(run: RunResult, path: Path, *, force: bool = False) -> None:
    """Write the report to ``path`` atomically; refuses to overwrite unless ``force``.

    Up to INDENT_ROWS rows the report is indented for people who open it; a bigger one is
    streamed compactly (the same JSON), row by row.
    """
    inputs = [Path(run.input)] if run.input else []
    with atomic_output(Path(path), force=force, inputs=inputs) as tmp:
        try:
            if len(run.rows) <= INDENT_ROWS:
                tmp.write_text(report_text(run), encoding="utf-8", newline="\n")
            else:
                with open(tmp, "w", encoding="utf-8", newline="\n") as fh:
                    _stream(run, fh)
        except OSError as exc:
            raise write_error(f"cannot write the report ({exc.strerror})", file=str(path)) from exc
