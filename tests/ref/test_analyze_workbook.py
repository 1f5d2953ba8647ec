"""Runs `tallyfit analyze` on the heron demo survey with short settings and reads the workbook back
with openpyxl (Debian's python3-openpyxl, an independent reader of the Office Open XML format); the
chart parts are read with Python's zipfile.

Checks:
- the sheets are the tables of contents.csv, in order, each with its CSV twin;
- header and legend rows, frozen panes, number formats by column kind;
- every number equals the CSV twin's (libxlsxwriter stores 16 significant digits, so a value that
  needs 17 comes back rounded to 16), text equals text, blanks are blank, and no cell anywhere
  holds a number stored as text;
- sampler diagnostics beyond their thresholds are coloured and the others are not;
- native charts: one per counts, projection, risk (one series per threshold) and models sheet,
  referring to existing sheets;
- the first page's figures equal the CSV tables they come from (counts, change, models, risk,
  declines), and the one-row-per-population table equals the first page;
- the model-averaged abundance of the last year, recomputed here from the raw draws and the
  posterior model probabilities with a weighted quantile that reduces to numpy's 'hazen'
  quantile (Hyndman & Fan 1996, definition 5) for equal weights;
- the SHA-256 on the first page equals Python's hashlib.sha256 of the survey file;
- the model comparison equals what `tallyfit compare` writes with the same settings and seed;
- if libreoffice is on PATH, the workbook converts to PDF (skipped with a message otherwise).
"""
import csv
import hashlib
import math
import os
import re
import shutil
import subprocess
import sys
import tempfile
import time
import zipfile

import numpy as np
import openpyxl

T = os.environ.get("TALLYFIT", os.path.abspath("tallyfit"))
SURVEY = "surveys/heron-colony.csv"
# Short settings: the test checks the layout and the arithmetic between tables, not convergence.
# A fixed particle count keeps the run short whatever the pilot finds.
FAST = ["--iterations", "800", "--warmup", "200", "--draws", "200", "--particles", "150", "--seed", "7"]
EPOCH = "1700000000"   # SOURCE_DATE_EPOCH: 2023-11-14 22:13:20 UTC
WARN_FILL = "F9D3C2"   # COLOUR_WARN_FILL in src/export/workbook.c
# The raw draws are CSV only by default (draws.csv, named in contents.csv with no sheet), so that
# the workbook stays quick to open; --workbook-draws puts them back (tests/e2e/analyze.sh).
SHEETS = ["Summary", "All populations", "Counts", "Projection", "Risk", "Declines", "Models", "Change",
          "Parameters", "Diagnostics"]
# Number formats the writer promises for each column kind (src/export/workbook.h).
FORMATS = {
    "Counts": {"Year": "0", "Count": "0"},
    "Change": {"Probability": "0.000", "Annual change": "0.0%", "Lower 95 %": "0.0%", "P(declined)": "0.000"},
    "Risk": {"calendar_year": "0", "probability": "0.000"},
    "Declines": {"decline": "0.0%", "probability": "0.000"},
    "Models": {"post_prob": "0.000", "particles": "0"},
    "Diagnostics": {"Acceptance": "0.0%", "Chains": "0"},
    "All populations": {"First year": "0", "Annual change": "0.0%", "P(declined)": "0.000"},
}
SUMMARY_FORMATS = {"Average annual change": "0.0%", "Chance the population declined": "0.000",
                   "Random seed": "0"}

failures = []


def check(cond, msg):
    if not cond:
        failures.append(msg)


def is_number(v):
    return isinstance(v, (int, float)) and not isinstance(v, bool)


def sig_digits(s):
    mant = s.lstrip("+-").lower().split("e")[0].replace(".", "").lstrip("0")
    return len(mant)


def read_csv(path):
    with open(path, newline="", encoding="utf-8") as f:
        return list(csv.reader(f))


def find_header(ws, headers):
    for row in ws.iter_rows(min_row=1, max_row=30):
        if [c.value for c in row[:len(headers)]] == headers:
            return row[0].row
    return None


def check_value(where, cell, text):
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
        check(v == text, f"{where}: expected the text {text!r} for an infinity, found {v!r}")
        return
    check(is_number(v), f"{where}: CSV holds the number {text} but the cell holds {v!r}")
    if is_number(v):
        want = x if sig_digits(text) <= 16 else float("%.16G" % x)
        check(float(v) == want, f"{where}: workbook holds {v!r}, CSV twin {text}")


