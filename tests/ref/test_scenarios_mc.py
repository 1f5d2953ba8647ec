#!/usr/bin/python3
"""Management scenarios and the largest safe removal of `tallyfit forecast --parameter` against an
independent annual-step Monte Carlo written here with numpy.

The reference model, written out again from its definition (not from the program):
  each year, after the count, the net take comes off the animals present,
  N' = max(N - removed + added, 0), a population at 0 stays at 0 until animals are released;
  then the growth step on the log scale on what is left, x = ln N',
    Ricker (Ricker 1954): x_next = x + r (1 - e^x / K) + sigma eps,
    exponential (Dennis, Munholland & Scott 1991, eq. 1): x_next = x + r + sigma eps,
  eps ~ N(0, 1), and a share P removed each year multiplies N by (1 - P) before the growth.
Quasi-extinction by year t: N at or below the threshold in at least one whole year 0..t.

Checks, each with its tolerance from Monte Carlo error:
  1. removals and releases of a number of animals (Ricker): the risk curve at 10, 20 and 50 years
     within 4 combined binomial standard errors, sqrt(p1 (1 - p1) / n1 + p2 (1 - p2) / n2), of the
     reference; the program's median abundance at 10, 20 and 50 years leaves a share of the reference
     runs below it within 4 combined standard errors of 0.5, sqrt(0.25 / n1 + 0.25 / n2) (a
     distribution-free test of a sample median: its rank is binomial; common practice, no source).
     Each check fails by chance with probability 6e-5.
  2. the largest safe share (exponential model, share removed): the reference risk at the program's
     answer P* minus / plus 3 of its stated standard errors lies below / above the risk asked, each
     within 4 reference standard errors: the true answer lies within P* +- 3 se.
  3. the largest safe removal grows with the risk allowed and shrinks with the years (the same runs
     with common random numbers: the risk of every run rises with the removal).
"""
import math
import os
import subprocess
import sys
import tempfile

import numpy as np
import output_tables

RUNS = 20000          # the program's
REF_RUNS = 200000     # the reference's
HORIZONS = (10, 20, 50)


def ricker_reference(r, K, sigma, n0, take, threshold, years, seed):
    """Risk by year and abundance per year under a constant net take (animals; negative: released)."""
    rng = np.random.default_rng(seed)
    n = np.full(REF_RUNS, float(n0))
    hit = n <= threshold
    risk, abundance = {0: hit.mean()}, {0: n.copy()}
    for t in range(1, years + 1):
        left = np.maximum(n - take, 0.0)
        alive = left > 0
        x = np.log(np.where(alive, left, 1.0))
        x = x + r * (1 - np.exp(x) / K) + sigma * rng.standard_normal(REF_RUNS)
        n = np.where(alive, np.exp(x), 0.0)
        hit |= n <= threshold
        risk[t] = hit.mean()
        abundance[t] = n
    return risk, abundance


def exp_share_risk(r, sigma, n0, share, threshold, years, seed):
    """Risk within `years` with a share removed each year, exponential model."""
    rng = np.random.default_rng(seed)
    steps = r + math.log1p(-share) + sigma * rng.standard_normal((REF_RUNS, years))
    x = math.log(n0) + np.cumsum(steps, axis=1)
    return float((x.min(axis=1) <= math.log(threshold)).mean())


def run(binary, args, outdir):
    cmd = [binary, "forecast", *args, "--runs", str(RUNS), "-o", outdir, "--quiet"]
    subprocess.run(cmd, check=True, stdout=subprocess.DEVNULL)


def summary_item(outdir, item):
    for row in output_tables.read(os.path.join(outdir, "summary.csv")):
        if row["item"] == item:
            return float(row["value"])
    raise KeyError(item)


