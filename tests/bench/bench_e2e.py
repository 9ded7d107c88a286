"""Benchmark: `sheetcycle annotate IN -o OUT` end to end against openpyxl load + save.

Run: python tests/bench/bench_e2e.py [rows]   (default 100,000 rows x 8 columns)

The workbook is a lab-style compound table (invented values: twenty salts repeated with
small offsets) written with xlsxwriter. Each contender runs in a fresh subprocess; wall
time and peak resident memory (ru_maxrss of the child) are printed with their ratios.
Targets (the annotated-copy issue): time <= 0.25x and peak memory <= 0.6x openpyxl's.
Then the phases of one annotation (read, run, plan, verify, write) are timed in a
further process, with the resident memory after each. Not a test: it never fails.
"""

from __future__ import annotations

import subprocess
import sys
import tempfile
import time
from pathlib import Path

import xlsxwriter

# (formula, ΔfH, lattice enthalpy): roughly handbook-like, perturbed (invented for the benchmark)
SALTS = [
    ("NaCl", -411.2, 787),
    ("KCl", -436.5, 717),
    ("LiF", -616.0, 1047),
    ("KBr", -393.8, 689),
    ("NaBr", -361.1, 752),
    ("MgO", -601.6, 3843),
    ("CaO", -634.9, 3454),
    ("CaF2", -1228.0, 2644),
    ("MgCl2", -641.3, 2522),
    ("KI", -327.9, 645),
    ("NaF", -576.6, 928),
    ("CsCl", -443.0, 659),
    ("RbCl", -435.4, 692),
    ("LiCl", -408.6, 861),
    ("SrO", -592.0, 3270),
    ("BaO", -548.0, 3093),
    ("AgCl", -127.0, 915),
    ("CuCl", -137.2, 993),
    ("CaCl2", -795.4, 2253),
    ("Na2O", -414.2, 2528),
]


def make(path: Path, rows: int) -> None:
    wb = xlsxwriter.Workbook(str(path), {"constant_memory": True})
    ws = wb.add_worksheet("Salts")
    ws.write_row(
        0,
        0,
        [
            "Compound",
            "State",
            "ΔfH° / kJ mol⁻¹",
            "±",
            "ΔLH lit. / kJ mol⁻¹",
            "IE1 [eV]",
            "Batch",
            "Notes",
        ],
    )
    for r in range(1, rows + 1):
        f, h, lat = SALTS[r % len(SALTS)]
        ws.write_string(r, 0, f)
        ws.write_string(r, 1, "s")
        ws.write_number(r, 2, h + (r % 7) * 0.1)
        ws.write_number(r, 3, 0.5)
        if r % 3 == 0:
            ws.write_number(r, 4, lat + (r % 5) * 0.5)
        ws.write_number(r, 6, r)
        ws.write_string(r, 7, "invented demo row")
    wb.close()


def child(code: str) -> tuple[float, float]:
    """Run Python code in a fresh process; (wall seconds, that process's own peak RSS MiB)."""
    code += "\nimport resource\nprint('PEAK', resource.getrusage(resource.RUSAGE_SELF).ru_maxrss)"
    t0 = time.perf_counter()
    proc = subprocess.run([sys.executable, "-c", code], check=True, capture_output=True, text=True)
    wall = time.perf_counter() - t0
    peak = next(
        int(line.split()[1]) for line in proc.stdout.splitlines() if line.startswith("PEAK")
    )
    return wall, peak / 1024.0


# The phases of one annotation, timed in one process (resident memory after each, MiB).
PHASES = """
import resource, sys, time
from pathlib import Path
from sheetcycle.api import _read_tables
from sheetcycle.io.annotated import plan_annotations, verify_formulas
from sheetcycle.io.package import write_annotated
from sheetcycle.pipeline import Settings, run_tables

def rss():
    with open("/proc/self/status") as f:
        return next(int(l.split()[1]) // 1024 for l in f if l.startswith("VmRSS"))

src, dst, s = Path(sys.argv[1]), Path(sys.argv[2]), Settings()
t = time.perf_counter()
def lap(name):
    global t
    now = time.perf_counter()
    print(f"phase={name} seconds={now - t:.2f} rss_mib={rss()}")
    t = now
found = _read_tables(src, s.column_overrides, s.limits); lap("read")
run = run_tables(src, found.tables, s, list(found.flags)); lap("run")
plan = plan_annotations(run, found.book); lap("plan")
verify_formulas(plan, found.book); lap("verify")
write_annotated(src, dst, additions=plan.additions, notes=plan.notes,
                new_sheets=plan.new_sheets, cell_values=plan.cell_values, force=True)
lap("write")
"""


def main(rows: int = 100_000) -> None:
    with tempfile.TemporaryDirectory() as tmp:
        src = Path(tmp) / "salts.xlsx"
        t0 = time.perf_counter()
        make(src, rows)
        print(
            f"generated rows={rows} cols=8 seconds={time.perf_counter() - t0:.1f} "
            f"bytes={src.stat().st_size}"
        )
        # each measurement in its own process so the peak RSS is its own
        ours_t, ours_m = child(
            "from sheetcycle.cli import main\n"
            f"assert main(['annotate', {str(src)!r}, '-o', {str(Path(tmp) / 'out.xlsx')!r}, "
            "'-q']) == 0"
        )
        ref_t, ref_m = child(
            "import openpyxl; "
            f"wb = openpyxl.load_workbook({str(src)!r}); wb.save({str(Path(tmp) / 'op.xlsx')!r})"
        )
        print(f"openpyxl_load_save seconds={ref_t:.2f} peak_rss_mib={ref_m:.0f}")
        print(f"sheetcycle_annotate seconds={ours_t:.2f} peak_rss_mib={ours_m:.0f}")
        print(
            f"time_ratio={ours_t / ref_t:.3f} target<=0.25 "
            f"memory_ratio={ours_m / ref_m:.3f} target<=0.60"
        )
        split = subprocess.run(
            [sys.executable, "-c", PHASES, str(src), str(Path(tmp) / "phases.xlsx")],
            check=True, capture_output=True, text=True)
        print(split.stdout, end="")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 100_000)
