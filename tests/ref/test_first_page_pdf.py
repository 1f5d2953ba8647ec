"""Prints the first page of the workbook of `tallyfit analyze` to PDF with LibreOffice and checks
that it reads on paper. Runs analyze with short settings on the heron demo survey (one population)
and on the three-herds survey (three populations), then:

1. reads the print set-up back with openpyxl (Debian's python3-openpyxl, an independent reader of
   the Office Open XML format) for every sheet: A4, fit to one page wide and any number of pages
   tall, the heading rows repeated on every page, portrait where the columns fit a portrait page
   at full size (the first page always), landscape otherwise; every chart below its sheet's table
   and within a portrait page's width (print_rules.chart_problems); every wrapped row tall enough
   for its text by the letter-width rule of print_rules.wrapped_row_problems (an approximation,
   common practice, no source: LibreOffice does not fit rows to their text when it prints);
2. saves a copy of the workbook with the first sheet only (openpyxl keeps its print set-up),
   converts it to PDF with LibreOffice (`soffice --headless --convert-to pdf`, a private profile
   per run), and reads the PDF with a small parser here: the number of pages, their size (A4
   portrait) and the size of the body text, which tells the scale the page was printed at;
3. reads the first page's cells back: the percentages carry a percentage format, the one the
   writer promises for their values, and LibreOffice shows them as such (the sheet converted to
   CSV "as shown": "12.3 %", "< 0.1 %", "> 99.9 %", "-2.6 %").

The PDF is only representative of what a reader sees when it is set in the workbook's font,
Calibri, or a font of the same metrics (Carlito, Debian's fonts-crosextra-carlito, which
LibreOffice puts in Calibri's place): a wider stand-in font makes every line longer, and the page
shrinks. Without LibreOffice or Carlito the PDF part is skipped with a message, except under CI
(CI set), where it fails (.ci/run installs both).
"""
import csv
import math
import os
import re
import shutil
import statistics
import subprocess
import sys
import tempfile
import zlib

import openpyxl

from print_rules import (LANDSCAPE_PX, MIN_SCALE, PORTRAIT_PX, chart_problems, print_rule_problems, sheet_px,
                         wrapped_row_problems)

T = os.environ.get("TALLYFIT", os.path.abspath("tallyfit"))
SURVEYS = [("surveys/heron-colony.csv", 1), ("surveys/three-herds.csv", 3)]
# Short settings (as tests/ref/test_analyze_workbook.py): the test is about the layout, not about
# convergence. A fixed particle count keeps the run short whatever the pilot finds.
FAST = ["--iterations", "800", "--warmup", "200", "--draws", "200", "--particles", "150", "--seed", "7"]
EPOCH = "1700000000"
# The percentage formats of src/export/workbook.c: a share or probability in [0, 1] shows one
# decimal, and values that one decimal would round to 0.0 % or 100.0 % as "< 0.1 %" / "> 99.9 %";
# a percentage with a sign (a change) "0.0 %".
SHARE = '[<0.001]"< 0.1 %";[>0.999]"> 99.9 %";0.0 %'
SIGNED = "0.0 %"
# Figures the first page must show as percentages, found by value rather than by label: the
# model-averaged annual change of each population and its 95 % bounds (change.csv, the row of the
# model "average": median, lower_95, upper_95; docs/tables.md, "Scales": a change is a fraction
# that the workbook shows as a percentage).
PERCENT_COLUMNS = ["median", "lower_95", "upper_95"]
# A4 is 210 x 297 mm (ISO 216) = 595.3 x 841.9 pt; the writer's page geometry is in PORTRAIT_PX
# and LANDSCAPE_PX below.
A4_PT = (595.3, 841.9)
BODY_PT = 11.0          # the workbook's default font size
# The smallest print scale accepted (MIN_SCALE below): 60 %, body text of 6.6 pt; below about that
# size text on paper is hard to read for many readers (common practice, no source).
MAX_PAGES_PER_POPULATION = 2

failures = []


def check(cond, msg):
    if not cond:
        failures.append(msg)




