#!/usr/bin/python3
"""Parameter recovery of `tallyfit fit` on surveys drawn by `tallyfit simulate`.

1. Coverage: for each growth model, surveys simulated at known parameters are fitted, and the
   95 % posterior intervals should contain the truth at about the nominal rate. With n intervals
   and independent fits the number covering is Binomial(n, 0.95) for a calibrated method (only
   approximately so for a fixed truth, and intervals of one fit are correlated); the check fails
   when it falls below the 0.1 % quantile of that binomial (scipy.stats.binom.ppf), a one-sided
   check because weakly identified parameters may be over-covered by their priors.
2. (TF_VALIDATE=1 only) Simulation-based calibration (Talts, Betancourt, Simpson, Vehtari &
   Gelman 2018, arXiv:1804.06788, Algorithm 1): parameters drawn from the prior, a survey
   simulated from them, a fit; the rank of the true value among L thinned posterior draws is
   uniform on 0..L for a correct sampler. The ranks of every parameter are pooled into B bins
   and compared with the uniform by a chi-square test (scipy.stats.chisquare), failing at
   p < 0.001.

Every fit runs by need (the default: the chains stop once R-hat <= 1.01 and bulk and tail ESS >=
400), so both checks also test that stopping on the draws' own diagnostics leaves the intervals
and the ranks calibrated (Jones, Haran, Caffo & Neath 2006, JASA 101:1537).
`make check` runs a small version (2 surveys per model, a shorter warm-up); `make validate` sets
TF_VALIDATE=1: 10 surveys per model with the default warm-up, then the calibration.
"""
import csv
import math
import os
import subprocess
import sys
import tempfile

import numpy as np
from scipy.stats import binom, chisquare

import output_tables

ROOT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "..")
TALLYFIT = os.environ.get("TALLYFIT", os.path.join(ROOT, "tallyfit"))
VALIDATE = bool(os.environ.get("TF_VALIDATE"))
PRIORS = os.path.join(ROOT, "tests", "data", "fit")
# The binary may live outside the tree: point it at the model files here.
os.environ.setdefault("TALLYFIT_MODELS", os.path.join(ROOT, "models"))

# Truths inside the bulk of the default priors; 30 years of Poisson counts in the hundreds.
CASES = [
    ("exponential", {"r": 0.03, "sigma": 0.1}, 150),
    ("ricker", {"r": 0.5, "K": 400.0, "sigma": 0.15}, 150),
    ("gompertz", {"r": 0.4, "K": 400.0, "sigma": 0.12}, 200),
    ("theta-logistic", {"r": 0.6, "K": 300.0, "theta": 1.5, "sigma": 0.12}, 100),
]


def growth_models():
    """The growth models of the program's table, from the hint of an unknown name (src/model/model.c),
    so that a model added to the table without a case in CASES fails here by name."""
    r = subprocess.run([TALLYFIT, "likelihood", os.devnull, "--model", ".", "--parameter", "r=1"],
                       capture_output=True, text=True)
    for line in r.stderr.splitlines():
        if line.startswith("  hint: known growth models: "):
            return line.split(": ", 2)[2].split(", ")
    raise SystemExit(f"test_fit_recovery: {TALLYFIT} gave no list of growth models: {r.stderr!r}")


def run(*args):
    return subprocess.run([TALLYFIT, *args], capture_output=True, text=True, check=True)


def priors_args(growth):
    path = os.path.join(PRIORS, growth + ".ini")
    return ["--prior-file", path] if os.path.exists(path) else []


def read_rows(path):
    with open(path, newline="") as f:
        return list(csv.DictReader(f))


def fit(survey, growth, out, extra):
    """Fits growth + Poisson; returns the rows of its parameters table (one population: the tables
    are in out itself)."""
    run("fit", survey, "--model", growth, "-o", out, "--quiet", *priors_args(growth), *extra)
    rows = output_tables.read(os.path.join(out, "parameters.csv"))
    model = growth + "+poisson"
    if not rows or any(r["model"] != model for r in rows):
        raise AssertionError(f"{out}/parameters.csv: models {sorted({r['model'] for r in rows})}, want {model}")
    return rows


