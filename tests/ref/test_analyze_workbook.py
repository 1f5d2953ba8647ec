"""Runs `tallyfit analyze` on the heron demo survey with short settings and reads the workbook back
with openpyxl (Debian's python3-openpyxl, an independent reader of the Office Open XML format); the
chart parts are read with Python's zipfile.

With one population, `-o DIR` is the results folder itself: DIR/heron-colony.xlsx and the CSV
tables directly in DIR. Every CSV header is checked against docs/tables.md (output_tables.py).

Checks:
- the sheets are the tables of contents.csv, in order, each with its CSV twin, and contents.csv
  lists every CSV file of the folder;
- heading, legend and data rows, frozen panes, number formats by column kind; the headings are
  labels made from the column names (docs/tables.md: `Lower 95 %` for lower_95), one per column;
  the first page has its hidden first column `population`, so its item / value / note are B / C / D;
- every number equals the CSV twin's (libxlsxwriter stores 16 significant digits, so a value that
  needs 17 comes back rounded to 16), text equals text, blanks are blank, and no cell anywhere
  holds a number stored as text;
- sampler diagnostics beyond their thresholds are coloured and the others are not;
- native charts below their sheet's table, within a portrait page's width (print_rules.chart_problems),
  and every wrapped row tall enough for its text (print_rules.wrapped_row_problems);
- native charts: one per abundance, projection, risk (one series per threshold) and models sheet,
  referring to existing sheets, each series to the columns it is about (by the CSV name of the
  column it points at: year against count, median, lower_95 and upper_95...);
- the first page's figures equal the CSV tables they come from (abundance, change, models, risk,
  declines), and the one-row-per-population table equals the first page and the tables;
- the model-averaged abundance of the last year (median, 50 % and 95 % bands: 25/75 % and
  2.5/97.5 % quantiles), recomputed here from the raw draws and the posterior model probabilities
  with a weighted quantile that reduces to numpy's 'hazen' quantile (Hyndman & Fan 1996,
  definition 5) for equal weights;
- the SHA-256 on the first page equals Python's hashlib.sha256 of the survey file;
- the model comparison equals what `tallyfit compare` writes with the same settings and seed;
- if libreoffice is on PATH, the workbook converts to PDF (skipped with a message otherwise).
"""
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

import output_tables
from print_rules import chart_problems, wrapped_row_problems

T = os.environ.get("TALLYFIT", os.path.abspath("tallyfit"))
SURVEY = "surveys/heron-colony.csv"
# Short settings: the test checks the layout and the arithmetic between tables, not convergence.
# A fixed particle count keeps the run short whatever the pilot finds.
FAST = ["--iterations", "800", "--warmup", "200", "--draws", "200", "--particles", "150", "--seed", "7"]
EPOCH = "1700000000"   # SOURCE_DATE_EPOCH: 2023-11-14 22:13:20 UTC
WARN_FILL = "F9D3C2"   # COLOUR_WARN_FILL in src/export/workbook.c
# The raw draws are CSV only by default (draws.csv, named in contents.csv with no sheet), so that
# the workbook stays quick to open; --workbook-draws puts them back (tests/e2e/analyze.sh).
SHEETS = ["Summary", "Populations", "Abundance", "Projection", "Risk", "Declines", "Models", "Prior-sensitivity",
          "Change", "Parameters", "Diagnostics", "Chains"]
