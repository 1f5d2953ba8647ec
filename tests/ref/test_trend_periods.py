#!/usr/bin/python3
"""The whole-survey and recent trends of `tallyfit fit` on a population that fell and then held.

Simulated surveys (numpy.random.Generator, seeds 1..N): the true abundance falls by 10 % a year for
five years, from 4000, and then stays level for 30 years; the counts are Poisson around it. Each
is fitted with the density-independent model (`tallyfit fit --model exponential --obs poisson`)
and its `change.csv` read:

- The recent trend (the last 10 years, all level) has a true value of exactly 0: its 95 % interval
  should cover 0 about 95 % of the time. With N surveys the number covering is Binomial(N, 0.95) if
  the intervals are calibrated; the check asks for at least MIN_COVER of N, which a calibrated
  interval misses with probability P(X < MIN_COVER) (computed below with scipy.stats.binom; about
  0.002 for N = 12, MIN_COVER = 9). Interval coverage under a correct model is the usual
  frequentist reading of a Bayesian interval (common practice, no source).
- The whole-survey trend (the least-squares slope over every year) lies between the endpoint
  ratio exp((ln N_last - ln N_first) / (years - 1)) - 1 of the true curve and zero: a slope through
  every year weighs the 30 level years, the endpoint ratio spreads the early fall over the whole
  period. Least squares on the true log-curve (numpy.polyfit) gives the value the posterior median
  should be near; the check asks the mean of the posterior medians over the surveys to lie between
  the endpoint ratio and zero, and within 4 standard errors (the spread over the surveys / sqrt(N))
  of the true curve's least-squares slope.
"""
import csv
import math
import os
import subprocess
import sys
import tempfile

import numpy as np
from scipy.stats import binom

import output_tables

N = 12
MIN_COVER = 9
YEARS = 35
START = 4000.0
SAMPLER = ["--model", "exponential", "--obs", "poisson", "--iterations", "1500", "--warmup", "400", "--chains", "2",
           "--threads", "2", "--seed", "3", "-q"]


def true_log_curve():
    t = np.arange(YEARS)
    return np.log(START) + np.log(0.9) * np.minimum(t, 5)


def main():
    tallyfit = os.environ.get("TALLYFIT", "./tallyfit")
    x = true_log_curve()
    endpoint = math.expm1((x[-1] - x[0]) / (YEARS - 1))
    ls = math.expm1(np.polyfit(np.arange(YEARS), x, 1)[0])
    assert endpoint < ls < 0, (endpoint, ls)
    miss = binom.cdf(MIN_COVER - 1, N, 0.95)
    failures = 0
    covered, medians = 0, []
    with tempfile.TemporaryDirectory() as tmp:
        for seed in range(1, N + 1):
            rng = np.random.default_rng(seed)
            counts = rng.poisson(np.exp(x))
            path = os.path.join(tmp, f"s{seed}.csv")
            with open(path, "w", newline="") as f:
                w = csv.writer(f, lineterminator="\n")
                w.writerow(["year", "count"])
                w.writerows((1990 + t, int(c)) for t, c in enumerate(counts))
            out = os.path.join(tmp, f"o{seed}")
            r = subprocess.run([tallyfit, "fit", path, "-o", out, *SAMPLER], capture_output=True, text=True)
            if r.returncode != 0:
                print(f"FAIL: fit of survey {seed}: exit {r.returncode}: {r.stderr[:300]}")
                return 1
            rows = output_tables.read(os.path.join(out, "change.csv"))
            by = {row["period"]: row for row in rows}
            whole, recent = by["whole"], by["recent"]
            if not (int(recent["first_year"]) == 1990 + YEARS - 10 and int(whole["first_year"]) == 1990):
                print(f"FAIL: survey {seed}: periods {whole['first_year']}, {recent['first_year']}")
                failures += 1
            covered += float(recent["lower_95"]) <= 0 <= float(recent["upper_95"])
            medians.append(float(whole["median"]))
    mean = float(np.mean(medians))
    se = float(np.std(medians, ddof=1)) / math.sqrt(N)
    print(f"recent trend: {covered} of {N} intervals cover 0 (want >= {MIN_COVER}; a calibrated interval "
          f"misses this with probability {miss:.4f})")
    print(f"whole trend: mean posterior median {mean:.5f} (se {se:.5f}); endpoint ratio {endpoint:.5f}, "
          f"least squares on the true curve {ls:.5f}")
    if covered < MIN_COVER:
        print("FAIL: the recent trend's interval covers the true value 0 too rarely")
        failures += 1
    if not (endpoint < mean < 0):
        print("FAIL: the whole-survey trend is not between the endpoint ratio and zero")
        failures += 1
    if abs(mean - ls) > 4 * se:
        print("FAIL: the whole-survey trend is not near the least-squares slope of the true curve")
        failures += 1
    print("trend periods:", "ok" if not failures else f"{failures} problem(s)")
    return 1 if failures else 0


if __name__ == "__main__":
    sys.exit(main())
