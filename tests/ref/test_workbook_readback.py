"""Reads back the sample workbook written by tests/unit/test_workbook.c (sample_workbook and
edge_workbook tests, which tests/run-all runs before this file) with openpyxl (Debian's
python3-openpyxl, an independent reader of the Office Open XML format) and compares it with the
CSV twins written from the same tables. The chart parts are read with Python's zipfile.

Checks: sheet names; header and legend rows; every number equal to its CSV twin; no number
stored as text; frozen panes; number formats; warning colours; column widths; native charts
present, of the right type, referring to existing sheets. If libreoffice is on PATH, the
workbooks must also convert to PDF.
"""
import csv
import math
import os
import re
import shutil
import subprocess
import sys
import tempfile
import zipfile

import openpyxl

from print_rules import chart_problems, print_rule_problems, wrapped_row_problems

BUILD = os.environ.get("BUILD", "build")
DIR = os.path.join(BUILD, "tests", "out", "workbook")
SAMPLE = os.path.join(DIR, "sample.xlsx")
EDGE = os.path.join(DIR, "edge.xlsx")

failures = []


def check(cond, msg):
    if not cond:
        failures.append(msg)


# What test_workbook.c writes: sheet name -> (CSV twin, legends or None for a summary sheet).
SHEETS = {
    "Summary": ("summary.csv", None),
    "Trend": ("trend.csv", ["calendar year of the survey", "animals counted (blank = not surveyed)",
                            "posterior median of abundance (animals)",
                            "2.5 % posterior quantile of abundance (animals)",
                            "97.5 % posterior quantile of abundance (animals)"]),
    "Projection _ risk": ("projection-risk.csv", ["projected calendar year",
                                                  "posterior predictive median abundance (animals)",
                                                  "probability of having fallen below 50 animals by this year",
                                                  "probability of having fallen below 20 animals by this year",
                                                  "chance that abundance is below half of 2020's"]),
    "Model comparison": ("model-comparison.csv", ["growth model, counting error",
                                                  "log marginal likelihood (natural log)",
                                                  "Monte Carlo standard error of log ML",
                                                  "posterior model probability, equal prior weights",
                                                  "largest split R-hat over parameters (above 1.01: not converged)",
                                                  "posterior draws kept"]),
}

# Number formats the writer promises (workbook.h): year/integer "0", a percentage in [0, 1] (a
# share, a probability) SHARE, one with a sign "0.0 %", probability "0.000"; general numbers get
# digits from the column's largest magnitude (Median up to 420 -> "0.0", R-hat about 1 -> "0.000",
# s.e. below 1 -> "0.0000").
SHARE = '[<0.001]"< 0.1 %";[>0.999]"> 99.9 %";0.0 %'
SIGNED = "0.0 %"
FORMATS = {
    "Trend": {"Year": "0", "Count": "0", "Median": "0.0", "Lower 95%": "0.0", "Upper 95%": "0.0"},
    "Projection _ risk": {"Year": "0", "Median N": "0.0", "P(N<50)": "0.000", "P(N<20)": "0.000",
                          "Halved": SHARE},
    "Model comparison": {"log ML": "0.0", "MC s.e.": "0.0000", "Posterior probability": SHARE,
                         "Max R-hat": "0.000", "Draws": "0"},
}
# Summary values carry their own kinds; general numbers get digits for their own size.
SUMMARY_FORMATS = {"First year": "0", "Years surveyed": "0", "Growth rate r": "0.0000",
                   "Carrying capacity K": "0.0", "Probability of decline": SHARE, "Annual change": SIGNED,
                   "Below 10 animals by 2045": SHARE, "Above 5 animals in 2045": SHARE,
                   "Quasi-extinction by 2045": "0.000", "Max R-hat": "0.000"}
# Cells flagged as warnings in test_workbook.c: (sheet, data row index, column index or None = all).
WARNINGS = {("Model comparison", 2, 4), ("Model comparison", 3, None), ("Summary", 15, None)}
WARN_FILL = "F9D3C2"   # COLOUR_WARN_FILL in workbook.c


def sig_digits(s):
    """Significant digits of a decimal string such as '-0.0012340e+05'."""
    mant = s.lstrip("+-").lower().split("e")[0].replace(".", "").lstrip("0")
    return len(mant)


def is_number(v):
    return isinstance(v, (int, float)) and not isinstance(v, bool)