# Number formats the writer promises for each column kind (kinds in src/export/table.h, formats in
# src/export/workbook.c: a year or a whole number "0", a probability "0.000", a fraction shown as a
# percentage PERCENT), by CSV column name.
# Every share and change is a fraction in the CSV and a percentage in the workbook (docs/tables.md,
# "Scales"); the survey's counts here are whole animals.
# A percentage is SHARE when every value of its column (on the first page: the value itself) lies
# in [0, 1], a share or a probability whose tiny and near-certain values read "< 0.1 %" and
# "> 99.9 %", else SIGNED (a change with a sign).
SHARE = '[<0.001]"< 0.1 %";[>0.999]"> 99.9 %";0.0 %'
SIGNED = "0.0 %"
PERCENT = "percent"
FORMATS = {
    "Abundance": {"year": "0", "count": "0"},
    "Change": {"model_prob": "0.000", "mean": PERCENT, "median": PERCENT, "lower_95": PERCENT,
               "upper_95": PERCENT, "p_decline": "0.000", "first_year": "0"},
    "Risk": {"years_ahead": "0", "year": "0", "probability": "0.000"},
    "Declines": {"window_years": "0", "decline": SHARE, "probability": "0.000"},
    "Models": {"model_prob": "0.000", "particles": "0"},
    "Prior-sensitivity": {"model_prob": "0.000", "risk_1_10y": "0.000"},
    "Diagnostics": {"acceptance": SHARE, "chains": "0"},
    "Populations": {"first_year": "0", "change": PERCENT, "change_lower_95": PERCENT, "p_decline": "0.000"},
}
# The trend items are named by their years ("Trend over 1996-2025"); matched by their start. The
# trends are signed changes (PERCENT); the chance of a downward trend is a share (SHARE).
SUMMARY_FORMATS = {"Trend over": PERCENT, "Recent trend,": PERCENT, "Chance of a downward trend over": SHARE,
                   "Random seed": "0"}


def percent_format(values):
    """The percentage format the writer picks for these numbers (see SHARE above)."""
    return SHARE if all(0 <= v <= 1 for v in values) else SIGNED
# Labels docs/tables.md gives by name ("`Lower 95 %` for `lower_95`"; the upper end by symmetry).
LABELS = {"lower_95": "Lower 95 %", "upper_95": "Upper 95 %"}

failures = []
_grouped = {}   # key -> index in failures: the same problem in many cells of a column is one line


def check(cond, msg, key=None):
    if cond:
        return
    if key is None:
        failures.append(msg)
    elif key in _grouped:
        first, n = failures[_grouped[key]]
        failures[_grouped[key]] = (first, n + 1)
    else:
        _grouped[key] = len(failures)
        failures.append((msg, 1))


def failure_lines():
    for f in failures:
        if isinstance(f, tuple):
            yield f[0] + (f" (and {f[1] - 1} more cells of the column)" if f[1] > 1 else "")
        else:
            yield f


def is_number(v):
    return isinstance(v, (int, float)) and not isinstance(v, bool)


def sig_digits(s):
    mant = s.lstrip("+-").lower().split("e")[0].replace(".", "").lstrip("0")
    return len(mant)


def find_header(ws, n):
    """The heading row: the first whose first cell is the population column's heading and which has
    n headings. Above it are the sheet's notes (a line each, in column A)."""
    for row in ws.iter_rows(min_row=1, max_row=30):
        v = row[0].value
        if isinstance(v, str) and v.lower() == "population":
            return row[0].row if all(c.value is not None for c in row[:n]) else None
    return None


def check_value(where, cell, text):
    v = cell.value
    key = (cell.parent.title, openpyxl.utils.get_column_letter(cell.column), "value")
    if text == "":
        check(v is None, f"{where}: expected a blank cell, found {v!r}", key)
        return
    try:
        x = float(text)
    except ValueError:
        check(v == text, f"{where}: expected text {text!r}, found {v!r}", key)
        return
    if not math.isfinite(x):
        check(v == text, f"{where}: expected the text {text!r} for an infinity, found {v!r}", key)
        return
    check(is_number(v), f"{where}: CSV holds the number {text} but the cell holds {v!r}", key)
    if is_number(v):
        want = x if sig_digits(text) <= 16 else float("%.16G" % x)
        check(float(v) == want, f"{where}: workbook holds {v!r}, CSV twin {text}", key)


