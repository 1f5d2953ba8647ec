#!/usr/bin/python3
"""The effort's name in the workbook of `tallyfit analyze`, read back with openpyxl (Debian's
python3-openpyxl, an independent reader of the Office Open XML format) and the chart parts with
Python's zipfile.

The invented squirrel transect of surveys/ has an effort column (km walked) that differs between
years, so its abundances are counts per unit of effort. Run with `--effort-name "km walked"`:
- the first page's abundance label reads "Abundance in <last year> (count units per km walked)";
- every unit cell of the abundance, projection and populations sheets (and their CSV twins) reads
  "count units per km walked", and the abundance sheet's notes say "per km walked";
- the y axes of the abundance and projection charts read "Count units per km walked".
Run without it, the same places keep "count units per unit effort". A name with a comma is refused
before any work (exit 2, no output folder).
"""
import os
import re
import subprocess
import sys
import tempfile
import zipfile

import openpyxl

import output_tables

SURVEY = "surveys/squirrel-transect.csv"
NAME = "km walked"
FAST = ["--model", "ricker,gompertz", "--iterations", "600", "--warmup", "200", "--draws", "200",
        "--particles", "150", "--seed", "5", "-q"]

failures = []


def check(cond, msg):
    if not cond:
        failures.append(msg)


def unit_cells(ws):
    """The values under the heading 'Unit' (the label of the unit column) of a table sheet."""
    for row in ws.iter_rows(min_row=1, max_row=min(ws.max_row, 30)):
        for c in row:
            if c.value == "Unit":
                # The heading row is followed by the legend row, then the data.
                return [ws.cell(row=r, column=c.column).value for r in range(c.row + 2, ws.max_row + 1)
                        if ws.cell(row=r, column=c.column).value is not None]
    return None


def check_run(tmp, name):
    unit = f"count units per {name}" if name else "count units per unit effort"
    per = f"per {name}" if name else "per unit of effort"
    out = os.path.join(tmp, "named" if name else "plain")
    tallyfit = os.environ.get("TALLYFIT", "./tallyfit")
    extra = ["--effort-name", name] if name else []
    r = subprocess.run([tallyfit, "analyze", SURVEY, "-o", out, *extra, *FAST], capture_output=True, text=True)
    if r.returncode != 0:
        check(False, f"analyze {extra}: exit {r.returncode}: {r.stderr[:300]}")
        return
    xlsx = os.path.join(out, "squirrel-transect.xlsx")
    wb = openpyxl.load_workbook(xlsx)
    summary = wb["Summary"]
    labels = [c.value for c in summary["B"] if isinstance(c.value, str) and c.value.startswith("Abundance in")]
    check(labels == [f"Abundance in 2025 ({unit})"], f"{extra}: first-page abundance label {labels}")
    for sheet in ("Abundance", "Projection", "Populations"):
        cells = unit_cells(wb[sheet])
        check(cells is not None and len(cells) > 0 and set(cells) == {unit}, f"{extra}: {sheet} units {set(cells or [])}")
    notes = " ".join(str(c.value) for c in wb["Abundance"]["A"][:4] if c.value)
    check(per in notes, f"{extra}: the abundance sheet's notes do not say {per!r}: {notes[:200]!r}")
    for csv_name in ("abundance", "projection", "populations"):
        rows = output_tables.read(os.path.join(out, f"{csv_name}.csv"))
        check({row["unit"] for row in rows} == {unit}, f"{extra}: {csv_name}.csv units {({row['unit'] for row in rows})}")
    with zipfile.ZipFile(xlsx) as z:
        charts = [z.read(n).decode("utf-8") for n in z.namelist() if re.fullmatch(r"xl/charts/chart\d+\.xml", n)]
    axis = unit[0].upper() + unit[1:]
    with_axis = [x for x in charts if f"<a:t>{axis}</a:t>" in x]
    check(len(with_axis) == 2, f"{extra}: {len(with_axis)} charts with the y axis {axis!r}, want 2 (abundance, projection)")


def main():
    tallyfit = os.environ.get("TALLYFIT", "./tallyfit")
    with tempfile.TemporaryDirectory() as tmp:
        check_run(tmp, NAME)
        check_run(tmp, None)
        bad = os.path.join(tmp, "bad")
        r = subprocess.run([tallyfit, "analyze", SURVEY, "-o", bad, "--effort-name", "km, walked", *FAST],
                           capture_output=True, text=True)
        check(r.returncode == 2 and "comma" in r.stderr and not os.path.exists(bad),
              f"a name with a comma: exit {r.returncode}, {r.stderr[:200]!r}, folder made: {os.path.exists(bad)}")
    for f in failures:
        print("FAIL:", f)
    print(f"effort name: {len(failures)} problem(s)")
    return 1 if failures else 0


if __name__ == "__main__":
    sys.exit(main())