def main():
    binary = os.environ.get("TALLYFIT", "./tallyfit")
    failures = []

    def check(ok, what):
        print(("ok   " if ok else "FAIL ") + what)
        if not ok:
            failures.append(what)

    # 1. Removals and releases of animals, Ricker.
    r, K, sigma, n0, threshold = 0.3, 600.0, 0.2, 500.0, 150.0
    scenarios = (("hunt", "remove=40", 40.0), ("restock", "add=25", -25.0), ("heavy", "remove=70,add=10", 60.0))
    with tempfile.TemporaryDirectory() as tmp:
        run(binary, ["--model", "ricker", "--parameter", f"r={r},K={K},sigma={sigma}", "--start", str(n0), "--threshold", f"{threshold:g}",
                     "--years", str(max(HORIZONS)), "--seed", "5"]
            + [a for label, keys, _ in scenarios for a in ("--scenario", f"{label}:{keys}")], tmp)
        rows = output_tables.read(os.path.join(tmp, "scenarios.csv"))
    for i, (label, keys, take) in enumerate(scenarios):
        ref_risk, ref_n = ricker_reference(r, K, sigma, n0, take, threshold, max(HORIZONS), 100 + i)
        mine = {int(x["years_ahead"]): x for x in rows if x["scenario"] == label}
        for t in HORIZONS:
            p1, p2 = float(mine[t]["probability"]), ref_risk[t]
            se = math.sqrt(p1 * (1 - p1) / RUNS + p2 * (1 - p2) / REF_RUNS)
            check(abs(p1 - p2) <= 4 * se + 1e-12,
                  f"{label} ({keys}) t={t}: risk {p1:.4f} vs reference {p2:.4f} (4 se = {4 * se:.4f})")
            # The program holds an extinct run at e^-50 (anything below e^-40 is extinct, model.h):
            # that is the reference's 0. With ties at 0, the sample median m satisfies
            # share(< m) <= 0.5 <= share(<= m).
            med = float(mine[t]["median"])
            med = 0.0 if med < math.exp(-40) else med
            below, at_most = float((ref_n[t] < med).mean()), float((ref_n[t] <= med).mean())
            se_m = math.sqrt(0.25 / RUNS + 0.25 / REF_RUNS)
            check(below - 4 * se_m <= 0.5 <= at_most + 4 * se_m,
                  f"{label} t={t}: median {med:.4g}: {below:.4f} of the reference below it, {at_most:.4f} at most "
                  f"(4 se = {4 * se_m:.4f})")

    # 2. and 3. The largest safe share, exponential model.
    r, sigma, n0, threshold = 0.05, 0.1, 1000.0, 300.0
    answers = {}
    for risk, years in ((0.10, 20), (0.05, 20), (0.10, 40)):
        with tempfile.TemporaryDirectory() as tmp:
            run(binary, ["--parameter", f"r={r},sigma={sigma}", "--start", str(n0), "--threshold", f"{threshold:g}",
                         "--years", "50", "--seed", "9", "--safe-removal", f"{risk},{years},share"], tmp)
            answers[(risk, years)] = (summary_item(tmp, "safe_removal"), summary_item(tmp, "safe_removal_mcse"))
    p_star, se_star = answers[(0.10, 20)]
    check(0 < se_star < 0.2 * p_star, f"safe share {p_star:.4f} with a standard error {se_star:.2g}")
    lo = exp_share_risk(r, sigma, n0, max(p_star - 3 * se_star, 0.0), threshold, 20, 21)
    hi = exp_share_risk(r, sigma, n0, p_star + 3 * se_star, threshold, 20, 22)
    se_ref = math.sqrt(0.1 * 0.9 / REF_RUNS)
    check(lo <= 0.10 + 4 * se_ref, f"reference risk at P* - 3 se ({p_star - 3 * se_star:.4f}): {lo:.4f} <= 0.10")
    check(hi >= 0.10 - 4 * se_ref, f"reference risk at P* + 3 se ({p_star + 3 * se_star:.4f}): {hi:.4f} >= 0.10")
    check(answers[(0.05, 20)][0] < p_star, f"a smaller risk allowed, a smaller share: {answers[(0.05, 20)][0]:.4f} < {p_star:.4f}")
    check(answers[(0.10, 40)][0] < p_star, f"more years, a smaller share: {answers[(0.10, 40)][0]:.4f} < {p_star:.4f}")

    if failures:
        print(f"{len(failures)} check(s) failed", file=sys.stderr)
        return 1
    return 0


if __name__ == "__main__":
    sys.exit(main())
