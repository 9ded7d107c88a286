"""Benchmark: a whole annotate run against formulas.ExcelModel on a sheet of row formulas.

Run: python tests/bench/bench_formulas.py [--rows N] [--dir FOLDER] [--sample K]

The workbook is written by openpyxl, so no formula has a cached value: a compound table
(formula text, ΔfH in kcal/mol, two numbers) with three formula columns per row,
``=B2*4.184``, ``=(D2+E2)/2`` and ``=B2-C2+E2`` (a chain through C). Measured in this one
process, imports done before the clocks start:

* ``excelmodel``: ``formulas.ExcelModel().loads(path).finish().calculate()``, run once
  (it parses every cell on its own: slow);
* ``annotate``: ``sheetcycle.api.annotate(path, json_path=...)``, the whole
  ``sheetcycle annotate FILE --json OUT`` run (read, evaluate, find tables, close cycles,
  write the report);
* ``read_cells``: reading the workbook, formulas evaluated (the evaluation part);
* ``evaluate``: ``evaluate_cells`` alone on the value grid.

A 20-row workbook is annotated first, so first-use costs (lazy imports, the unit
registry) are not in the figures.

Then a sample of cells is compared between ExcelModel's solution and sheetcycle's values
(relative 1e-12), and the ratios printed. Target: annotate ≥ 10× faster than ExcelModel;
aim 50×. Output: ``key=value`` lines.
"""

from __future__ import annotations

import argparse
import random
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
FORMULA_COLUMNS = (2, 5, 6)  # C, F, G


def make_workbook(path: Path, rows: int) -> None:
    import openpyxl

    rnd = random.Random(5)
    metals = ["Li", "Na", "K", "Rb", "Cs"]
    anions = ["F", "Cl", "Br", "I"]
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Salts"
    ws.append(["Formula", "ΔfH (kcal/mol)", "ΔfH (kJ/mol)", "x", "y", "mean", "chain"])
    for r in range(2, rows + 2):
        ws.append([
            rnd.choice(metals) + rnd.choice(anions), rnd.uniform(-150.0, -50.0),
            f"=B{r}*4.184", rnd.uniform(0.0, 10.0), rnd.uniform(0.0, 10.0),
            f"=(D{r}+E{r})/2", f"=B{r}-C{r}+E{r}",
        ])  # fmt: skip
    wb.save(path)


def line(**kv: object) -> None:
    print(" ".join(f"{k}={v:.3f}" if isinstance(v, float) else f"{k}={v}" for k, v in kv.items()))


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--rows", type=int, default=10_000)
    ap.add_argument("--sample", type=int, default=1000)
    ap.add_argument("--dir", type=Path, default=None)
    args = ap.parse_args()
    sys.path.insert(0, str(ROOT))

    import formulas

    from sheetcycle.api import annotate
    from sheetcycle.io.cells import read_cells
    from sheetcycle.io.evaluate import col_letters, evaluate_cells

    folder = args.dir or Path(tempfile.mkdtemp(prefix="bench_formulas_"))
    folder.mkdir(parents=True, exist_ok=True)
    path = folder / f"formulas_{args.rows}.xlsx"
    make_workbook(path, args.rows)
    n_formulas = args.rows * len(FORMULA_COLUMNS)
    warm = folder / "warm_up.xlsx"  # first-use costs (lazy imports, unit registry) go here
    make_workbook(warm, 20)
    annotate(warm, json_path=folder / "warm_up.json", force=True)
    line(rows=args.rows, formulas=n_formulas, file=str(path))

    t0 = time.perf_counter()
    book = read_cells(path)
    t_read = time.perf_counter() - t0
    grid = book.sheet("Salts").rows
    assert not book.cache_trusted

    values = [list(r) for r in grid]
    targets = []
    for (r, c), fc in book.sheet("Salts").formulas.items():
        values[r][c] = None
        targets.append(("Salts", r, c, fc.formula))
    t0 = time.perf_counter()
    evaluate_cells({"Salts": values}, targets)
    t_eval = time.perf_counter() - t0

    out = folder / "report.json"
    t0 = time.perf_counter()
    run = annotate(path, json_path=out, force=True)
    t_annotate = time.perf_counter() - t0
    line(step="sheetcycle", annotate_s=t_annotate, read_cells_s=t_read, evaluate_s=t_eval,
         result_rows=len(run.rows))  # fmt: skip

    t0 = time.perf_counter()
    solution = formulas.ExcelModel().loads(str(path)).finish().calculate()
    t_model = time.perf_counter() - t0
    line(step="excelmodel", seconds=t_model)

    rnd = random.Random(7)
    picks = [(rnd.randrange(1, args.rows + 1), rnd.choice(FORMULA_COLUMNS))
             for _ in range(args.sample)]  # fmt: skip
    worst = 0.0
    prefix = f"'[{path.name}]SALTS'!"
    for r, c in picks:
        theirs = float(solution[f"{prefix}{col_letters(c)}{r + 1}"].value[0, 0])
        ours = grid[r][c]
        assert isinstance(ours, float), (r, c, ours)
        worst = max(worst, abs(ours - theirs) / max(abs(theirs), 1e-300))
        if worst > 1e-12:
            print(f"MISMATCH at {col_letters(c)}{r + 1}: ours {ours!r}, ExcelModel {theirs!r}")
            return 1
    line(compared_cells=len(picks), worst_relative_difference=f"{worst:.1e}")
    line(ratio_excelmodel_over_annotate=t_model / t_annotate,
         ratio_excelmodel_over_read_cells=t_model / t_read,
         ratio_excelmodel_over_evaluate=t_model / t_eval,
         target="≥10 (aim 50)", met="yes" if t_model / t_annotate >= 10 else "NO")  # fmt: skip
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