def is_number(v):
    return isinstance(v, (int, float)) and not isinstance(v, bool)


def heading_row(ws, n):
    """The heading row: the first whose first n cells all hold text (notes above it are merged
    across the columns, so only their first cell holds a value)."""
    for r in range(1, min(ws.max_row, 40) + 1):
        if all(isinstance(ws.cell(row=r, column=j).value, str) for j in range(1, n + 1)):
            return r
    return None


def check_print_setup(wb, label):
    for k, ws in enumerate(wb.worksheets):
        name = f"{label}:{ws.title}"
        summary = k == 0
        h = heading_row(ws, 4 if summary else ws.max_column)
        check(h is not None, f"{name}: no heading row found")
        if h is None:
            continue
        # The summary has one heading row; a table its heading row and its legend row.
        for msg in print_rule_problems(ws, f"${h}:${h}" if summary else f"${h}:${h + 1}"):
            check(False, f"{label}:{msg}")
        # Charts stand below their table, within a portrait page's width; every wrapped row
        # (sentences, glossary, cautions, headings and legends) is tall enough for its text.
        for msg in chart_problems(ws) + wrapped_row_problems(ws):
            check(False, f"{label}:{msg}")
        if summary:
            ps = ws.page_setup
            check(ps.orientation == "portrait", f"{name}: the first page is {ps.orientation}, want portrait")
            # One page wide: the print scale is the page's width over the columns' width.
            px = sheet_px(ws)
            scale = min(1.0, PORTRAIT_PX / px)
            check(scale >= MIN_SCALE, f"{name}: columns {px:.0f} px wide print at {scale:.0%} < {MIN_SCALE:.0%}")
            check(ws.sheet_properties.pageSetUpPr is not None and ws.sheet_properties.pageSetUpPr.fitToPage,
                  f"{name}: the first page is not fitted to the page width")


# ---- PDF ----

def pdf_pages(path):
    """(MediaBox, content bytes) of each page of a PDF as LibreOffice writes it: plain indirect
    objects (no object streams), page contents Flate-compressed (ISO 32000-1, 7.3.8, 7.7.3.3)."""
    with open(path, "rb") as f:
        data = f.read()
    objs = {int(m.group(1)): m.group(2) for m in re.finditer(rb"(\d+)\s+0\s+obj(.*?)endobj", data, re.S)}

    def stream(body):
        m = re.search(rb"stream\r?\n(.*?)\r?\nendstream", body, re.S)
        if not m:
            return b""
        raw = m.group(1)
        return zlib.decompress(raw) if b"FlateDecode" in body[:m.start()] else raw

    pages = []
    for _, body in sorted(objs.items()):
        if not re.search(rb"/Type\s*/Page(?![a-zA-Z])", body):
            continue
        box = re.search(rb"/MediaBox\s*\[([^\]]*)\]", body)
        refs = re.search(rb"/Contents\s*(\[[^\]]*\]|\d+\s+0\s+R)", body)
        content = b"".join(stream(objs.get(int(r), b"")) for r in re.findall(rb"(\d+)\s+0\s+R", refs.group(1))) \
            if refs else b""
        pages.append(([float(x) for x in box.group(1).split()] if box else None, content))
    # The page tree's own count, to be sure every page was found.
    counts = [int(c) for body in objs.values() if re.search(rb"/Type\s*/Pages", body)
              for c in re.findall(rb"/Count\s+(\d+)", body)]
    return pages, max(counts) if counts else None, data


def soffice_convert(soffice, profile, outdir, target, files):
    r = subprocess.run([soffice, "--headless", f"-env:UserInstallation=file://{profile}", "--convert-to", target,
                        "--outdir", outdir] + files, capture_output=True, text=True, timeout=300)
    check(r.returncode == 0, f"soffice --convert-to {target}: exit {r.returncode}: {r.stderr.strip()[:300]}")


