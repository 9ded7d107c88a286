"""Benchmark: the pure cycle engine on 1,000,000 rows (target: under 1 s).

Run: python tests/bench/bench_engine.py [rows]
Prints the best of five timings and the rows per second. Not a test: it never fails.
"""

from __future__ import annotations

import sys
import time

import numpy as np

from sheetcycle.engine.born_haber import TERMS, CycleTerms, close_cycles


def main(n: int = 1_000_000) -> None:
    rng = np.random.default_rng(12345)
    values = {t: rng.normal(300.0, 100.0, n) for t in TERMS if t != "lattice_enthalpy"}
    # a realistic mix: 10 % of rows closed (lattice given), 5 % underdetermined
    lat = np.full(n, np.nan)
    closed = rng.random(n) < 0.10
    lat[closed] = rng.normal(800.0, 50.0, closed.sum())
    values["lattice_enthalpy"] = lat
    values["formation_enthalpy"][rng.random(n) < 0.05] = np.nan
    sigmas = {t: np.full(n, 1.0) for t in TERMS}
    terms = CycleTerms.from_columns(
        n_cation=rng.integers(1, 3, n),
        n_anion=rng.integers(1, 4, n),
        anion_charge=rng.integers(1, 3, n),
        values=values,
        sigmas=sigmas,
    )
    times = []
    for _ in range(5):
        t0 = time.perf_counter()
        close_cycles(terms)
        times.append(time.perf_counter() - t0)
    best = min(times)
    print(
        f"engine rows={n} best_s={best:.3f} median_s={sorted(times)[2]:.3f} "
        f"rows_per_s={n / best:,.0f} target_s=1.000 ratio_to_target={best / 1.0:.2f}"
    )


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 1_000_000)
