#!/usr/bin/python3
"""The slope trends of the `change` table recomputed with numpy from the posterior latent paths.

`tallyfit fit --paths` writes paths.csv: the latent abundance of every year held with every kept
draw. For each draw this check takes the log of those abundances and fits a straight line on the
year with numpy's least squares (numpy.polyfit, degree 1: ordinary least squares, the same
estimator as Draper & Smith 1998, Applied Regression Analysis, eq. 1.2.9, which the program cites),
over every survey year (`period = whole`) and over the last RECENT years (`period = recent`). The
yearly change is exp(b) - 1; its median and 2.5 % / 97.5 % quantiles are numpy.quantile's default
('linear', Hyndman & Fan 1996, The American Statistician 50:361, definition 7, the definition of
GSL's gsl_stats_quantile_from_sorted_data that the program uses), and p_decline is the share of
draws with b < 0. All of them must equal the `change.csv` rows of the same fit to rounding.

Tolerance: both sides compute the same numbers from the same draws, so they differ only by
rounding. The CSV holds each abundance with the shortest decimal that reads back to the same
double (relative error <= 2^-53, about 1.1e-16), so each log-abundance carries an absolute error
of about 1e-16, and a slope over n >= 2 years at most sum|i - m| / sum (i - m)^2 times that, below
1e-15 here. TOL = 1e-9 is far above that and far below any real difference (a changed draw, year
or quantile rule moves the figures by 1e-4 or more). A draw whose slope lies within TOL of zero
could fall on either side, so p_decline may differ by the share of such draws (none expected).

The survey is the invented squirrel transect of surveys/ (with effort), fitted with the Ricker
model for a short fixed seed: the check is about arithmetic, not convergence. Its trends are near
zero, so p_decline lies strictly between 0 and 1 for both periods (asserted below), which makes
the share a real check rather than a count of all or none.
"""
import csv
import math
import os
import subprocess
import sys
import tempfile

import numpy as np

import output_tables

SURVEY = "surveys/squirrel-transect.csv"
RECENT = 8
TOL = 1e-9
SAMPLER = ["--model", "ricker", "--iterations", "600", "--warmup", "200", "--chains", "2", "--threads", "2",
           "--particles", "150", "--seed", "11", "--recent-years", str(RECENT), "-q"]


def read_paths(path):
    """Per (model, chain, draw): the years and abundances in file order (the header checked
    against docs/tables.md by output_tables)."""
    paths = {}
    for row in output_tables.read(path):
        key = (row["model"], int(row["chain"]), int(row["draw"]))
        paths.setdefault(key, []).append((int(row["year"]), float(row["abundance"])))
    return paths


def summarise(slopes):
    change = np.expm1(slopes)
    return {"median": float(np.quantile(change, 0.5)), "lower_95": float(np.quantile(change, 0.025)),
            "upper_95": float(np.quantile(change, 0.975)), "p_decline": float(np.mean(slopes < 0)),
            "near_zero": float(np.mean(np.abs(slopes) < TOL))}


def main():
    tallyfit = os.environ.get("TALLYFIT", "./tallyfit")
    failures = 0
    with tempfile.TemporaryDirectory() as tmp:
        plain = os.path.join(tmp, "plain")
        r = subprocess.run([tallyfit, "fit", SURVEY, "-o", plain, *SAMPLER], capture_output=True, text=True)
        if r.returncode != 0:
            print(f"FAIL: fit exit {r.returncode}: {r.stderr[:400]}")
            return 1
        if os.path.exists(os.path.join(plain, "paths.csv")):
            print("FAIL: paths.csv written without --paths")
            failures += 1
        out = os.path.join(tmp, "out")
        r = subprocess.run([tallyfit, "fit", SURVEY, "-o", out, "--paths", *SAMPLER], capture_output=True, text=True)
        if r.returncode != 0:
            print(f"FAIL: fit --paths exit {r.returncode}: {r.stderr[:400]}")
            return 1
        # --paths adds a file and changes none of the others (same seed, same draws).
        for name in ("change.csv", "abundance.csv", "draws.csv"):
            with open(os.path.join(plain, name)) as a, open(os.path.join(out, name)) as b:
                if a.read() != b.read():
                    print(f"FAIL: {name} differs with --paths")
                    failures += 1
        paths = read_paths(os.path.join(out, "paths.csv"))
        change = {row["period"]: row for row in output_tables.read(os.path.join(out, "change.csv"))}
        with open(os.path.join(out, "draws.csv"), newline="") as f:
            n_draws = sum(1 for _ in csv.DictReader(f))

    if len(paths) != n_draws:
        print(f"FAIL: paths.csv holds {len(paths)} draws, draws.csv {n_draws}")
        failures += 1
    years = np.array([y for y, _ in next(iter(paths.values()))], dtype=float)
    logs = np.log(np.array([[a for _, a in p] for p in paths.values()]))
    if any([y for y, _ in p] != list(years) for p in paths.values()):
        print("FAIL: the draws of paths.csv do not all hold the same years")
        return 1
    periods = {"whole": slice(0, len(years)), "recent": slice(len(years) - RECENT, len(years))}
    for period, sl in periods.items():
        y = years[sl]
        # numpy.polyfit fits every path (one column each) at once; [0] is the slope.
        slopes = np.polyfit(y - y[0], logs[:, sl].T, 1)[0]
        ours = summarise(slopes)
        row = change[period]
        if (int(row["first_year"]), int(row["last_year"])) != (int(y[0]), int(y[-1])):
            print(f"FAIL: {period}: change.csv years {row['first_year']}-{row['last_year']}, "
                  f"paths {int(y[0])}-{int(y[-1])}")
            failures += 1
        if not 0 < ours["p_decline"] < 1:
            print(f"FAIL: {period}: p_decline {ours['p_decline']} is all or none; choose a flatter survey")
            failures += 1
        for col in ("median", "lower_95", "upper_95"):
            theirs = float(row[col])
            ok = math.isclose(theirs, ours[col], rel_tol=0, abs_tol=TOL)
            print(f"{period:6s} {col:9s} numpy {ours[col]: .12f}  tallyfit {theirs: .12f}  {'ok' if ok else 'FAIL'}")
            failures += not ok
        theirs = float(row["p_decline"])
        ok = abs(theirs - ours["p_decline"]) <= ours["near_zero"] + 1e-12
        print(f"{period:6s} p_decline numpy {ours['p_decline']:.6f}  tallyfit {theirs:.6f}  {'ok' if ok else 'FAIL'}")
        failures += not ok
    print(f"slope trend against numpy.polyfit on {len(paths)} posterior paths:",
          "ok" if not failures else f"{failures} problem(s)")
    return 1 if failures else 0


if __name__ == "__main__":
    sys.exit(main())