def find_header(ws, headers):
    """The row of the sheet that heads the CSV's columns: the workbook shows each column's label,
    which for the tables built here is its CSV name, and for a first page the name capitalised
    ("item" is shown as "Item")."""
    for row in ws.iter_rows(min_row=1, max_row=20):
        vals = [c.value for c in row[:len(headers)]]
        if vals == headers or vals == [h[:1].upper() + h[1:] for h in headers]:
            return row[0].row
    return None


def check_value(where, cell, text):
    """The cell must hold what the CSV holds: blank, the same number, or the same text."""
    v = cell.value
    if text == "":
        check(v is None, f"{where}: expected a blank cell, found {v!r}")
        return
    try:
        x = float(text)
    except ValueError:
        check(v == text, f"{where}: expected text {text!r}, found {v!r}")
        return
    if not math.isfinite(x):
        # Spreadsheets have no infinity; the writer shows it as text (workbook.h).
        check(v == text, f"{where}: expected the text {text!r} for an infinity, found {v!r}")
        return
    check(is_number(v), f"{where}: CSV holds the number {text} but the cell holds {v!r} ({type(v).__name__})")
    if not is_number(v):
        return
    # libxlsxwriter stores numbers with 16 significant digits (its "%.16G" format, seen in the
    # package XML), so a value that needs 17 digits comes back rounded to 16; anything with at
    # most 16 significant digits must come back exactly.
    want = x if sig_digits(text) <= 16 else float("%.16G" % x)
    check(float(v) == want, f"{where}: workbook holds {v!r}, CSV twin {text} (expected {want!r})")


def check_sheet(wb, name, csv_name, legends):
    ws = wb[name]
    with open(os.path.join(DIR, csv_name), newline="", encoding="utf-8") as f:
        rows = list(csv.reader(f))
    headers = rows[0]
    hrow = find_header(ws, headers)
    check(hrow is not None, f"{name}: header row {headers} not found")
    if hrow is None:
        return
    for j, c in enumerate(ws[hrow][:len(headers)]):
        check(c.font.b, f"{name}: header {c.value!r} is not bold")
    check_print(ws, hrow, hrow + (1 if legends is not None else 0))
    if legends is not None:
        # A heading sits over its column: right-aligned over numbers, left (the default) over text.
        for j, c in enumerate(ws[hrow][:len(headers)]):
            below = [ws.cell(row=r, column=j + 1).value for r in range(hrow + 2, ws.max_row + 1)]
            numeric = any(is_number(v) for v in below) and not any(isinstance(v, str) and v not in ("inf", "-inf", "n/a")
                                                                  for v in below)
            want = "right" if numeric else None
            check(c.alignment.horizontal in ((want,) if want else (None, "left", "general")),
                  f"{name}: header {c.value!r} aligned {c.alignment.horizontal!r}, its column "
                  f"{'numbers' if numeric else 'text'}")
    if legends is not None:
        got = [c.value for c in ws[hrow + 1][:len(headers)]]
        check(got == legends, f"{name}: legend row {got} != {legends}")
        first = hrow + 2
        check(ws.freeze_panes == f"A{first}", f"{name}: frozen panes {ws.freeze_panes}, expected A{first}")
    else:
        first = hrow + 1
    data = rows[1:]
    # A summary table starts with the hidden column population (blank for lines about the whole
    # file); its items are in the column item.
    item = headers.index("item") if "item" in headers else 0
    formatted = set()
    for i, crow in enumerate(data):
        r = first + i
        for j, text in enumerate(crow):
            cell = ws.cell(row=r, column=j + 1)
            where = f"{name}!{cell.coordinate}"
            check_value(where, cell, text)
            flagged = (name, i, j) in WARNINGS or (name, i, None) in WARNINGS
            rgb = (cell.fill.fgColor.rgb or "") if cell.fill and cell.fill.fill_type else ""
            colored = isinstance(rgb, str) and rgb.upper().endswith(WARN_FILL)
            check(flagged == colored, f"{where}: warning colour {'missing' if flagged else 'unexpected'} ({rgb!r})")
            if is_number(cell.value):
                if name in FORMATS and headers[j] in FORMATS[name]:
                    want = FORMATS[name][headers[j]]
                    check(cell.number_format == want, f"{where}: number format {cell.number_format!r}, expected {want!r}")
                if name == "Summary" and crow[item] in SUMMARY_FORMATS and j == item + 1:
                    want = SUMMARY_FORMATS[crow[item]]
                    formatted.add(crow[item])
                    check(cell.number_format == want, f"{where}: number format {cell.number_format!r}, expected {want!r}")
    if name == "Summary":
        check_summary_wrap(ws, first, data, item)
        check(formatted == set(SUMMARY_FORMATS), f"{name}: items {sorted(set(SUMMARY_FORMATS) - formatted)} not found "
                                                 f"with a number")
    check(ws.max_row == first + len(data) - 1, f"{name}: {ws.max_row} rows, expected {first + len(data) - 1}")
    # Widths fit the headers (bold text is a little wider) and stay within the caps of workbook.c;
    # the population column of a summary is hidden.
    for j, h in enumerate(headers):
        letter = openpyxl.utils.get_column_letter(j + 1)
        if name == "Summary" and h == "population":
            check(j == 0 and ws.column_dimensions[letter].hidden, f"{name}: column {letter} (population) is not hidden")
            continue
        check(not ws.column_dimensions[letter].hidden, f"{name}: column {letter} ({h!r}) is hidden")
        w = ws.column_dimensions[letter].width
        check(w is not None and len(h) + 1 <= w <= 71, f"{name}: column {letter} ({h!r}) width {w}")