def check_pdf(pdf, label, n_pop):
    if not os.path.exists(pdf):
        check(False, f"{label}: LibreOffice wrote no {pdf}")
        return None
    pages, count, data = pdf_pages(pdf)
    check(count == len(pages), f"{label}: the page tree counts {count} pages, the parser found {len(pages)}")
    fonts = set(re.findall(rb"/BaseFont\s*/(?:[A-Z]{6}\+)?([A-Za-z0-9-]+)", data))
    if not any(f.startswith(b"Carlito") or f.startswith(b"Calibri") for f in fonts):
        return f"the PDF is set in {sorted(f.decode() for f in fonts)}, not Calibri or Carlito"
    most = MAX_PAGES_PER_POPULATION * n_pop
    print(f"{label}: first page printed on {len(pages)} page(s)")
    check(1 <= len(pages) <= most, f"{label}: the first page prints on {len(pages)} pages, want at most {most} "
                                   f"({MAX_PAGES_PER_POPULATION} per population)")
    sizes = []
    for box, content in pages:
        check(box is not None and abs(box[2] - box[0] - A4_PT[0]) < 1 and abs(box[3] - box[1] - A4_PT[1]) < 1,
              f"{label}: a page of {box}, want A4 portrait {A4_PT}")
        sizes += [float(x) for x in re.findall(rb"([\d.]+)\s+Tf", content)]
    check(sizes, f"{label}: no text found in the PDF")
    if sizes:
        # The most common text size is the body's: 11 pt times the print scale.
        body = statistics.mode(round(s, 1) for s in sizes)
        print(f"{label}: body text {body} pt, a print scale of {body / BODY_PT:.0%}")
        check(body >= MIN_SCALE * BODY_PT, f"{label}: body text {body} pt, printed at {body / BODY_PT:.0%} "
                                           f"< {MIN_SCALE:.0%}")
    return None


# ---- Cells ----

def shown(v):
    """What SHARE or SIGNED shows for v."""
    if 0 <= v <= 1:
        return "< 0.1 %" if v < 0.001 else "> 99.9 %" if v > 0.999 else f"{100 * v:.1f} %"
    return f"{100 * v:.1f} %"


def change_figures(out):
    """The model-averaged change and its bounds of every population under the results folder."""
    found = []
    for folder, _, files in os.walk(out):
        if "change.csv" in files:
            with open(os.path.join(folder, "change.csv"), newline="", encoding="utf-8") as f:
                for row in csv.DictReader(f):
                    if row["model"] == "average":
                        found += [(row["population"], c, float(row[c])) for c in PERCENT_COLUMNS]
    return found


def check_cells(ws, label, as_shown, figures, n_pop):
    """The change figures carry a percentage format, the one their value asks for; every cell in a
    percentage format is in one of the writer's two and is shown by LibreOffice as the writer means
    (as_shown: rows of the sheet converted to CSV as shown, or None)."""
    h = heading_row(ws, 4)
    if h is None:
        return
    cells = [ws.cell(row=r, column=3) for r in range(h + 1, ws.max_row + 1)]
    numbers = [c for c in cells if is_number(c.value)]
    # Two trends per population (period whole and recent), each with its bounds.
    want = 2 * len(PERCENT_COLUMNS)
    check(len(figures) == want * n_pop, f"{label}: {len(figures)} change figures in change.csv, "
                                        f"want {want} for each of {n_pop} populations")
    for pop, col, v in figures:
        match = [c for c in numbers if math.isclose(c.value, v, rel_tol=1e-15, abs_tol=0)]
        check(match, f"{label}: the change {col} of {pop}, {v}, is not on the first page")
        for c in match:
            want = SHARE if 0 <= v <= 1 else SIGNED
            check(c.number_format == want, f"{label}:{c.coordinate} (change {col} of {pop}): format "
                                           f"{c.number_format!r}, want {want!r}")
    n_shown = 0
    for c in numbers:
        fmt = c.number_format
        if "%" not in fmt:
            continue
        check(fmt == (SHARE if 0 <= c.value <= 1 else SIGNED), f"{label}:{c.coordinate}: {c.value} in {fmt!r}")
        if as_shown is None:
            continue
        row = as_shown[c.row - 1] if c.row - 1 < len(as_shown) else []
        got = row[2] if len(row) > 2 else None
        want_s = shown(c.value)
        # LibreOffice may round a last decimal that ends in 5 the other way.
        ok = got == want_s or (got is not None and re.fullmatch(r"-?\d+\.\d %", got) is not None and
                               re.fullmatch(r"-?\d+\.\d %", want_s) is not None and
                               abs(float(got[:-2]) - 100 * c.value) <= 0.05 + 1e-9)
        check(ok, f"{label}:{c.coordinate}: {c.value} shown as {got!r}, want {want_s!r}")
        n_shown += 1
    if as_shown is not None:
        check(n_shown >= len(figures), f"{label}: {n_shown} percentages compared with LibreOffice's display")