def warned(cell):
    rgb = (cell.fill.fgColor.rgb or "") if cell.fill and cell.fill.fill_type else ""
    return isinstance(rgb, str) and rgb.upper().endswith(WARN_FILL)


def check_sheet(ws, rows, summary):
    name = ws.title
    headers = rows[0]
    hrow = find_header(ws, headers)
    check(hrow is not None, f"{name}: header row {headers} not found")
    if hrow is None:
        return None
    check(all(c.font.b for c in ws[hrow][:len(headers)]), f"{name}: header not bold")
    if summary:
        first = hrow + 1
    else:
        legends = [c.value for c in ws[hrow + 1][:len(headers)]]
        check(all(isinstance(x, str) and x for x in legends), f"{name}: a column has no legend: {legends}")
        first = hrow + 2
        check(ws.freeze_panes == f"A{first}", f"{name}: frozen panes {ws.freeze_panes}, expected A{first}")
    for i, crow in enumerate(rows[1:]):
        for j, text in enumerate(crow):
            cell = ws.cell(row=first + i, column=j + 1)
            check_value(f"{name}!{cell.coordinate}", cell, text)
            if is_number(cell.value):
                want = None
                if summary and j == 1:
                    want = SUMMARY_FORMATS.get(crow[0])
                elif not summary:
                    want = FORMATS.get(name, {}).get(headers[j])
                if want:
                    check(cell.number_format == want,
                          f"{name}!{cell.coordinate}: number format {cell.number_format!r}, expected {want!r}")
    check(ws.max_row == first + len(rows) - 2, f"{name}: {ws.max_row} rows, expected {first + len(rows) - 2}")
    return first


def check_no_text_numbers(wb):
    for ws in wb.worksheets:
        for row in ws.iter_rows():
            for c in row:
                if isinstance(c.value, str):
                    try:
                        x = float(c.value)
                    except ValueError:
                        continue
                    check(not math.isfinite(x), f"{ws.title}!{c.coordinate}: number stored as text {c.value!r}")


def check_warnings(ws, rows, first):
    """Diagnostics cells beyond their thresholds are coloured, and only those (sheets.h, fit.h)."""
    h = rows[0]
    limits = {"Max R-hat": lambda x: x > 1.01, "Min bulk ESS": lambda x: x < 400,
              "Min tail ESS": lambda x: x < 400, "Log-lik SD": lambda x: x > 2.0,
              "Lowest acceptance": lambda x: x < 0.05, "Pareto k": lambda x: x > 0.7}
    for i, crow in enumerate(rows[1:]):
        for col, bad in limits.items():
            j = h.index(col)
            cell = ws.cell(row=first + i, column=j + 1)
            if crow[j] == "":
                # An undefined R-hat or ESS (NaN, shown empty) ranks worst and is flagged
                # (tf_fit_health in src/sampler/fit.h).
                if col in ("Max R-hat", "Min bulk ESS", "Min tail ESS"):
                    check(warned(cell), f"Diagnostics!{cell.coordinate} ({col} undefined): not flagged")
                continue
            check(warned(cell) == bad(float(crow[j])),
                  f"Diagnostics!{cell.coordinate} ({col} = {crow[j]}): warning colour {'missing' if bad(float(crow[j])) else 'unexpected'}")