def check_print(ws, top, bottom):
    """Print set-up of every sheet (print_rule_problems): A4, the heading rows (and legend row)
    repeated on every page, one page wide in the orientation its width asks for."""
    for msg in print_rule_problems(ws, f"${top}:${bottom}") + chart_problems(ws) + wrapped_row_problems(ws):
        check(False, msg)


def check_summary_wrap(ws, first, data, item):
    """A summary's item, value and note wrap; a long text value with no note spreads over the note
    column (merged), and a wrapped row is taller than one line."""
    merged = {str(m) for m in ws.merged_cells.ranges}
    for i, crow in enumerate(data):
        r = first + i
        if crow[item + 1] == "" and crow[item + 2] == "":
            continue   # a heading
        for j in (item, item + 1, item + 2):
            c = ws.cell(row=r, column=j + 1)
            if isinstance(c, openpyxl.cell.cell.MergedCell):
                continue   # the covered part of a merged value: openpyxl keeps no style for it
            check(c.alignment.wrap_text, f"Summary!{c.coordinate}: not wrapped")
        value, note = crow[item + 1], crow[item + 2]
        # Long: more than its column holds on one line (workbook.c, text_lines). Texts within a fifth
        # of the width either way are left alone: the writer breaks at spaces.
        width = ws.column_dimensions[openpyxl.utils.get_column_letter(item + 2)].width
        textual = value != "" and not re.fullmatch(r"-?[0-9.eE+-]+", value)
        long_text = textual and not note and len(value) > 1.2 * width
        short = not textual or note or len(value) < 0.8 * width
        rng = f"{openpyxl.utils.get_column_letter(item + 2)}{r}:{openpyxl.utils.get_column_letter(item + 3)}{r}"
        if long_text or short:
            check((rng in merged) == long_text, f"Summary!{rng}: merged {rng in merged}, a long text with no note "
                                                f"{long_text} (column width {width})")
        # A text longer than the value and note columns together wraps onto more than one line.
        both = width + ws.column_dimensions[openpyxl.utils.get_column_letter(item + 3)].width
        if long_text and len(value) > 1.2 * both:
            h = ws.row_dimensions[r].height
            check(h is not None and h >= 30, f"Summary row {r}: height {h} for {len(value)} characters wrapped")


def check_no_text_numbers(wb, label):
    """No cell anywhere holds a finite number as text (the classic 'number stored as text')."""
    for ws in wb.worksheets:
        for row in ws.iter_rows():
            for c in row:
                if isinstance(c.value, str):
                    try:
                        x = float(c.value)
                    except ValueError:
                        continue
                    check(not math.isfinite(x), f"{label} {ws.title}!{c.coordinate}: number stored as text {c.value!r}")


