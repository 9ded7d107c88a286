"""Every corpus case (make_corpus.py) through the command line, each in its own process.

For each case: the exit code (1 for a file that cannot be read, 0 when a readable file has
bad rows or columns, which become flags); exactly one plain line naming the file (on
stderr when it fails, the summary on stdout when it runs); no traceback anywhere; nothing
left in the output folder when it fails and only the two outputs when it runs (no
temporary file); the input byte-identical (SHA-256); wall time and peak resident memory
of the child below the case's bound (1 GiB for the zip bombs).

Peak memory is the child's own ``ru_maxrss``: a small launcher forks the command line and
reaps it with ``os.wait4`` (a child started straight from pytest would report pytest's
memory too, since it shares it until exec).
"""

from __future__ import annotations

import hashlib
import json
import subprocess
import sys
import time
import warnings
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import openpyxl
import pytest

sys.path.insert(0, str(Path(__file__).parent))
from make_corpus import Case, build_corpus, cases

CASES = cases()

LAUNCHER = """
import os, resource, sys
pid = os.fork()
if pid == 0:
    # a runaway case must fail, not take the machine down: 4 GiB of address space
    resource.setrlimit(resource.RLIMIT_AS, (4 << 30, 4 << 30))
    os.execv(sys.executable, [sys.executable, *sys.argv[2:]])
_, status, usage = os.wait4(pid, 0)
with open(sys.argv[1], "w") as fh:
    fh.write(str(usage.ru_maxrss))
code = os.waitstatus_to_exitcode(status)
sys.exit(code if code >= 0 else 128 - code)
"""


@dataclass
class Run:
    code: int
    stdout: str
    stderr: str
    seconds: float
    peak_mib: float
    out_files: list[str]
    in_files: list[str]
    same_input: bool
    report: dict[str, Any] | None
    out_dir: Path