def check_charts(path, sheet_names, n_thresholds):
    with zipfile.ZipFile(path) as z:
        names = sorted(n for n in z.namelist() if re.fullmatch(r"xl/charts/chart\d+\.xml", n))
        xml = {n: z.read(n).decode("utf-8") for n in names}
    check(len(xml) == 4, f"expected 4 charts, found {names}")
    titles = {"Counts and estimated abundance": ("scatter", 4), "Projected abundance": ("scatter", 3),
              "Chance of falling below each threshold": ("scatter", n_thresholds),
              "Posterior model probabilities": ("bar", 1)}
    for title, (kind, n_series) in titles.items():
        found = [x for x in xml.values() if title in x]
        check(len(found) == 1, f"chart {title!r} not found once")
        if len(found) != 1:
            continue
        x = found[0]
        check((f"<c:{kind}Chart>" in x), f"chart {title!r} is not a {kind} chart")
        sers = re.findall(r"<c:ser>.*?</c:ser>", x, re.S)
        check(len(sers) == n_series, f"chart {title!r}: {len(sers)} series, expected {n_series}")
        if title.startswith("Chance"):
            # Long form: each threshold's series covers its own block of rows.
            blocks = [re.findall(r"<c:yVal>.*?<c:f>(.*?)</c:f>", s, re.S) for s in sers]
            flat = [b[0] for b in blocks if b]
            check(len(set(flat)) == len(flat), f"risk chart series share rows: {flat}")
    for n, x in xml.items():
        for ref in re.findall(r"<c:f>(.*?)</c:f>", x):
            m = re.fullmatch(r"(?:'((?:[^']|'')+)'|([^!']+))!\$[A-Z]+\$\d+(?::\$[A-Z]+\$\d+)?", ref)
            check(m is not None, f"{n}: odd cell reference {ref!r}")
            if m:
                sheet = (m.group(1) or m.group(2)).replace("''", "'")
                check(sheet in sheet_names, f"{n}: reference to unknown sheet {sheet!r}")


def weighted_quantile(values, weights, p):
    """Each value at the midpoint of its share of the weight, linear in between (average.h)."""
    order = np.argsort(values, kind="stable")
    v, w = np.asarray(values)[order], np.asarray(weights)[order]
    keep = w > 0
    v, w = v[keep], w[keep]
    pos = (np.cumsum(w) - 0.5 * w) / w.sum()
    return float(np.interp(p, pos, v))


def summary_items(rows):
    """Summary rows as (label, value, note), with sub-items ('  lower 95 %') prefixed by their parent."""
    out, parent = {}, ""
    for r in rows[1:]:
        label, value = r[0], r[1]
        if label.startswith("  "):
            label = parent + " /" + label.strip()
        else:
            parent = label
        out[label] = value
    return out


def num(x):
    return float(x) if x != "" else float("nan")