def check_charts(path, sheet_names):
    with zipfile.ZipFile(path) as z:
        names = sorted(n for n in z.namelist() if re.fullmatch(r"xl/charts/chart\d+\.xml", n))
        check(len(names) == 3, f"expected 3 charts in the package, found {names}")
        xml = {n: z.read(n).decode("utf-8") for n in names}
    kinds = sorted("bar" if "<c:barChart>" in x else "scatter" if "<c:scatterChart>" in x else "?"
                   for x in xml.values())
    check(kinds == ["bar", "scatter", "scatter"], f"chart types {kinds}")
    for n, x in xml.items():
        for ref in re.findall(r"<c:f>(.*?)</c:f>", x):
            m = re.fullmatch(r"(?:'((?:[^']|'')+)'|([^!']+))!\$[A-Z]+\$\d+(?::\$[A-Z]+\$\d+)?", ref)
            check(m is not None, f"{n}: odd cell reference {ref!r}")
            if m:
                sheet = (m.group(1) or m.group(2)).replace("''", "'")
                check(sheet in sheet_names, f"{n}: reference to unknown sheet {sheet!r}")
    trend = [x for x in xml.values() if "Counts and estimated abundance" in x]
    check(len(trend) == 1, "trend chart not found by its title")
    if trend:
        sers = re.findall(r"<c:ser>.*?</c:ser>", trend[0], re.S)
        check(len(sers) == 4, f"trend chart has {len(sers)} series, expected 4")
        if len(sers) == 4:
            # Observed counts: markers, no line; trend: a line, no markers; band: dashed lines.
            check("<a:ln><a:noFill/></a:ln>" in sers[0] and 'symbol val="circle"' in sers[0],
                  "observed series is not markers-only")
            check('symbol val="none"' in sers[1] and "<a:noFill/>" not in sers[1], "trend series is not a plain line")
            check(all('prstDash val="dash"' in s for s in sers[2:]), "band series are not dashed lines")


def check_edge():
    wb = openpyxl.load_workbook(EDGE)
    want = ["Results", "results (2)", "A name much longer than thirty-", "A name much longer than thi (2)",
            "_x_", "history_"]
    check(wb.sheetnames == want, f"edge sheet names {wb.sheetnames} != {want}")
    for k, ws in enumerate(wb.worksheets):
        hrow = find_header(ws, ["Text", "Value"])
        check(hrow is not None, f"edge {ws.title}: header not found")
        if hrow is None:
            continue
        text = ws.cell(row=hrow + 2, column=1).value
        # The bad byte becomes U+FFFD, the bell (not allowed in XML 1.0, section 2.2) a space.
        check(text == "bad \ufffd byte, bell   here",
              f"edge {ws.title}: cleaned text {text!r}")
        inf = ws.cell(row=hrow + 2, column=2).value
        check(inf == ("inf" if k % 2 else "-inf"), f"edge {ws.title}: infinity shown as {inf!r}")
    check_no_text_numbers(wb, "edge")


def check_libreoffice():
    lo = shutil.which("libreoffice")
    if not lo:
        print("skip: libreoffice is not on PATH; the PDF conversion check did not run")
        return
    with tempfile.TemporaryDirectory() as out:
        for src in (SAMPLE, EDGE):
            r = subprocess.run([lo, "--headless", f"-env:UserInstallation=file://{out}/profile",
                                "--convert-to", "pdf", "--outdir", out, os.path.abspath(src)],
                               capture_output=True, text=True, timeout=120)
            pdf = os.path.join(out, os.path.splitext(os.path.basename(src))[0] + ".pdf")
            ok = r.returncode == 0 and os.path.exists(pdf) and os.path.getsize(pdf) > 1000
            check(ok, f"libreoffice could not convert {src}: rc={r.returncode} {r.stderr.strip()[:300]}")
            if ok:
                with open(pdf, "rb") as f:
                    check(f.read(5) == b"%PDF-", f"{pdf} is not a PDF")


def main():
    for p in (SAMPLE, EDGE):
        if not os.path.exists(p):
            print(f"FAIL: {p} is missing: it is written by {BUILD}/tests/test_workbook (make check runs it first)")
            return 1
    wb = openpyxl.load_workbook(SAMPLE)
    check(wb.sheetnames == list(SHEETS), f"sheet names {wb.sheetnames} != {list(SHEETS)}")
    for name, (csv_name, legends) in SHEETS.items():
        if name in wb.sheetnames:
            check_sheet(wb, name, csv_name, legends)
    check_no_text_numbers(wb, "sample")
    # The cautions above the tables are highlighted (bold on a coloured fill).
    caution = wb["Trend"]["A2"]
    check(caution.value and caution.value.startswith("Two survey years") and caution.font.b and caution.fill.fill_type,
          f"Trend!A2 caution not highlighted: {caution.value!r}")
    check_charts(SAMPLE, wb.sheetnames)
    check_edge()
    check_libreoffice()
    for f in failures:
        print("FAIL:", f)
    print(f"workbook read-back: {len(failures)} problem(s)")
    return 1 if failures else 0


if __name__ == "__main__":
    sys.exit(main())