def main():
    soffice = shutil.which("soffice")
    ci = bool(os.environ.get("CI"))
    with tempfile.TemporaryDirectory(prefix="tf-first-page-") as tmp:
        env = dict(os.environ, SOURCE_DATE_EPOCH=EPOCH)
        firsts = []
        for survey, n_pop in SURVEYS:
            stem = os.path.splitext(os.path.basename(survey))[0]
            out = os.path.join(tmp, stem)
            r = subprocess.run([T, "analyze", survey, "-o", out, "--threads", "2", "-q"] + FAST,
                               capture_output=True, text=True, env=env)
            if r.returncode != 0:
                print(f"FAIL: analyze {survey} exited {r.returncode}: {r.stderr[:800]}")
                return 1
            xlsx = os.path.join(out, stem + ".xlsx")
            wb = openpyxl.load_workbook(xlsx)
            check_print_setup(wb, stem)
            # The first sheet alone, with its print set-up, for LibreOffice.
            for name in wb.sheetnames[1:]:
                del wb[name]
            first = os.path.join(tmp, stem + "-first.xlsx")
            wb.save(first)
            firsts.append((first, stem, n_pop, change_figures(out)))
        if not soffice:
            msg = "soffice (LibreOffice) is not on PATH: the first page was not printed to PDF"
            if ci:
                check(False, f"CI must print the first page: {msg}")
            else:
                print(f"skip: {msg} (install libreoffice-calc-nogui and fonts-crosextra-carlito)")
        else:
            profile = os.path.join(tmp, "profile")
            pdfdir, csvdir = os.path.join(tmp, "pdf"), os.path.join(tmp, "csv")
            files = [f for f, _, _, _ in firsts]
            soffice_convert(soffice, profile, pdfdir, "pdf", files)
            # CSV as LibreOffice shows the cells: comma, double quote, UTF-8 (76), from line 1,
            # no cell format, ..., "save cell contents as shown" = true (the 9th token).
            soffice_convert(soffice, profile, csvdir, "csv:Text - txt - csv (StarCalc):44,34,76,1,,0,false,true,true",
                            files)
            for first, stem, n_pop, figures in firsts:
                base = os.path.splitext(os.path.basename(first))[0]
                why = check_pdf(os.path.join(pdfdir, base + ".pdf"), stem, n_pop)
                if why:
                    msg = f"{stem}: {why}; install fonts-crosextra-carlito for a PDF with the workbook's metrics"
                    if ci:
                        check(False, msg)
                    else:
                        print(f"skip: page count and scale not checked: {msg}")
                shown_rows = None
                csv_path = os.path.join(csvdir, base + ".csv")
                check(os.path.exists(csv_path), f"{stem}: LibreOffice wrote no {csv_path}")
                if os.path.exists(csv_path):
                    with open(csv_path, newline="", encoding="utf-8") as f:
                        shown_rows = list(csv.reader(f))
                ws = openpyxl.load_workbook(first).worksheets[0]
                check_cells(ws, stem, shown_rows, figures, n_pop)
        if not soffice:
            for first, stem, n_pop, figures in firsts:
                check_cells(openpyxl.load_workbook(first).worksheets[0], stem, None, figures, n_pop)
    for f in failures:
        print("FAIL:", f)
    print(f"first page in print: {len(failures)} problem(s)")
    return 1 if failures else 0


if __name__ == "__main__":
    sys.exit(main())