def check_summary(base, items):
    counts = read_csv(os.path.join(base, "counts.csv"))
    h = counts[0]
    last = counts[-1]
    year = last[h.index("Year")]
    a = f"Abundance in {year}"
    check(num(items[a]) == num(last[h.index("Estimate")]), "summary abundance != counts.csv estimate")
    check(num(items[a + " /lower 95 %"]) == num(last[h.index("Lower 95 %")]), "summary abundance lower != counts.csv")
    check(num(items[a + " /upper 95 %"]) == num(last[h.index("Upper 95 %")]), "summary abundance upper != counts.csv")

    change = read_csv(os.path.join(base, "change.csv"))
    ch = change[0]
    avg = [r for r in change[1:] if r[0] == "average"]
    check(len(avg) == 1, "change.csv has no average row")
    if avg:
        avg = avg[0]
        check(num(items["Average annual change"]) == num(avg[ch.index("Annual change")]), "summary change != change.csv")
        check(num(items["Average annual change /lower 95 %"]) == num(avg[ch.index("Lower 95 %")]), "change lower")
        check(num(items["Average annual change /upper 95 %"]) == num(avg[ch.index("Upper 95 %")]), "change upper")
        check(num(items["Chance the population declined"]) == num(avg[ch.index("P(declined)")]), "P(declined)")

    models = read_csv(os.path.join(base, "models.csv"))
    mh = models[0]
    fitted = [r for r in models[1:] if r[mh.index("status")] == "fitted"]
    probs = {r[mh.index("model")]: num(r[mh.index("post_prob")]) for r in fitted}
    check(abs(sum(probs.values()) - 1) < 1e-12, f"posterior model probabilities sum to {sum(probs.values())}")
    by_growth = {}
    for r in fitted:
        by_growth[r[mh.index("growth")]] = by_growth.get(r[mh.index("growth")], 0.0) + num(r[mh.index("post_prob")])
    best_growth = max(by_growth, key=by_growth.get)
    labels = {"exponential": "exponential growth", "ricker": "Ricker", "gompertz": "Gompertz",
              "theta-logistic": "theta-logistic"}
    check(items["Best-supported growth model"] == labels[best_growth],
          f"best growth model {items['Best-supported growth model']!r}, models.csv says {best_growth}")
    check(math.isclose(num(items["Best-supported growth model /its probability"]), by_growth[best_growth],
                       rel_tol=1e-12), "best growth model probability != sum over models.csv")
    check(num(items["Best-supported model /its probability"]) == max(probs.values()), "best model probability")

    risk = read_csv(os.path.join(base, "risk.csv"))
    rh = risk[0]
    n_risk = 0
    for label, value in items.items():
        m = re.fullmatch(r"Chance of falling below (\d+(?:\.\d+)?) % of the current abundance within (\d+) years", label)
        if not m:
            continue
        n_risk += 1
        th = m.group(1) + "%"
        rows = [r for r in risk[1:] if r[rh.index("threshold")] == th and r[rh.index("year")] == m.group(2)]
        check(len(rows) == 1 and num(rows[0][rh.index("probability")]) == num(value),
              f"summary {label!r} = {value} does not match risk.csv")
    check(n_risk == 9, f"{n_risk} risk items on the first page, expected 3 thresholds x 3 windows")

    declines = read_csv(os.path.join(base, "declines.csv"))
    dh = declines[0]
    n_dec = 0
    for label, value in items.items():
        m = re.fullmatch(r"Chance of a decline of (\d+) % or more within (\d+) years", label)
        if not m:
            continue
        n_dec += 1
        rows = [r for r in declines[1:] if r[dh.index("window")] == m.group(2)
                and math.isclose(float(r[dh.index("decline")]), int(m.group(1)) / 100)]
        check(len(rows) == 1 and num(rows[0][dh.index("probability")]) == num(value),
              f"summary {label!r} does not match declines.csv")
    check(n_dec == 3, f"{n_dec} decline items, expected 3")

    # The one-row-per-population table repeats the first page.
    allp = read_csv(os.path.join(base, "all-populations.csv"))
    ah, ar = allp[0], allp[1]
    check(len(allp) == 2, "all-populations.csv should have one row")
    check(num(ar[ah.index("Abundance")]) == num(items[a]), "all-populations abundance")
    check(num(ar[ah.index("Annual change")]) == num(items["Average annual change"]), "all-populations change")
    check(ar[ah.index("Best growth model")] == items["Best-supported growth model"], "all-populations best model")
    check(num(ar[ah.index("Below 20% in 20 y")]) ==
          num(items["Chance of falling below 20 % of the current abundance within 20 years"]), "all-populations risk")

    # Model averaging, recomputed from the raw draws: log of the last-year abundance, weighted by
    # P(model) / draws of the model, then the quantile, then exp (the order sheets use).
    draws = read_csv(os.path.join(base, "draws.csv"))
    dh = draws[0]
    per_model = {}
    for r in draws[1:]:
        per_model.setdefault(r[dh.index("Model")], []).append(math.log(float(r[dh.index("Last-year abundance")])))
    vals, wts = [], []
    for m, xs in per_model.items():
        vals += xs
        wts += [probs[m] / len(xs)] * len(xs)
    for col, p in (("Estimate", 0.5), ("Lower 95 %", 0.025), ("Upper 95 %", 0.975)):
        got = math.exp(weighted_quantile(vals, wts, p))
        want = num(last[h.index(col)])
        check(math.isclose(got, want, rel_tol=1e-9), f"model-averaged {col} {want} != recomputed {got}")
    # The weighted quantile itself against numpy's Hazen quantile for equal weights.
    xs = per_model[max(probs, key=probs.get)]
    for p in (0.025, 0.5, 0.975):
        a_ = weighted_quantile(xs, [1.0] * len(xs), p)
        b_ = float(np.quantile(xs, p, method="hazen"))
        check(math.isclose(a_, b_, rel_tol=1e-12, abs_tol=1e-12), f"weighted quantile {a_} != numpy hazen {b_}")


def check_compare_command(base, tmp):
    """analyze's model comparison is the compare machinery's: the compare command with the same
    settings and seed writes the same table."""
    help_ = subprocess.run([T, "--help"], capture_output=True, text=True).stdout
    if not re.search(r"^\s+compare\s", help_, re.M):
        print("skip: no compare command in this build")
        return
    out = os.path.join(tmp, "cmp")
    r = subprocess.run([T, "compare", SURVEY, "-o", out, "--quiet", "--threads", "2",
                        "--model", "exponential,ricker,gompertz", "--obs", "poisson,negbin"] + FAST,
                       capture_output=True, text=True)
    check(r.returncode == 0, f"compare failed: {r.stderr[:400]}")
    if r.returncode != 0:
        return
    theirs = read_csv(os.path.join(out, "model-comparison.csv"))
    ours = read_csv(os.path.join(base, "models.csv"))
    check(theirs == ours, "models.csv differs from the compare command's model-comparison.csv")