def warned(cell):
    rgb = (cell.fill.fgColor.rgb or "") if cell.fill and cell.fill.fill_type else ""
    return isinstance(rgb, str) and rgb.upper().endswith(WARN_FILL)


def check_sheet(ws, rows, summary):
    name = ws.title
    headers = rows[0]
    hrow = find_header(ws, len(headers))
    check(hrow is not None, f"{name}: heading row for {headers} not found")
    if hrow is None:
        return None
    check(ws.max_column == len(headers), f"{name}: {ws.max_column} columns, the CSV twin has {len(headers)}")
    check(all(c.font.b for c in ws[hrow][:len(headers)]), f"{name}: header not bold")
    # The headings are the columns' labels, made from their names: one per column, none the bare
    # CSV name.
    labels = [c.value for c in ws[hrow][:len(headers)]]
    raw = [h for h, lab in zip(headers, labels) if not (isinstance(lab, str) and lab[:1].isupper() and lab != h)]
    check(not raw, f"{name}: headings {[lab for h, lab in zip(headers, labels) if h in raw]} are not labels "
                   f"(columns {raw})")
    check(len(set(labels)) == len(labels),
          f"{name}: repeated headings {sorted({lab for lab in labels if labels.count(lab) > 1})} "
          f"(columns {[h for h, lab in zip(headers, labels) if labels.count(lab) > 1]})")
    for h, lab in zip(headers, labels):
        if h in LABELS:
            check(lab == LABELS[h], f"{name}: the heading of {h} is {lab!r}, want {LABELS[h]!r}")
    if summary:
        # The first page: a hidden first column (population), item / value / note visible in B / C / D.
        check(ws.column_dimensions["A"].hidden, f"{name}: column A (population) is not hidden")
        check(headers[:4] == ["population", "item", "value", "note"], f"{name}: columns {headers}")
        check(not any(ws.column_dimensions[c].hidden for c in "BCD"), f"{name}: a column of B-D is hidden")
        first = hrow + 1
    else:
        legends = [c.value for c in ws[hrow + 1][:len(headers)]]
        check(all(isinstance(x, str) and x for x in legends), f"{name}: a column has no legend: {legends}")
        first = hrow + 2
        check(ws.freeze_panes == f"A{first}", f"{name}: frozen panes {ws.freeze_panes}, expected A{first}")
    for i, crow in enumerate(rows[1:]):
        for j, text in enumerate(crow):
            cell = ws.cell(row=first + i, column=j + 1)
            check_value(f"{name}!{cell.coordinate} ({headers[j]})", cell, text)
            if is_number(cell.value):
                want = None
                if summary and j == 2:
                    want = next((f for k, f in SUMMARY_FORMATS.items() if crow[1].startswith(k)), None)
                elif not summary:
                    want = FORMATS.get(name, {}).get(headers[j])
                if want == PERCENT:
                    cells = [float(r[j]) for r in rows[1:] if r[j] != ""] if not summary else [float(text)]
                    want = percent_format([v for v in cells if math.isfinite(v)])
                if want:
                    check(cell.number_format == want,
                          f"{name}!{cell.coordinate} ({headers[j]}): number format {cell.number_format!r}, "
                          f"expected {want!r}", (name, openpyxl.utils.get_column_letter(cell.column), "format"))
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
                    check(not math.isfinite(x), f"{ws.title}!{c.coordinate}: number stored as text {c.value!r}",
                          (ws.title, c.column_letter, "text"))


