"""Benchmark: a full 1,048,576-row sheet through ``sheetcycle annotate`` (issue 8, scale).

Run: python tests/bench/bench_scale.py [--rows 1048576] [--xlsx] [--keep DIR]

Writes a workbook whose one sheet fills every row a worksheet can hold (1 header row and
1,048,575 compounds; xlsxwriter ``constant_memory``), then runs
``sheetcycle annotate BIG --json OUT`` in a subprocess and reports the child's wall time and
peak resident memory (``os.wait4`` rusage of that one child). With ``--xlsx`` it also asks
for a results workbook (``-o``), which may be refused at the sheet row limit.

The compounds are a rotation of common binary salts with invented formation enthalpies (a
scenario of our own: values are near, not equal to, handbook ones, and every 97th row has a
blank, every 101st a text value, so flags are raised at scale). Not a test: it never fails.
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

MAX_ROWS = 1_048_576

# (formula, rough formation enthalpy in kJ/mol): invented values near handbook magnitudes.
SALTS = [
    ("NaCl", -411.0), ("KCl", -436.0), ("LiF", -616.0), ("NaF", -576.0), ("KBr", -394.0),
    ("MgO", -601.0), ("CaO", -635.0), ("MgCl2", -641.0), ("CaF2", -1228.0), ("RbI", -334.0),
    ("CsCl", -443.0), ("SrCl2", -829.0), ("BaO", -548.0), ("LiCl", -408.0), ("NaBr", -361.0),
]


def make_input(path: Path, rows: int) -> None:
    import xlsxwriter

    wb = xlsxwriter.Workbook(str(path), {"constant_memory": True})
    ws = wb.add_worksheet("Salts")
    ws.write_row(0, 0, ["Compound", "ΔfH° / kJ mol⁻¹", "u(ΔfH)", "Remarks"])
    n = len(SALTS)
    for r in range(1, rows):
        formula, h = SALTS[r % n]
        ws.write_string(r, 0, formula)
        if r % 97 == 0:
            pass  # a blank value: flagged
        elif r % 101 == 0:
            ws.write_string(r, 1, "n/a")  # text in a numeric column: flagged
        else:
            ws.write_number(r, 1, h + (r % 7) * 0.1)
        ws.write_number(r, 2, 0.5)
        if r % 1000 == 0:
            ws.write_string(r, 3, f"batch {r // 1000}")
    wb.close()


def run_child(argv: list[str]) -> tuple[int, float, int, str]:
    """(exit code, wall seconds, peak RSS bytes, output) of one child process.

    Output goes to a temporary file, so the child is reaped with ``os.wait4``, whose
    rusage is that child's alone.
    """
    with tempfile.TemporaryFile() as sink:
        t0 = time.perf_counter()
        proc = subprocess.Popen(argv, stdout=sink, stderr=subprocess.STDOUT)
        _, status, usage = os.wait4(proc.pid, 0)
        wall = time.perf_counter() - t0
        proc.returncode = os.waitstatus_to_exitcode(status)
        sink.seek(0)
        text = sink.read().decode("utf-8", "replace")
    return proc.returncode, wall, usage.ru_maxrss * 1024, text


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--rows", type=int, default=MAX_ROWS)
    ap.add_argument("--xlsx", action="store_true", help="also write a results workbook (-o)")
    ap.add_argument("--keep", metavar="DIR", help="work in DIR and keep the files")
    args = ap.parse_args()
    folder = Path(args.keep or tempfile.mkdtemp(prefix="sheetcycle-scale-"))
    folder.mkdir(parents=True, exist_ok=True)
    big = folder / "big.xlsx"
    t0 = time.perf_counter()
    make_input(big, args.rows)
    made = time.perf_counter() - t0
    print(f"input: {args.rows:,} rows, {big.stat().st_size / 1024**2:,.1f} MiB, "
          f"written in {made:,.1f} s")
    out = folder / "big.report.json"
    argv = [sys.executable, "-m", "sheetcycle", "annotate", str(big), "--json", str(out),
            "--force"]
    if args.xlsx:
        argv += ["-o", str(folder / "big.results.xlsx")]
    code, wall, peak, text = run_child(argv)
    print(f"annotate: exit {code}, {wall:,.1f} s, peak RSS {peak / 1024**2:,.0f} MiB")
    print(text.strip()[-2000:])
    if code == 0 and out.exists():
        size = out.stat().st_size
        if size > 512 * 1024**2:
            # parsing a multi-GB report here would take more memory than the run itself did
            print(f"report: {size / 1024**2:,.1f} MiB (not parsed here: too big)")
            return
        data = json.loads(out.read_text(encoding="utf-8"))
        flagged = sum(1 for r in data["rows"] if r["flags"])
        print(f"report: {size / 1024**2:,.1f} MiB, {len(data['rows']):,} rows, "
              f"{flagged:,} with flags")


if __name__ == "__main__":
    main()