def check_libreoffice(path):
    lo = shutil.which("libreoffice")
    if not lo:
        print("skip: libreoffice is not on PATH; the PDF conversion check did not run")
        return
    with tempfile.TemporaryDirectory() as out:
        r = subprocess.run([lo, "--headless", f"-env:UserInstallation=file://{out}/profile",
                            "--convert-to", "pdf", "--outdir", out, os.path.abspath(path)],
                           capture_output=True, text=True, timeout=240)
        pdf = os.path.join(out, os.path.splitext(os.path.basename(path))[0] + ".pdf")
        ok = r.returncode == 0 and os.path.exists(pdf) and os.path.getsize(pdf) > 1000
        check(ok, f"libreoffice could not convert {path}: rc={r.returncode} {r.stderr.strip()[:300]}")
        if ok:
            with open(pdf, "rb") as f:
                check(f.read(5) == b"%PDF-", f"{pdf} is not a PDF")


def main():
    with tempfile.TemporaryDirectory() as tmp:
        env = dict(os.environ, SOURCE_DATE_EPOCH=EPOCH)
        t0 = time.time()
        r = subprocess.run([T, "analyze", SURVEY, "-o", tmp, "--threads", "2"] + FAST,
                           capture_output=True, text=True, env=env)
        if r.returncode != 0:
            print(f"FAIL: analyze exited {r.returncode}: {r.stderr[:800]}")
            return 1
        xlsx = os.path.join(tmp, "heron-colony.xlsx")
        base = os.path.join(tmp, "heron-colony")
        check(xlsx in r.stdout, "stdout does not say where the workbook is")
        wb = openpyxl.load_workbook(xlsx)
        contents = read_csv(os.path.join(base, "contents.csv"))
        check(contents[0] == ["sheet", "file", "contents"], f"contents header {contents[0]}")
        sheets = [row[0] for row in contents[1:] if row[0]]
        csv_only = [row[1] for row in contents[1:] if not row[0]]
        check(csv_only == ["draws.csv"], f"contents.csv lists {csv_only} as CSV only, want draws.csv")
        check(wb.sheetnames == SHEETS, f"sheets {wb.sheetnames} != {SHEETS}")
        check(sheets == wb.sheetnames, f"contents.csv lists {sheets}, the workbook has {wb.sheetnames}")
        tables = {}
        for sheet, file, _ in contents[1:]:
            rows = read_csv(os.path.join(base, file))
            if sheet:
                tables[sheet] = rows
            if sheet in wb.sheetnames:
                first = check_sheet(wb[sheet], rows, summary=(sheet == "Summary"))
                if sheet == "Diagnostics" and first:
                    check_warnings(wb[sheet], rows, first)
        check_no_text_numbers(wb)
        # Cautions are the first notes of the first page, highlighted.
        a2 = wb["Summary"]["A2"]
        check(isinstance(a2.value, str) and "model-based" in a2.value and a2.font.b and a2.fill.fill_type,
              f"Summary!A2 is not a highlighted caution: {a2.value!r}")
        items = summary_items(tables["Summary"])
        with open(SURVEY, "rb") as f:
            digest = hashlib.sha256(f.read()).hexdigest()
        check(items.get("SHA-256 of the file") == digest, f"SHA-256 {items.get('SHA-256 of the file')} != {digest}")
        check(items.get("Run on") == "2023-11-14 22:13:20 UTC", f"date {items.get('Run on')!r}")
        check(items.get("Random seed") == "7", f"seed {items.get('Random seed')!r}")
        # The first page says where the draws went.
        where = items.get("Raw posterior draws", "")
        check(where.startswith("CSV only: draws.csv in the folder heron-colony/"),
              f"first page on the draws: {where!r}")
        n_th = len({r[2] for r in tables["Risk"][1:]})
        check_charts(xlsx, wb.sheetnames, n_th)
        check_summary(base, items)
        check_compare_command(base, tmp)
        check_libreoffice(xlsx)
        print(f"analyze run and checks took {time.time() - t0:.1f} s")
    for f in failures:
        print("FAIL:", f)
    print(f"analyze workbook: {len(failures)} problem(s)")
    return 1 if failures else 0


if __name__ == "__main__":
    sys.exit(main())
