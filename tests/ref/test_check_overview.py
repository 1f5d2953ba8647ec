#!/usr/bin/python3
"""Reference check of `tallyfit check`'s overview: each population's span, surveyed and missing
years, min/median/max, zero counts, effort and crude trend, recomputed independently with Python's
csv module, numpy.median and numpy.polyfit (ordinary least squares, degree 1) on the demo surveys
and on the good test files with gaps, effort and several populations."""
import csv
import math
import os
import re
import subprocess
import sys

import numpy as np

ROOT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "..")
TALLYFIT = os.environ.get("TALLYFIT", os.path.join(ROOT, "tallyfit"))
FILES = ["surveys/heron-colony.csv", "surveys/squirrel-transect.csv", "surveys/three-herds.csv",
         "tests/data/good/comments-gaps.csv", "tests/data/good/semicolon-multi.csv",
         "tests/data/good/multi-pop.csv", "tests/data/good/fractional.csv",
         "tests/data/good/leading-trailing-na.csv", "tests/data/good/semicolon-effort.csv"]


def expected(path):
    """{label: facts} in order of first appearance, by the file format's own rules."""
    with open(os.path.join(ROOT, path), encoding="utf-8-sig", newline="") as f:
        lines = [l for l in f if not l.lstrip().startswith("#") and l.strip()]
    delim = ";" if lines[0].count(";") > lines[0].count(",") else ","
    rows = list(csv.reader(lines, delimiter=delim))
    head = [h.strip().lower() for h in rows[0]]
    col = {name: head.index(name) for name in ("year", "count", "population", "effort") if name in head}
    pops = {}
    for r in rows[1:]:
        if not any(v.strip() for v in r):
            continue
        label = r[col["population"]].strip() if "population" in col else ""
        cs = r[col["count"]].strip()
        c = math.nan if cs.upper() in ("", "NA") else float(cs)
        e = float(r[col["effort"]]) if "effort" in col and not math.isnan(c) else 1.0
        pops.setdefault(label, {})[int(r[col["year"]])] = (c, e)
    out = {}
    for label, by_year in pops.items():
        y0, y1 = min(by_year), max(by_year)
        years = [y for y in range(y0, y1 + 1) if y in by_year and not math.isnan(by_year[y][0])]
        c = np.array([by_year[y][0] for y in years])
        e = np.array([by_year[y][1] for y in years])
        slope = np.polyfit(np.array(years, float), np.log(c / e + 0.5), 1)[0]
        out[label] = dict(span=(y0, y1), n_surveyed=len(years),
                          missing=[y for y in range(y0, y1 + 1) if y not in years],
                          min=c.min(), median=float(np.median(c)), max=c.max(), n_zero=int((c == 0).sum()),
                          effort=(e.min(), e.max()), trend=100 * (math.exp(slope) - 1))
    return out


def missing_years(text):
    if text == "none":
        return []
    years = []
    for part in text.split(", "):
        a, _, b = part.partition("-")
        years += list(range(int(a), int(b or a) + 1))
    return years


def printed(path):
    # Counts that are not whole numbers are read only when declared as estimates.
    extra = ["--estimates"] if "fractional" in path else []
    res = subprocess.run([TALLYFIT, "check", path] + extra, cwd=ROOT, capture_output=True, text=True)
    if res.returncode != 0:
        raise AssertionError(f"{path}: exit {res.returncode}: {res.stderr}")
    out = {}
    for block in res.stdout.split("\n\n")[1:]:
        lines = block.strip("\n").split("\n")
        label = "" if lines[0] == "(unnamed population)" else lines[0]
        body = "\n".join(lines[1:])
        m = re.search(r"years: +(\d+)-(\d+) \((\d+) years\)", body)
        s = re.search(r"surveyed: +(\d+) of (\d+) years; missing: (.*)", body)
        c = re.search(r"counts: +min (\S+), median (\S+), max (\S+); zero counts: (\d+)", body)
        e = re.search(r"effort: +(?:the same every year \((\S+)\)|varies from (\S+) to (\S+))", body)
        t = re.search(r"crude trend: +([-+]\d+\.\d)% per year \(crude screening figure, not a model estimate\)",
                      body)
        if not all((m, s, c, e, t)):
            raise AssertionError(f"{path}: cannot read the block for '{label}':\n{block}")
        out[label] = dict(span=(int(m[1]), int(m[2])), n_surveyed=int(s[1]), missing=missing_years(s[3]),
                          min=float(c[1]), median=float(c[2]), max=float(c[3]), n_zero=int(c[4]),
                          effort=(float(e[1]), float(e[1])) if e[1] else (float(e[2]), float(e[3])),
                          trend=float(t[1]))
    return out


def main():
    failures = 0
    for path in FILES:
        want, got = expected(path), printed(path)
        if list(want) != list(got):
            print(f"FAIL {path}: populations {list(got)}, want {list(want)}")
            failures += 1
            continue
        for label in want:
            w, g = want[label], got[label]
            for key in ("span", "n_surveyed", "missing", "n_zero"):
                if w[key] != g[key]:
                    print(f"FAIL {path} '{label}' {key}: {g[key]}, want {w[key]}")
                    failures += 1
            # Printed with %.10g (counts) and %.6g (effort): relative rounding at most 5e-7.
            for key in ("min", "median", "max"):
                if abs(w[key] - g[key]) > 5e-10 * max(1.0, abs(w[key])):
                    print(f"FAIL {path} '{label}' {key}: {g[key]}, want {w[key]}")
                    failures += 1
            for a, b in zip(w["effort"], g["effort"]):
                if abs(a - b) > 5e-6 * abs(a):
                    print(f"FAIL {path} '{label}' effort: {g['effort']}, want {w['effort']}")
                    failures += 1
            # Printed with one decimal: rounding error at most 0.05 points (+ float slack).
            if abs(w["trend"] - g["trend"]) > 0.05 + 1e-9:
                print(f"FAIL {path} '{label}' trend: {g['trend']}, want {w['trend']:.4f}")
                failures += 1
    print(f"test_check_overview: {len(FILES)} files, {failures} failure(s)")
    return 1 if failures else 0


if __name__ == "__main__":
    sys.exit(main())
