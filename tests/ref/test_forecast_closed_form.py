#!/usr/bin/python3
"""Quasi-extinction risk of `tallyfit forecast --parameter` against closed-form and numerical references.

Model: density-independent growth on the log scale, x_{t+1} = x_t + mu + sigma eps_t, from N0, with
the threshold Ne at distance d = ln(N0 / Ne) > 0 below the start.

References, each named beside its check:
  [DMS] Dennis, Munholland & Scott 1991, Ecological Monographs 61:115-143, the inverse-Gaussian
        first-passage probability of the diffusion approximation (their G(t); also Morris & Doak
        2002, Quantitative Conservation Biology, ch. 3):
          G(t) = Phi((-d - mu t) / (sigma sqrt t)) + exp(-2 mu d / sigma^2) Phi((-d + mu t) / (sigma sqrt t)),
        computed with scipy.stats.norm.cdf.
  [BGK] Broadie, Glasserman & Kou 1997, Mathematical Finance 7:325-349, Theorem 1: a Brownian motion
        watched only at steps of length dt crosses a barrier about as often as a continuously watched one
        crosses the barrier moved beta sigma sqrt(dt) further away, beta = -zeta(1/2) / sqrt(2 pi) = 0.5826
        (zeta from scipy.special).
  [GRID] The exact probability for the discrete-time model, by numerical integration of the
        Chapman-Kolmogorov recursion on a fine grid: f_{t+1}(y) = int_{y' > -d} f_t(y') phi((y - y' - mu) / sigma) / sigma dy'
        (scipy.stats.norm.pdf, scipy.signal.fftconvolve); P(T <= t) = 1 - int f_t.

The simulation checks the threshold at whole years only, so it misses crossings between years and
lies below the continuous [DMS] curve, most at short horizons (up to about 0.07 here). Therefore:
  1. simulation vs [GRID] (same discrete model): |diff| <= 4 se + GRID_TOL;
  2. simulation vs [DMS]: G - 1.25 A - 4 se <= p <= G + 4 se, where the discretisation allowance
     A = G(t; d) - G(t; d + beta sigma) is the size of the [BGK] correction (25 % slack for the
     correction's asymptotic remainder, which check 3 bounds);
  3. the allowance is the right size: |G(t; d + beta sigma) - [GRID]| <= 0.25 A + GRID_TOL.
se = sqrt(p (1 - p) / runs) is the binomial Monte Carlo error; with 4 se, each single check fails
by chance with probability 6e-5.

The abundance bands of projection.csv have a closed form for this model: ln N_t ~ Normal(ln N0 + mu t,
sigma^2 t) (the walk's increments are independent normals), so the p-quantile of N_t is
N0 exp(mu t + sigma sqrt(t) z_p) with z_p = scipy.stats.norm.ppf(p): 1.959964 for the 95 % band
(2.5 % and 97.5 %), 0.674490 for the 50 % band (25 % and 75 %), 0 for the median.
  4. each of median, lower_50, upper_50, lower_95, upper_95 at the horizons, on the log scale,
     within 4 se of the closed form, se = sigma sqrt(t) sqrt(p (1 - p) / runs) / phi(z_p): the
     asymptotic standard error of a sample quantile, sqrt(p (1 - p) / n) / f(q_p) (Serfling 1980,
     Approximation Theorems of Mathematical Statistics, section 2.3.3, recalled from memory). The
     interpolation between order statistics moves a quantile by about one spacing,
     1 / (runs f(q_p)), under 1 % of that se at 20000 runs, so no allowance is added for it.
     Power: a 5 %/95 % band (z = 1.644854) in place of the 2.5 %/97.5 % one would sit
     (1.959964 - 1.644854) / 0.0189 = 16.7 se away (0.0189 = sqrt(0.025 * 0.975 / 20000) / phi(1.959964)).
"""
import math
import os
import subprocess
import sys
import tempfile

import numpy as np
import output_tables
from scipy.signal import fftconvolve
from scipy.special import zeta
from scipy.stats import norm

RUNS = 20000
HORIZONS = (10, 20, 50)
# Grid step sigma/100: halving it to sigma/200 changes [GRID] by less than 1e-6 in both scenarios
# (measured when writing this test), so 1e-3 is a wide margin for quadrature error.
GRID_TOL = 1e-3
BETA = -zeta(0.5) / math.sqrt(2 * math.pi)  # [BGK]

# (label, mu, sigma, N0, Ne, seed): a declining and an increasing population.
SCENARIOS = (
    ("declining", -0.05, 0.25, 300.0, 100.0, 11),
    ("increasing", 0.03, 0.30, 150.0, 50.0, 12),
)


def dms_g(t, mu, sigma, d):
    """[DMS] G(t)."""
    st = sigma * math.sqrt(t)
    return norm.cdf((-d - mu * t) / st) + math.exp(-2 * mu * d / sigma**2) * norm.cdf((-d + mu * t) / st)


def grid_first_passage(horizons, mu, sigma, d, h):
    """[GRID] P(T <= t) for the discrete-time walk, y = x - x0 on cell centres above -d."""
    t_max = max(horizons)
    top = max(0.0, mu * t_max) + 9 * sigma * math.sqrt(t_max) + 1
    y = np.arange(-d + h / 2, top, h)
    n = len(y)
    f = norm.pdf(y, mu, sigma)  # density after the first year, from the point mass at 0
    kernel = norm.pdf(np.arange(-n + 1, n) * h, mu, sigma) * h
    out = {}
    for t in range(1, t_max + 1):
        if t in horizons:
            out[t] = 1.0 - f.sum() * h
        if t < t_max:
            f = fftconvolve(f, kernel)[n - 1 : 2 * n - 1]
    return out