def sha(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def run_case(root: Path, case: Case) -> Run:
    folder = root / case.name
    src = folder / case.filename
    out = folder / "out"
    out.mkdir()
    before = sha(src)
    rss_file = folder.parent / f"{case.name}.rss"
    argv = [
        sys.executable, "-c", LAUNCHER, str(rss_file),
        "-m", "sheetcycle", "annotate", str(src),
        "--json", str(out / "r.json"), "-o", str(out / "r.xlsx"), *case.args,
    ]
    t0 = time.perf_counter()
    proc = subprocess.run(argv, capture_output=True, timeout=600, cwd=root)
    seconds = time.perf_counter() - t0
    peak = int(rss_file.read_text()) / 1024 if rss_file.exists() else float("inf")
    report = None
    if (out / "r.json").exists():
        report = json.loads((out / "r.json").read_text(encoding="utf-8"))
    return Run(
        proc.returncode,
        proc.stdout.decode("utf-8", "replace"),
        proc.stderr.decode("utf-8", "replace"),
        seconds,
        peak,
        sorted(p.name for p in out.iterdir()),
        sorted(p.name for p in folder.iterdir() if p.name != "out"),
        sha(src) == before,
        report,
        out,
    )


@pytest.fixture(scope="module")
def runs(tmp_path_factory: pytest.TempPathFactory) -> dict[str, Run]:
    root = tmp_path_factory.mktemp("corpus")
    build_corpus(root)
    with ThreadPoolExecutor(max_workers=2) as pool:  # the machine has 2 cores
        done = list(pool.map(lambda c: run_case(root, c), CASES))
    timing = root / "timing.txt"
    timing.write_text("".join(f"{c.name} {r.seconds:.1f}s {r.peak_mib:.0f}MiB rc={r.code}\n"
                              for c, r in zip(CASES, done, strict=True)))
    print(timing.read_text())
    return {c.name: r for c, r in zip(CASES, done, strict=True)}


def _params() -> list[Any]:
    out = []
    for c in CASES:
        marks = [pytest.mark.xfail(strict=True, reason=c.xfail)] if c.xfail else []
        out.append(pytest.param(c, id=c.name, marks=marks))
    return out


def test_corpus_is_big_enough() -> None:
    assert len(CASES) >= 40
    assert sum(c.exit_code == 1 for c in CASES) >= 20


def _all_flags(report: dict[str, Any]) -> list[tuple[str, str | None, str | None]]:
    """(code, sheet, cell) of every flag of a report."""
    out = [(f["code"], f.get("sheet"), f.get("cell")) for f in report["file_flags"]]
    for row in report["rows"]:
        out.extend((f["code"], row.get("sheet"), f.get("cell")) for f in row["flags"])
    return out


def _strings(x: Any) -> list[str]:
    if isinstance(x, str):
        return [x]
    if isinstance(x, dict):
        return [s for k, v in x.items() for s in [*_strings(k), *_strings(v)]]
    if isinstance(x, list):
        return [s for v in x for s in _strings(v)]
    return []


@pytest.mark.parametrize("case", _params())
def test_case(case: Case, runs: dict[str, Run]) -> None:
    run = runs[case.name]
    both = run.stdout + run.stderr
    assert "Traceback" not in both, both[-3000:]
    assert run.code == case.exit_code, both[-3000:]
    assert run.same_input, "the input file changed"
    assert run.in_files == [case.filename], f"left beside the input: {run.in_files}"
    assert run.seconds < case.seconds, f"{run.seconds:.1f} s"
    assert run.peak_mib < case.max_rss_mib, f"peak RSS {run.peak_mib:.0f} MiB"
    if case.exit_code == 1:
        lines = run.stderr.splitlines()
        assert len(lines) == 1, run.stderr
        (line,) = lines
        assert line.startswith("sheetcycle: ") and case.filename in line, line
        for word in case.words:
            assert word.lower() in line.lower(), (word, line)
        assert run.stdout == ""
        assert run.out_files == [], f"left in the output folder: {run.out_files}"
        return
    assert run.stderr == ""
    (line,) = run.stdout.splitlines()
    assert case.filename in line
    assert run.out_files == ["r.json", "r.xlsx"], run.out_files
    assert run.report is not None
    flags = _all_flags(run.report)
    for code, cell in case.flags:
        assert any((code is None or code == f[0]) and (cell is None or cell == f[2])
                   for f in flags), ((code, cell), flags[:20])
    if case.flag_sheet is not None:
        assert any(f[1] == case.flag_sheet for f in flags), flags[:20]
    if case.texts:
        _check_texts(case, run)


def _core(s: str) -> str:
    """The part of an injection string that must survive: writers may trim the leading
    tab/CR (which only matters as the start of a cell) and XML turns a CR into LF."""
    return s.strip()


def _check_texts(case: Case, run: Run) -> None:
    """Injection strings come out as plain strings: in the JSON as read, and in the
    workbook as string cells, never inside a formula the tool wrote."""
    assert run.report is not None
    strings = _strings(run.report)
    for s in case.texts:
        assert any(_core(s) in t for t in strings), s
    # the input's own formula cells (="..." text results) are copied as they are
    own = {'="' + t.replace('"', '""') + '"' for s in case.texts
           for t in (s, s.replace("\r", "\n"))}
    with warnings.catch_warnings():  # the corpus' minimal styles part makes openpyxl warn
        warnings.simplefilter("ignore", UserWarning)
        wb = openpyxl.load_workbook(run.out_dir / "r.xlsx")
    seen: set[str] = set()
    for ws in wb.worksheets:
        for row in ws.iter_rows():
            for c in row:
                v = c.value
                if not isinstance(v, str):
                    continue
                if c.data_type == "f":
                    if v in own:
                        continue
                    assert not any(bit in v for bit in ("HYPERLINK", "cmd|", "@SUM", "1+1")), (
                        ws.title, c.coordinate, v)
                    continue
                hit = [s for s in case.texts if _core(s) in v]
                if hit:
                    assert c.data_type == "s", (ws.title, c.coordinate, c.data_type)
                    seen.update(hit)
    assert seen == set(case.texts), set(case.texts) - seen


def test_zip_bomb_figures(runs: dict[str, Run]) -> None:
    """The bombs are refused before inflating: well under a second of work and tens of MiB
    (the child's figures include interpreter start-up, ~1 s and ~80 MiB here)."""
    for name in ("zip-bomb", "zip-bomb-lying-size", "zip-bomb-many-small", "ods-zip-bomb"):
        run = runs[name]
        assert run.code == 1
        assert run.peak_mib < 300, (name, run.peak_mib)
        assert run.seconds < 20, (name, run.seconds)


# ------------------------------------------------------- limits through read_cells(limits=)


def test_limits_are_settable_through_read_cells(tmp_path: Path) -> None:
    from make_corpus import good_book

    from sheetcycle.errors import ReadError, UsageError
    from sheetcycle.io.cells import read_cells
    from sheetcycle.io.safety import Limits

    book = good_book(tmp_path / "g.xlsx")
    assert len(read_cells(book).sheets[0].rows) == 6  # header + 5 compounds
    with pytest.raises(ReadError, match="--max-cells"):
        read_cells(book, limits=Limits(max_cells=10))
    with pytest.raises(ReadError, match="--max-zip-entries"):
        read_cells(book, limits=Limits(max_entries=3))
    with pytest.raises(UsageError, match="--max-zip-ratio"):
        Limits(max_ratio=0)


def test_last_cell_of_a_sheet_is_read_and_one_beyond_is_refused(tmp_path: Path) -> None:
    from make_corpus import package, worksheet

    from sheetcycle.errors import ReadError
    from sheetcycle.io.cells import read_cells

    last = package(tmp_path / "last.xlsx", [("S", worksheet(
        '<row r="1048576"><c r="XFD1048576"><v>7</v></c></row>'))])
    rows = read_cells(last).sheets[0].rows
    assert len(rows) == 1_048_576 and rows[-1][16_383] == 7.0
    beyond = package(tmp_path / "beyond.xlsx", [("S", worksheet(
        '<row r="1"><c r="XFE1"><v>7</v></c></row>'))])
    with pytest.raises(ReadError, match="outside the worksheet grid"):
        read_cells(beyond)