def coverage(tmp):
    seeds = range(1, 11) if VALIDATE else range(1, 3)
    extra = [] if VALIDATE else ["--warmup", "3000"]
    n = covered = 0
    misses = []
    for growth, truth, start in CASES:
        for seed in seeds:
            survey = os.path.join(tmp, f"{growth}-{seed}.csv")
            sets = ",".join(f"{k}={v}" for k, v in truth.items())
            run("simulate", "--model", growth, "--parameter", sets, "--years", "30", "--start", str(start),
                "--seed", str(seed), "-o", survey)
            rows = fit(survey, growth, os.path.join(tmp, f"fit-{growth}-{seed}"), extra + ["--seed", str(seed)])
            if sorted(r["parameter"] for r in rows) != sorted(truth):
                raise AssertionError(f"{growth}: parameters {[r['parameter'] for r in rows]}, want {sorted(truth)}")
            for row in rows:
                # lower_95 / upper_95: the 2.5 % and 97.5 % posterior quantiles.
                lo, hi, true = float(row["lower_95"]), float(row["upper_95"]), truth[row["parameter"]]
                n += 1
                if lo <= true <= hi:
                    covered += 1
                else:
                    misses.append(f"{growth} seed {seed}: {row['parameter']}={true} outside [{lo:.4g}, {hi:.4g}]")
    floor = int(binom.ppf(0.001, n, 0.95))
    print(f"coverage: {covered} of {n} 95 % intervals hold the truth (fail below {floor})")
    for m in misses:
        print("  " + m)
    return covered >= floor


SBC_PRIORS = os.path.join(PRIORS, "sbc-exponential.ini")
SBC_X1_MEAN, SBC_X1_SD = math.log(200.0), 0.05


def prior_draw(rng):
    """One draw from the priors of tests/data/fit/sbc-exponential.ini, r ~ Normal(0, 0.5) and
    sigma ~ half-normal(0.5), and of the first-year prior x1 ~ Normal(log 200, 0.05) given to the fit."""
    return {"r": rng.normal(0.0, 0.5), "sigma": abs(rng.normal(0.0, 0.5)), "x1": rng.normal(SBC_X1_MEAN, SBC_X1_SD)}


def calibration(tmp):
    """SBC for exponential growth with Poisson counts. Each replicate draws (r, sigma, x1) from the
    prior, simulates 15 years from N1 = exp(x1), fits with the same priors, and ranks the truth among
    L = 99 draws thinned from the posterior. Surveys the importer refuses (fewer than 5 non-zero
    counts) or with counts beyond 1e5 are redrawn: the rank is uniform given each data set, so
    conditioning on an event of the data alone keeps it uniform. The particle count is fixed at
    200: PMMH is exact for any count (Andrieu, Doucet & Holenstein 2010, Theorem 4), and a fixed
    one keeps replicates with very precise counts from taking minutes each."""
    rng = np.random.default_rng(20260401)
    n_rep, n_rank, n_bins = 100, 99, 10
    ranks = {"r": [], "sigma": []}
    rep = 0
    while rep < n_rep:
        theta = prior_draw(rng)
        start = math.exp(theta["x1"])
        survey = os.path.join(tmp, f"sbc-{rep}.csv")
        sim = subprocess.run([TALLYFIT, "simulate", "--model", "exponential",
                              "--parameter", f"r={theta['r']},sigma={theta['sigma']}", "--years", "15",
                              "--start", str(start), "--seed", str(1000 + rep), "-o", survey],
                             capture_output=True, text=True)
        counts = []
        if sim.returncode == 0:
            counts = [float(r["count"]) for r in read_rows(survey)]
        if sim.returncode != 0 or max(counts) > 1e5 or sum(c > 0 for c in counts) < 5:
            os.remove(survey) if os.path.exists(survey) else None
            continue
        out = os.path.join(tmp, f"sbc-fit-{rep}")
        run("fit", survey, "--model", "exponential", "-o", out, "--quiet", "--seed", str(rep + 1),
            "--prior-file", SBC_PRIORS, "--prior", f"x1_mean={SBC_X1_MEAN},x1_sd={SBC_X1_SD}",
            "--particles", "200", "--warmup", "3000")
        rows = output_tables.read(os.path.join(out, "draws.csv"))
        assert all(d["model"] == "exponential+poisson" for d in rows), f"{out}/draws.csv holds other models"
        step = len(rows) // n_rank
        thinned = rows[step // 2::step][:n_rank]
        for p in ranks:
            ranks[p].append(sum(float(d[p]) < theta[p] for d in thinned))
        rep += 1
    ok = True
    for p, rk in ranks.items():
        hist = np.bincount(np.array(rk) * n_bins // (n_rank + 1), minlength=n_bins)
        stat, pval = chisquare(hist)
        print(f"calibration {p}: rank histogram {hist.tolist()}, chi-square p = {pval:.3g}")
        ok &= pval >= 0.001
    return ok


def main():
    missing = [g for g in growth_models() if g not in {case[0] for case in CASES}]
    if missing:
        print(f"test_fit_recovery: FAILED: no recovery case (CASES) for the growth models {missing}")
        return 1
    with tempfile.TemporaryDirectory() as tmp:
        ok = coverage(tmp)
        if VALIDATE:
            ok &= calibration(tmp)
    if not ok:
        print("test_fit_recovery: FAILED")
        return 1
    return 0


if __name__ == "__main__":
    sys.exit(main())
