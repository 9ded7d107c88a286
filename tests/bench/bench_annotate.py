"""Benchmark: annotating a workbook by package editing vs openpyxl load + save.

Run: python tests/bench/bench_annotate.py [--rows 100000] [--full] [--keep DIR]

1. Writes a 100,000-row x 8-column workbook (a text column and seven numbers; invented
   values) and times, each in a fresh subprocess:
   * openpyxl alone: ``load_workbook`` + ``save`` of the same file (the reference), and
   * sheetcycle: building 4 computed columns (formulas with cached values, computed with
     numpy) and 300 notes, then ``write_annotated``.
   Each child reports its own wall time (imports included) and its peak resident memory
   (``resource.getrusage(RUSAGE_SELF).ru_maxrss``).
   Targets: time <= 0.25x and peak memory <= 0.6x openpyxl's.
2. With ``--full`` also runs a full 1,048,576-row sheet through ``write_annotated``
   (the added columns are lazy sequences there, so the figure is the writer's own).
Prints the figures and ratios. Not a test: it never fails.
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
import time
import zipfile
from pathlib import Path

N_COLS = 8
N_NOTES = 300


# --- the input workbook (written directly as package parts, streamed) ------------------


def _letters(c: int) -> str:
    out = ""
    c += 1
    while c:
        c, r = divmod(c - 1, 26)
        out = chr(65 + r) + out
    return out


def value(r: int, c: int) -> float:
    """The invented number in data row r (0-based), column c (1..7)."""
    return round(((r * 7919 + c * 104729) % 100000) / 97.0 - 500.0, 4)


def make_input(path: Path, rows: int) -> None:
    head = '<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
    main = "http://schemas.openxmlformats.org/spreadsheetml/2006/main"
    rel = "http://schemas.openxmlformats.org/officeDocument/2006/relationships"
    ct = "application/vnd.openxmlformats-officedocument.spreadsheetml."
    with zipfile.ZipFile(path, "w", zipfile.ZIP_DEFLATED, allowZip64=True) as z:
        z.writestr(
            "[Content_Types].xml",
            head
            + (
                '<Types xmlns="http://schemas.openxmlformats.org/package/2006/content-types">'
                '<Default Extension="rels" ContentType="application/vnd.openxmlformats-package.'
                'relationships+xml"/><Default Extension="xml" ContentType="application/xml"/>'
                f'<Override PartName="/xl/workbook.xml" ContentType="{ct}sheet.main+xml"/>'
                f'<Override PartName="/xl/worksheets/sheet1.xml" ContentType="{ct}worksheet+xml"/>'
                f'<Override PartName="/xl/styles.xml" ContentType="{ct}styles+xml"/></Types>'
            ),
        )
        z.writestr(
            "_rels/.rels",
            head
            + (
                '<Relationships xmlns="http://schemas.openxmlformats.org/package/2006/'
                f'relationships"><Relationship Id="rId1" Type="{rel}/officeDocument" '
                'Target="xl/workbook.xml"/></Relationships>'
            ),
        )
        z.writestr(
            "xl/workbook.xml",
            head
            + (
                f'<workbook xmlns="{main}" xmlns:r="{rel}"><sheets>'
                '<sheet name="Data" sheetId="1" r:id="rId1"/></sheets></workbook>'
            ),
        )
        z.writestr(
            "xl/_rels/workbook.xml.rels",
            head
            + (
                '<Relationships xmlns="http://schemas.openxmlformats.org/package/2006/'
                f'relationships"><Relationship Id="rId1" Type="{rel}/worksheet" '
                f'Target="worksheets/sheet1.xml"/><Relationship Id="rId2" Type="{rel}/styles" '
                'Target="styles.xml"/></Relationships>'
            ),
        )
        z.writestr(
            "xl/styles.xml",
            head
            + (
                f'<styleSheet xmlns="{main}"><fonts count="1"><font><sz val="11"/>'
                '<name val="Calibri"/></font></fonts><fills count="2"><fill><patternFill '
                'patternType="none"/></fill><fill><patternFill patternType="gray125"/></fill>'
                '</fills><borders count="1"><border/></borders><cellStyleXfs count="1"><xf '
                'numFmtId="0" fontId="0" fillId="0" borderId="0"/></cellStyleXfs><cellXfs '
                'count="1"><xf numFmtId="0" fontId="0" fillId="0" borderId="0" xfId="0"/>'
                "</cellXfs></styleSheet>"
            ),
        )
        info = zipfile.ZipInfo("xl/worksheets/sheet1.xml", date_time=(2024, 1, 1, 0, 0, 0))
        info.compress_type = zipfile.ZIP_DEFLATED
        last = _letters(N_COLS - 1)
        with z.open(info, "w", force_zip64=True) as fh:
            fh.write(
                (
                    head + f'<worksheet xmlns="{main}" xmlns:r="{rel}">'
                    f'<dimension ref="A1:{last}{rows + 1}"/><sheetData>'
                ).encode()
            )
            hdr = "".join(
                f'<c r="{_letters(c)}1" t="inlineStr"><is><t>col{c}</t></is></c>'
                for c in range(N_COLS)
            )
            fh.write(f'<row r="1" spans="1:{N_COLS}">{hdr}</row>'.encode())
            buf = []
            for r in range(rows):
                n = r + 2
                cells = [f'<c r="A{n}" t="inlineStr"><is><t>S{r}</t></is></c>']
                cells += [
                    f'<c r="{_letters(c)}{n}"><v>{value(r, c)!r}</v></c>' for c in range(1, N_COLS)
                ]
                buf.append(f'<row r="{n}" spans="1:{N_COLS}">{"".join(cells)}</row>')
                if len(buf) == 5000:
                    fh.write("".join(buf).encode())
                    buf.clear()
            fh.write("".join(buf).encode())
            fh.write(b"</sheetData></worksheet>")


# --- the children ------------------------------------------------------------------------


def child_openpyxl(src: Path, dst: Path) -> None:
    import openpyxl

    wb = openpyxl.load_workbook(src)
    wb.save(dst)


class _LazyColumn:
    """A Sequence of AddedCell made on demand (so 1M rows need no 4M-object list)."""

    def __init__(self, n: int, make) -> None:
        self.n = n
        self.make = make

    def __len__(self) -> int:
        return self.n

    def __getitem__(self, i: int):
        if not 0 <= i < self.n:
            raise IndexError(i)
        return self.make(i)

    def __iter__(self):
        return (self.make(i) for i in range(self.n))


def child_sheetcycle(src: Path, dst: Path, rows: int, lazy: bool) -> None:
    import numpy as np

    from sheetcycle.io.package import (
        AddedCell,
        AddedColumn,
        CellNote,
        SheetAddition,
        write_annotated,
    )

    r = np.arange(rows)
    cols = {c: np.round(((r * 7919 + c * 104729) % 100000) / 97.0 - 500.0, 4) for c in (1, 2, 3)}
    specs = [
        ("sum (kJ/mol)", lambda n: f"B{n}+C{n}+D{n}", cols[1] + cols[2] + cols[3]),
        ("B in kcal/mol", lambda n: f"B{n}/4.184", cols[1] / 4.184),
        ("C minus offset", lambda n: f"C{n}-123.25", cols[2] - 123.25),
        ("B x D", lambda n: f"B{n}*D{n}", cols[1] * cols[3]),
    ]
    added = []
    for header, formula, values in specs:
        vals = values.tolist()
        if lazy:

            def make(i: int, f=formula, v: list = vals) -> AddedCell:
                return AddedCell(v[i], f(i + 2))

            added.append(AddedColumn(header, _LazyColumn(rows, make)))
        else:
            added.append(
                AddedColumn(header, [AddedCell(v, formula(i + 2)) for i, v in enumerate(vals)])
            )
    step = max(rows // N_NOTES, 1)
    sev = ("error", "warning", "note")
    notes = [
        CellNote("Data", f"B{2 + i * step}", f"invented flag {i}", sev[i % 3])
        for i in range(min(N_NOTES, rows))
    ]
    write_annotated(
        src,
        dst,
        additions=[SheetAddition("Data", 1, 2, N_COLS + 1, added)],
        notes=notes,
        force=True,
    )


def run_child(kind: str, src: Path, dst: Path, rows: int, lazy: bool = False) -> dict:
    cmd = [
        sys.executable,
        __file__,
        "--child",
        kind,
        str(src),
        str(dst),
        str(rows),
        "1" if lazy else "0",
    ]
    proc = subprocess.run(cmd, capture_output=True, text=True, check=False)
    if proc.returncode != 0:
        raise SystemExit(f"{kind} child failed:\n{proc.stderr}")
    return json.loads(proc.stdout.strip().splitlines()[-1])


def child_main(argv: list[str]) -> None:
    import resource

    t0 = time.perf_counter()
    kind, src, dst, rows, lazy = argv
    if kind == "openpyxl":
        child_openpyxl(Path(src), Path(dst))
    else:
        child_sheetcycle(Path(src), Path(dst), int(rows), lazy == "1")
    seconds = time.perf_counter() - t0
    use = resource.getrusage(resource.RUSAGE_SELF)
    print(
        json.dumps(
            {
                "seconds": seconds,
                "cpu": use.ru_utime + use.ru_stime,
                "peak_mib": use.ru_maxrss / 1024,
            }
        )
    )


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--rows", type=int, default=100_000)
    ap.add_argument("--full", action="store_true", help="also run 1,048,576 rows")
    ap.add_argument("--keep", type=Path, help="keep the files in this folder")
    args = ap.parse_args()
    folder = args.keep or Path(tempfile.mkdtemp(prefix="bench-annotate-"))
    folder.mkdir(parents=True, exist_ok=True)
    src = folder / f"in-{args.rows}.xlsx"
    t = time.perf_counter()
    make_input(src, args.rows)
    print(
        f"input: {args.rows:,} rows x {N_COLS} columns, {src.stat().st_size / 2**20:.1f} MiB "
        f"zipped (made in {time.perf_counter() - t:.1f} s)"
    )
    ref = run_child("openpyxl", src, folder / "openpyxl.xlsx", args.rows)
    ours = run_child("sheetcycle", src, folder / "annotated.xlsx", args.rows)
    print(
        f"openpyxl load+save : {ref['seconds']:7.2f} s wall  {ref['cpu']:7.2f} s CPU  "
        f"peak {ref['peak_mib']:7.1f} MiB"
    )
    print(
        f"sheetcycle annotate: {ours['seconds']:7.2f} s wall  {ours['cpu']:7.2f} s CPU  "
        f"peak {ours['peak_mib']:7.1f} MiB  (4 formula columns with cached values, "
        f"{N_NOTES} notes)"
    )
    tr = ours["seconds"] / ref["seconds"]
    print(f"ratio CPU    {ours['cpu'] / ref['cpu']:.3f}")
    mr = ours["peak_mib"] / ref["peak_mib"]
    print(f"ratio time   {tr:.3f}  (target <= 0.25)  {'OK' if tr <= 0.25 else 'MISSED'}")
    print(f"ratio memory {mr:.3f}  (target <= 0.60)  {'OK' if mr <= 0.60 else 'MISSED'}")
    if args.full:
        rows = 1_048_575  # + the header row = 1,048,576 sheet rows
        big = folder / "in-full.xlsx"
        t = time.perf_counter()
        make_input(big, rows)
        print(
            f"input: {rows + 1:,} sheet rows, {big.stat().st_size / 2**20:.1f} MiB zipped "
            f"(made in {time.perf_counter() - t:.1f} s)"
        )
        full = run_child("sheetcycle", big, folder / "annotated-full.xlsx", rows, lazy=True)
        out = folder / "annotated-full.xlsx"
        print(
            f"sheetcycle annotate 1,048,576 rows: {full['seconds']:.2f} s wall  "
            f"{full['cpu']:.2f} s CPU  peak "
            f"{full['peak_mib']:.1f} MiB  output {out.stat().st_size / 2**20:.1f} MiB"
        )
    if not args.keep:
        for p in folder.iterdir():
            p.unlink()
        os.rmdir(folder)


if __name__ == "__main__":
    if len(sys.argv) > 1 and sys.argv[1] == "--child":
        child_main(sys.argv[2:])
    else:
        main()