def check_warnings(ws, rows, first):
    """Diagnostics cells beyond their thresholds are coloured, and only those (sheets.h, fit.h)."""
    h = rows[0]
    limits = {"max_r_hat": lambda x: x > 1.01, "min_bulk_ess": lambda x: x < 400,
              "min_tail_ess": lambda x: x < 400, "loglik_sd": lambda x: x > 2.0,
              "min_acceptance": lambda x: x < 0.05, "pareto_k": lambda x: x > 0.7}
    for i, crow in enumerate(rows[1:]):
        for col, bad in limits.items():
            j = h.index(col)
            cell = ws.cell(row=first + i, column=j + 1)
            if crow[j] == "":
                # An undefined R-hat or ESS (NaN, shown empty) ranks worst and is flagged
                # (tf_fit_health in src/sampler/fit.h).
                if col in ("max_r_hat", "min_bulk_ess", "min_tail_ess"):
                    check(warned(cell), f"Diagnostics!{cell.coordinate} ({col} undefined): not flagged")
                continue
            check(warned(cell) == bad(float(crow[j])),
                  f"Diagnostics!{cell.coordinate} ({col} = {crow[j]}): warning colour {'missing' if bad(float(crow[j])) else 'unexpected'}")


def ref_parts(ref):
    """'Sheet'!$C$5:$C$34 -> (sheet, column index from 0, first row, last row), or None."""
    m = re.fullmatch(r"(?:'((?:[^']|'')+)'|([^!']+))!\$([A-Z]+)\$(\d+)(?::\$([A-Z]+)\$(\d+))?", ref)
    if not m:
        return None
    sheet = (m.group(1) or m.group(2)).replace("''", "'")
    col = openpyxl.utils.column_index_from_string(m.group(3)) - 1
    return sheet, col, int(m.group(4)), int(m.group(6) or m.group(4)), m.group(5) or m.group(3)


def check_charts(path, sheet_names, n_thresholds, layout):
    """layout: sheet -> (CSV rows, first data row in the sheet), to name the column a series is on."""
    with zipfile.ZipFile(path) as z:
        names = sorted(n for n in z.namelist() if re.fullmatch(r"xl/charts/chart\d+\.xml", n))
        xml = {n: z.read(n).decode("utf-8") for n in names}
    check(len(xml) == 4, f"expected 4 charts, found {names}")
    # title -> (kind, series, the x (or category) column, the y (or value) columns of the series)
    titles = {"Counts and estimated abundance": ("scatter", 4, "year", ["count", "median", "lower_95", "upper_95"]),
              "Projected abundance": ("scatter", 3, "year", ["median", "lower_95", "upper_95"]),
              "Chance of falling below each threshold": ("scatter", n_thresholds, "year",
                                                         ["probability"] * n_thresholds),
              "Posterior model probabilities": ("bar", 1, "model", ["model_prob"])}

    def column_of(title, ref):
        p = ref_parts(ref)
        if p is None or p[0] not in layout:
            check(False, f"chart {title!r}: reference {ref!r} is not to a table sheet")
            return None, None
        sheet, col, r0, r1, col_end = p
        rows, first = layout[sheet]
        check(col_end == openpyxl.utils.get_column_letter(col + 1), f"chart {title!r}: {ref!r} spans columns")
        check(first <= r0 <= r1 <= first + len(rows) - 2, f"chart {title!r}: {ref!r} is not within the data rows "
                                                         f"{first}-{first + len(rows) - 2} of {sheet}")
        return (rows[0][col] if col < len(rows[0]) else None), (sheet, r0, r1)

    for title, (kind, n_series, x_name, y_names) in titles.items():
        found = [x for x in xml.values() if title in x]
        check(len(found) == 1, f"chart {title!r} not found once")
        if len(found) != 1:
            continue
        x = found[0]
        check((f"<c:{kind}Chart>" in x), f"chart {title!r} is not a {kind} chart")
        sers = re.findall(r"<c:ser>.*?</c:ser>", x, re.S)
        check(len(sers) == n_series, f"chart {title!r}: {len(sers)} series, expected {n_series}")
        xtag, ytag = ("xVal", "yVal") if kind == "scatter" else ("cat", "val")
        got_y, blocks = [], []
        for s in sers:
            xr = re.findall(rf"<c:{xtag}>.*?<c:f>(.*?)</c:f>", s, re.S)
            yr = re.findall(rf"<c:{ytag}>.*?<c:f>(.*?)</c:f>", s, re.S)
            if len(xr) != 1 or len(yr) != 1:
                check(False, f"chart {title!r}: a series without one {xtag} and one {ytag} reference")
                continue
            xn, xspan = column_of(title, xr[0])
            yn, yspan = column_of(title, yr[0])
            check(xn == x_name, f"chart {title!r}: a series' {xtag} is column {xn}, want {x_name}")
            check(xspan is None or yspan is None or xspan == yspan,
                  f"chart {title!r}: {xtag} rows {xspan} and {ytag} rows {yspan} differ")
            got_y.append(yn)
            blocks.append(yspan)
        check(sorted(got_y, key=str) == sorted(y_names), f"chart {title!r}: series on {got_y}, want {y_names}")
        if title.startswith("Chance") and "Risk" in layout:
            # Long form: each threshold's series covers its own block of rows, one threshold each.
            rows, first = layout["Risk"]
            h = rows[0]
            seen = set()
            for b in blocks:
                if b is None:
                    continue
                th = {(rows[r - first + 1][h.index("threshold")], rows[r - first + 1][h.index("threshold_kind")])
                      for r in range(b[1], b[2] + 1)}
                check(len(th) == 1, f"risk chart series {b} covers thresholds {sorted(th)}")
                seen |= th
            check(len(seen) == n_thresholds, f"risk chart shows thresholds {sorted(seen)}, want {n_thresholds}")
    for n, x in xml.items():
        for ref in re.findall(r"<c:f>(.*?)</c:f>", x):
            p = ref_parts(ref)
            check(p is not None, f"{n}: odd cell reference {ref!r}")
            if p:
                check(p[0] in sheet_names, f"{n}: reference to unknown sheet {p[0]!r}")


