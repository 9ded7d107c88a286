"""Run LibreOffice headless as an independent spreadsheet application for the tests.

Each run gets a throw-away profile whose ``registrymodifications.xcu`` sets
``/org.openoffice.Office.Calc/Formula/Load`` ``OOXMLRecalcMode`` = 0 ("always recalculate"),
so LibreOffice computes every formula on load instead of trusting cached values, then
exports every sheet to CSV. Filter options of the "Text - txt - csv (StarCalc)" export
(LibreOffice help, "CSV Filter Options"): 44 = comma, 34 = double quote, 76 = UTF-8,
1 = start line, then cell format, language, quoted-as-text (false), detect special numbers
(true), save cell contents as shown (false: full-precision values, not the displayed
format), export formulas (false), remove spaces (false), sheet = -1 (every sheet, one
file named ``STEM-SHEETNAME.csv`` each; available since LibreOffice 7.2).

If LibreOffice is missing, :func:`soffice` fails the calling test with instructions: the
checks are not optional (CI installs it).
"""

from __future__ import annotations

import csv
import os
import shutil
import subprocess
import tempfile
from collections.abc import Iterable
from pathlib import Path

import pytest

CSV_FILTER = "csv:Text - txt - csv (StarCalc):44,34,76,1,,0,false,true,false,false,false,-1"

_PROFILE = """<?xml version="1.0" encoding="UTF-8"?>
<oor:items xmlns:oor="http://openoffice.org/2001/registry"
 xmlns:xs="http://www.w3.org/2001/XMLSchema"
 xmlns:xsi="http://www.w3.org/2001/XMLSchema-instance">
<item oor:path="/org.openoffice.Office.Calc/Formula/Load">\
<prop oor:name="OOXMLRecalcMode" oor:op="fuse"><value>0</value></prop></item>
<item oor:path="/org.openoffice.Office.Calc/Formula/Load">\
<prop oor:name="ODFRecalcMode" oor:op="fuse"><value>0</value></prop></item>
</oor:items>
"""


def soffice() -> str:
    """Path of the soffice binary; fails the test (never skips) when it is missing."""
    for name in ("soffice", "libreoffice"):
        found = shutil.which(name)
        if found:
            return found
    for path in ("/usr/lib/libreoffice/program/soffice", "/opt/libreoffice/program/soffice"):
        if os.path.exists(path):
            return path
    pytest.fail(
        "LibreOffice is not installed (no 'soffice' on PATH). These checks need a real "
        "spreadsheet application: install it with "
        "'apt-get install -y --no-install-recommends libreoffice-calc' (.ci/run does this)."
    )


def make_profile(root: Path) -> str:
    """Create a fresh user profile under ``root``; returns its file:// URL."""
    user = root / "user"
    user.mkdir(parents=True, exist_ok=True)
    (user / "registrymodifications.xcu").write_text(_PROFILE, encoding="utf-8")
    return root.resolve().as_uri()


def convert_to_csv(files: Iterable[Path], outdir: Path, *, timeout: float = 180) -> None:
    """Convert every sheet of every file to CSV in ``outdir`` (one LibreOffice start)."""
    files = [Path(f).resolve() for f in files]
    outdir.mkdir(parents=True, exist_ok=True)
    with tempfile.TemporaryDirectory(prefix="lo-profile-") as prof:
        cmd = [
            soffice(),
            f"-env:UserInstallation={make_profile(Path(prof))}",
            "--headless",
            "--norestore",
            "--convert-to",
            CSV_FILTER,
            "--outdir",
            str(outdir),
            *map(str, files),
        ]
        env = dict(os.environ, HOME=prof)
        proc = subprocess.run(cmd, capture_output=True, text=True, timeout=timeout, env=env)
    if proc.returncode != 0:
        raise AssertionError(
            f"LibreOffice failed ({proc.returncode}): {proc.stderr.strip() or proc.stdout}"
        )


def read_csv(path: Path) -> list[list[str]]:
    with open(path, newline="", encoding="utf-8-sig") as fh:
        return list(csv.reader(fh))


def sheets_csv(outdir: Path, stem: str, sheets: Iterable[str]) -> dict[str, list[list[str]]]:
    """The exported sheets of one converted file, by sheet name."""
    out = {}
    for sheet in sheets:
        path = outdir / f"{stem}-{sheet}.csv"
        if not path.exists():
            have = sorted(p.name for p in outdir.glob(f"{stem}*.csv"))
            raise AssertionError(f"LibreOffice wrote no CSV for sheet {sheet!r}: found {have}")
        out[sheet] = read_csv(path)
    return out