def simulate(binary, mu, sigma, n0, ne, seed, outdir):
    cmd = [binary, "forecast", "--parameter", f"r={mu},sigma={sigma}", "--start", repr(n0), "--threshold", f"{ne:g}",
           "--runs", str(RUNS), "--years", str(max(HORIZONS)), "--seed", str(seed), "-o", outdir, "--quiet"]
    subprocess.run(cmd, check=True, stdout=subprocess.DEVNULL)
    # risk.csv: years_ahead counts from the start (year is blank without a survey); a threshold
    # in animals is the number itself, with threshold_kind "animals".
    rows = output_tables.read(os.path.join(outdir, "risk.csv"))
    risk = {int(r["years_ahead"]): (float(r["probability"]), float(r["probability_mcse"])) for r in rows
            if r["threshold_kind"] == "animals" and float(r["threshold"]) == ne}
    bands = {int(r["years_ahead"]): r for r in output_tables.read(os.path.join(outdir, "projection.csv"))}
    return risk, bands


def main():
    binary = os.environ.get("TALLYFIT", "./tallyfit")
    failures = []

    def check(ok, what):
        print(("ok   " if ok else "FAIL ") + what)
        if not ok:
            failures.append(what)

    for label, mu, sigma, n0, ne, seed in SCENARIOS:
        d = math.log(n0 / ne)
        exact = grid_first_passage(HORIZONS, mu, sigma, d, sigma / 100)
        with tempfile.TemporaryDirectory() as tmp:
            sim, bands = simulate(binary, mu, sigma, n0, ne, seed, tmp)
        check(sorted(sim) == list(range(max(HORIZONS) + 1)) and sorted(bands) == list(range(max(HORIZONS) + 1)),
              f"{label}: risk.csv and projection.csv have years_ahead 0..{max(HORIZONS)}")
        for t in HORIZONS:
            p, se_file = sim[t]
            se = math.sqrt(p * (1 - p) / RUNS)
            g = dms_g(t, mu, sigma, d)
            g_shift = dms_g(t, mu, sigma, d + BETA * sigma)
            allowance = g - g_shift
            tag = f"{label} mu={mu} sigma={sigma} N0={n0:g} Ne={ne:g} t={t}: sim {p:.4f} (se {se:.4f})"
            # The table's probability_mcse column is the binomial formula; the CSV holds exact
            # doubles, so only the rounding of the few operations in the formula separates the two.
            check(abs(se_file - se) <= 1e-12 * se, f"{tag}, probability_mcse {se_file:.4g} = sqrt(p(1-p)/n)")
            # 1. Same discrete-time model: [GRID].
            check(abs(p - exact[t]) <= 4 * se + GRID_TOL, f"{tag} vs discrete-time exact [GRID] {exact[t]:.4f}")
            # 2. The diffusion formula [DMS], with the discretisation allowance of [BGK].
            check(g - 1.25 * allowance - 4 * se <= p <= g + 4 * se,
                  f"{tag} vs diffusion G(t) [DMS] {g:.4f}, allowance {allowance:.4f} [BGK]")
            # 3. The allowance accounts for the gap between [DMS] and the discrete model.
            check(abs(g_shift - exact[t]) <= 0.25 * allowance + GRID_TOL,
                  f"{label} t={t}: shifted G [BGK] {g_shift:.4f} vs [GRID] {exact[t]:.4f}")
        # Year 0 is the start itself, every quantile N0 (up to the rounding of exp(ln N0)).
        check(all(math.isclose(float(bands[0][c]), n0, rel_tol=1e-12)
                  for c in ("median", "lower_50", "upper_50", "lower_95", "upper_95")),
              f"{label}: the bands at years_ahead 0 are the start {n0:g}")
        # 4. The bands against the log-normal law of N_t; z_p from scipy (1.959964 for 97.5 %).
        for t in HORIZONS:
            for col, q in (("median", 0.5), ("lower_50", 0.25), ("upper_50", 0.75),
                           ("lower_95", 0.025), ("upper_95", 0.975)):
                z = norm.ppf(q)
                want = math.log(n0) + mu * t + sigma * math.sqrt(t) * z
                se = sigma * math.sqrt(t) * math.sqrt(q * (1 - q) / RUNS) / norm.pdf(z)
                got = math.log(float(bands[t][col]))
                check(abs(got - want) <= 4 * se,
                      f"{label} t={t}: {col} {math.exp(got):.4g} vs closed form N0 exp(mu t + {z:+.6f} sigma sqrt t) "
                      f"= {math.exp(want):.4g} (log scale {(got - want) / se:+.2f} se)")
        # A population that grows (mu > 0) is not certain to cross: G(inf) = exp(-2 mu d / sigma^2) [DMS].
        if mu > 0:
            check(sim[max(HORIZONS)][0] < math.exp(-2 * mu * d / sigma**2),
                  f"{label}: risk by year {max(HORIZONS)} below the ultimate probability [DMS]")

    if failures:
        print(f"{len(failures)} check(s) failed", file=sys.stderr)
        return 1
    return 0


if __name__ == "__main__":
    sys.exit(main())