def weighted_quantile(values, weights, p):
    """Each value at the midpoint of its share of the weight, linear in between (average.h)."""
    order = np.argsort(values, kind="stable")
    v, w = np.asarray(values)[order], np.asarray(weights)[order]
    keep = w > 0
    v, w = v[keep], w[keep]
    pos = (np.cumsum(w) - 0.5 * w) / w.sum()
    return float(np.interp(p, pos, v))


def summary_items(rows):
    """Summary rows (population, item, value, note) as {item: value}, with sub-items ('  lower 95 %')
    prefixed by their parent."""
    out, parent = {}, ""
    for r in rows[1:]:
        label, value = r[1], r[2]
        if label.startswith("  "):
            label = parent + " /" + label.strip()
        else:
            parent = label
        out[label] = value
    return out


def num(x):
    return float(x) if x != "" else float("nan")


def column(rows):
    """{column name: value} per row of a table read as lists."""
    return [dict(zip(rows[0], r)) for r in rows[1:]]


def check_summary(base, items):
    population = "heron-colony"   # one population: labelled by the survey's name
    abundance = column(output_tables.read_lists(os.path.join(base, "abundance.csv")))
    check({(r["population"], r["model"]) for r in abundance} == {(population, "average")},
          "abundance.csv should hold the model average of heron-colony only")
    last = abundance[-1]
    check(last["year"] == max(r["year"] for r in abundance), "abundance.csv does not end with the last year")
    # The unit is in the label (animals here: every effort is 1).
    a = f"Abundance in {last['year']} ({last['unit']})"
    check(num(items[a]) == num(last["median"]), "summary abundance != abundance.csv median")
    check(num(items[a + " /lower 95 %"]) == num(last["lower_95"]), "summary abundance lower != abundance.csv")
    check(num(items[a + " /upper 95 %"]) == num(last["upper_95"]), "summary abundance upper != abundance.csv")

    change = column(output_tables.read_lists(os.path.join(base, "change.csv")))
    avg = {r["period"]: r for r in change if r["model"] == "average"}
    check(sorted(avg) == ["recent", "whole"], f"change.csv average rows: {sorted(avg)}")
    whole_label = recent_label = None
    if len(avg) == 2:
        w, rc = avg["whole"], avg["recent"]
        # The trend over every survey year and over the last 10 (the default of --recent-years).
        check(int(w["last_year"]) - int(w["first_year"]) + 1 == len(abundance), "whole period is not the survey")
        check(int(rc["last_year"]) == int(w["last_year"]) and int(rc["last_year"]) - int(rc["first_year"]) == 9,
              f"recent period {rc['first_year']}-{rc['last_year']}")
        whole_label = f"Trend over {w['first_year']}-{w['last_year']}"
        recent_label = f"Recent trend, {rc['first_year']}-{rc['last_year']}"
        for label, r in ((whole_label, w), (recent_label, rc)):
            check(num(items[label]) == num(r["median"]), f"summary {label} != change.csv median")
            check(num(items[label + " /lower 95 %"]) == num(r["lower_95"]), f"{label} lower")
            check(num(items[label + " /upper 95 %"]) == num(r["upper_95"]), f"{label} upper")
            chance = f"Chance of a downward trend over {r['first_year']}-{r['last_year']}"
            check(num(items[chance]) == num(r["p_decline"]), f"{chance} != change.csv p_decline")

    models = column(output_tables.read_lists(os.path.join(base, "models.csv")))
    fitted = [r for r in models if r["status"] == "fitted"]
    probs = {r["model"]: num(r["model_prob"]) for r in fitted}
    check(abs(sum(probs.values()) - 1) < 1e-12, f"posterior model probabilities sum to {sum(probs.values())}")
    by_growth = {}
    for r in fitted:
        by_growth[r["growth"]] = by_growth.get(r["growth"], 0.0) + num(r["model_prob"])
    best_growth = max(by_growth, key=by_growth.get)
    labels = {"exponential": "exponential growth", "ricker": "Ricker", "gompertz": "Gompertz",
              "theta-logistic": "theta-logistic"}
    check(items["Best-supported growth model"] == labels[best_growth],
          f"best growth model {items['Best-supported growth model']!r}, models.csv says {best_growth}")
    check(math.isclose(num(items["Best-supported growth model /its probability"]), by_growth[best_growth],
                       rel_tol=1e-12), "best growth model probability != sum over models.csv")
    check(num(items["Best-supported model /its probability"]) == max(probs.values()), "best model probability")

    # Thresholds are numbers with their kind: 20 % of the current abundance is 0.2 fraction_of_current;
    # years_ahead counts from the last survey year, year is the calendar year.
    risk = column(output_tables.read_lists(os.path.join(base, "risk.csv")))
    for r in risk:
        if int(r["year"]) != int(last["year"]) + int(r["years_ahead"]):
            check(False, f"risk.csv: year {r['year']} is not {last['year']} + years_ahead {r['years_ahead']}")
            break
    n_risk = 0
    for label, value in items.items():
        # "at any time within": the quasi-extinction risk, set apart from the declines below.
        m = re.fullmatch(r"Below (\d+(?:\.\d+)?) % of current at any time within (\d+) years", label)
        if not m:
            continue
        n_risk += 1
        rows = [r for r in risk if r["threshold_kind"] == "fraction_of_current"
                and math.isclose(float(r["threshold"]), float(m.group(1)) / 100) and r["years_ahead"] == m.group(2)]
        check(len(rows) == 1 and num(rows[0]["probability"]) == num(value),
              f"summary {label!r} = {value} does not match risk.csv")
    check(n_risk == 9, f"{n_risk} risk items on the first page, expected 3 thresholds x 3 windows")

    declines = column(output_tables.read_lists(os.path.join(base, "declines.csv")))
    n_dec = 0
    for label, value in items.items():
        # "in year N": a decline measured in one year.
        m = re.fullmatch(r"At least (\d+) % below current in year (\d+)", label)
        if not m:
            continue
        n_dec += 1
        rows = [r for r in declines if r["window_years"] == m.group(2)
                and math.isclose(float(r["decline"]), int(m.group(1)) / 100)]
        check(len(rows) == 1 and num(rows[0]["probability"]) == num(value),
              f"summary {label!r} does not match declines.csv")
    check(n_dec == 3, f"{n_dec} decline items, expected 3")

    # The one-row-per-population table repeats the first page.
    allp = column(output_tables.read_lists(os.path.join(base, "populations.csv")))
    check(len(allp) == 1, "populations.csv should have one row")
    ar = allp[0]
    check(ar["population"] == population and ar["status"] == "done",
          f"populations.csv row {ar['population']} {ar['status']}")
    check(num(ar["abundance"]) == num(items[a]), "populations abundance")
    check(num(ar["abundance_lower_95"]) == num(last["lower_95"]), "populations abundance_lower_95 != abundance.csv")
    check(num(ar["abundance_upper_95"]) == num(last["upper_95"]), "populations abundance_upper_95 != abundance.csv")
    if whole_label:
        check(num(ar["change"]) == num(items[whole_label]), "populations change")
        check(num(ar["recent_change"]) == num(items[recent_label]), "populations recent_change")
    check(ar["best_growth_model"] == best_growth, f"populations best_growth_model {ar['best_growth_model']}, "
                                                  f"models.csv says {best_growth}")
    k = [i for i in range(1, 10) if ar.get(f"threshold_{i}_kind") == "fraction_of_current"
         and math.isclose(num(ar[f"threshold_{i}"]), 0.2)]
    check(len(k) == 1, "populations.csv has no threshold 0.2 fraction_of_current")
    if k:
        check(num(ar[f"risk_{k[0]}_20y"]) ==
              num(items["Below 20 % of current at any time within 20 years"]),
              "populations risk")

    # Model averaging, recomputed from the raw draws: log of the last-year abundance, weighted by
    # P(model) / draws of the model, then the quantile, then exp (the order sheets use).
    draws = column(output_tables.read_lists(os.path.join(base, "draws.csv")))
    per_model = {}
    for r in draws:
        per_model.setdefault(r["model"], []).append(math.log(float(r["last_abundance"])))
    check(set(per_model) == set(probs), f"draws.csv models {sorted(per_model)}, models.csv fitted {sorted(probs)}")
    vals, wts = [], []
    for m, xs in per_model.items():
        vals += xs
        wts += [probs.get(m, 0.0) / len(xs)] * len(xs)
    for col, p in (("median", 0.5), ("lower_50", 0.25), ("upper_50", 0.75), ("lower_95", 0.025), ("upper_95", 0.975)):
        got = math.exp(weighted_quantile(vals, wts, p))
        want = num(last[col])
        check(math.isclose(got, want, rel_tol=1e-9), f"model-averaged {col} {want} != recomputed {got}")
    # The weighted quantile itself against numpy's Hazen quantile for equal weights.
    xs = per_model[max(probs, key=probs.get)]
    for p in (0.025, 0.25, 0.5, 0.75, 0.975):
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
    theirs = output_tables.read_lists(os.path.join(out, "models.csv"))
    ours = output_tables.read_lists(os.path.join(base, "models.csv"))
    check(theirs == ours, "analyze's models.csv differs from the compare command's models.csv")


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
        base = os.path.join(tmp, "results")   # -o: the results folder itself
        r = subprocess.run([T, "analyze", SURVEY, "-o", base, "--threads", "2"] + FAST,
                           capture_output=True, text=True, env=env)
        if r.returncode != 0:
            print(f"FAIL: analyze exited {r.returncode}: {r.stderr[:800]}")
            return 1
        xlsx = os.path.join(base, "heron-colony.xlsx")
        check(xlsx in r.stdout, "stdout does not say where the workbook is")
        wb = openpyxl.load_workbook(xlsx)
        contents = output_tables.read_lists(os.path.join(base, "contents.csv"))
        entries = [dict(zip(contents[0], row)) for row in contents[1:]]
        sheets = [e["sheet"] for e in entries if e["sheet"]]
        csv_only = [e["file"] for e in entries if not e["sheet"]]
        check(csv_only == ["draws.csv"], f"contents.csv lists {csv_only} as CSV only, want draws.csv")
        check(wb.sheetnames == SHEETS, f"sheets {wb.sheetnames} != {SHEETS}")
        check(sheets == wb.sheetnames, f"contents.csv lists {sheets}, the workbook has {wb.sheetnames}")
        # One population: every table directly in the folder, each listed; the lines about the
        # whole file (summary, populations) have no population.
        on_disk = sorted(f for f in os.listdir(base) if f.endswith(".csv") and f != "contents.csv")
        check(sorted(e["file"] for e in entries) == on_disk, f"contents.csv lists {[e['file'] for e in entries]}, "
                                                               f"the folder has {on_disk}")
        check(sorted(os.listdir(base)) == sorted(on_disk + ["contents.csv", "heron-colony.xlsx"]),
              f"unexpected entries in the results folder: {sorted(os.listdir(base))}")
        for e in entries:
            want = "" if e["file"] in ("summary.csv", "populations.csv") else "heron-colony"
            check(e["population"] == want,
                  f"contents.csv: {e['file']} has population {e['population']!r}, want {want!r}")
        tables, layout = {}, {}
        for e in entries:
            sheet, file = e["sheet"], e["file"]
            rows = output_tables.read_lists(os.path.join(base, file))
            if sheet:
                tables[sheet] = rows
            if sheet in wb.sheetnames:
                first = check_sheet(wb[sheet], rows, summary=(sheet == "Summary"))
                if first:
                    layout[sheet] = (rows, first)
                if sheet == "Diagnostics" and first:
                    check_warnings(wb[sheet], rows, first)
        check_no_text_numbers(wb)
        # The cautions come first on the first page, once: the first heading, then every caution,
        # before any population's figures.
        rows_s = tables["Summary"]
        heads = [i for i, r in enumerate(rows_s) if r[1] and not r[2] and not r[3]]
        check(heads and rows_s[heads[0]][1] == "Cautions", f"the first page's first heading is not Cautions")
        if heads:
            after = [r[1] for r in rows_s[heads[0] + 1:heads[0] + 4]]
            check(after == ["Caution 1", "Caution 2", "Caution 3"], f"the cautions do not come first: {after}")
            check("model-based" in rows_s[heads[0] + 1][2], "the first caution is not the model-based one")
        items = summary_items(tables["Summary"])
        with open(SURVEY, "rb") as f:
            digest = hashlib.sha256(f.read()).hexdigest()
        check(items.get("SHA-256 of the file") == digest, f"SHA-256 {items.get('SHA-256 of the file')} != {digest}")
        check(items.get("Run on") == "2023-11-14 22:13:20 UTC", f"date {items.get('Run on')!r}")
        check(items.get("Random seed") == "7", f"seed {items.get('Random seed')!r}")
        # The first page says where the draws went.
        where = items.get("Raw posterior draws", "")
        check(where.startswith("CSV only: draws.csv in the folder of this workbook"),
              f"first page on the draws: {where!r}")
        n_th = len({(r[2], r[3]) for r in tables["Risk"][1:]})
        check_charts(xlsx, wb.sheetnames, n_th, layout)
        # Every chart below its table and within a portrait page; every wrapped row tall enough.
        for ws in wb.worksheets:
            for msg in chart_problems(ws) + wrapped_row_problems(ws):
                check(False, msg)
        check_summary(base, items)
        check_compare_command(base, tmp)
        check_libreoffice(xlsx)
        print(f"analyze run and checks took {time.time() - t0:.1f} s")
    for f in failure_lines():
        print("FAIL:", f)
    print(f"analyze workbook: {len(failures)} problem(s)")
    return 1 if failures else 0


if __name__ == "__main__":
    sys.exit(main())
