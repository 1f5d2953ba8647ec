#!/usr/bin/python3
"""Independent reference for the convergence diagnostics (src/sampler/diagnostics.c).

Written straight from Vehtari, Gelman, Simpson, Carpenter & Buerkner (2021), "Rank-normalization,
folding, and localization: an improved R-hat for assessing convergence of MCMC", Bayesian
Analysis 16(2):667-718, with numpy and scipy only: autocovariances by direct sums (the C code
uses an FFT), ranks by scipy.stats.rankdata, beta quantiles by scipy.stats.beta.ppf.

Without arguments: recomputes every statistic for the saved draws in tests/data/diagnostics/
and fails unless it matches tests/data/diagnostics/expected.csv, the file the C unit test
(tests/unit/test_diagnostics.c) compares its own results with. With --write: draws new data
sets (fixed seed) and rewrites both.
"""
import os
import sys

import numpy as np
from scipy import stats

HERE = os.path.dirname(os.path.abspath(__file__))
DATA = os.path.join(HERE, "..", "data", "diagnostics")
STATS = ["mean", "sd", "q05", "q50", "q95", "rhat", "rhat_bulk", "rhat_folded", "ess_bulk",
         "ess_tail", "ess_mean", "mcse_mean", "mcse_q05", "mcse_q50", "mcse_q95"]
# Agreement between this file and expected.csv, both from this code: only the decimal
# round trip of repr() separates them.
SELF_TOL = 1e-12


def split_chains(x):
    """Halves of each chain; with an odd length the middle draw belongs to neither."""
    n = x.shape[1] // 2
    return np.concatenate([x[:, :n], x[:, x.shape[1] - n:]], axis=0)


def rank_normalise(x):
    """z = Phi^-1((r - 3/8) / (S + 1/4)), r the average rank among all S values."""
    r = stats.rankdata(x.ravel(), method="average").reshape(x.shape)
    return stats.norm.ppf((r - 0.375) / (x.size + 0.25))


def rhat(x):
    """Split-R-hat of already split chains x [m, N]: sqrt(var+ / W)."""
    m, n = x.shape
    w = x.var(axis=1, ddof=1).mean()
    b_over_n = x.mean(axis=1).var(ddof=1)
    var_plus = (n - 1) / n * w + b_over_n
    return np.sqrt(var_plus / w)


def ess(x):
    """ESS of split chains x [m, N]: combined autocorrelations
    rho_t = 1 - (W - mean_m s_m^2 rho_tm) / var+, Geyer's initial monotone sequence of the
    pair sums, tau = -1 + 2 sum P_k, ESS = m N / tau, bounded by S log10 S."""
    m, n = x.shape
    w = x.var(axis=1, ddof=1).mean()
    var_plus = (n - 1) / n * w + x.mean(axis=1).var(ddof=1)
    if not var_plus > 0:
        return float("nan")
    acov = np.zeros(n)  # mean over chains of s_m^2 rho_tm
    for c in x:
        d = c - c.mean()
        gamma = np.array([np.dot(d[: n - t], d[t:]) for t in range(n)]) / n
        # s_m^2 rho_tm with s_m^2 = gamma_0 n / (n - 1) and rho_tm = gamma_t / gamma_0, written
        # without the division so that a constant chain (an indicator that never changes in
        # one half-chain) contributes 0 rather than 0 / 0.
        acov += gamma * n / (n - 1) / m
    rho = 1 - (w - acov) / var_plus
    tau, prev = -1.0, np.inf
    k = 0
    while 2 * k + 1 < n:
        p = rho[2 * k] + rho[2 * k + 1]
        if not p > 0:
            break
        p = min(p, prev)
        tau += 2 * p
        prev = p
        k += 1
    s = m * n
    cap = s * np.log10(s)
    return min(s / tau, cap) if tau > 0 else cap


def quantile(x, p):
    return float(np.quantile(x, p))  # numpy's default: linear between order statistics


def mcse_quantile(all_draws, split, p):
    q = quantile(all_draws, p)
    e = ess((split <= q).astype(float))
    a, b = e * p + 1, e * (1 - p) + 1
    lo, hi = stats.beta.ppf([stats.norm.cdf(-1), stats.norm.cdf(1)], a, b)
    return 0.5 * (quantile(all_draws, hi) - quantile(all_draws, lo)), e


def summarise(x):
    flat = x.ravel()
    sp = split_chains(x)
    out = {"mean": flat.mean(), "sd": flat.std(ddof=1),
           "q05": quantile(flat, 0.05), "q50": quantile(flat, 0.5), "q95": quantile(flat, 0.95)}
    z = rank_normalise(sp)
    out["rhat_bulk"] = rhat(z)
    out["ess_bulk"] = ess(z)
    folded = rank_normalise(np.abs(sp - np.median(sp)))
    out["rhat_folded"] = rhat(folded)
    out["rhat"] = max(out["rhat_bulk"], out["rhat_folded"])
    out["ess_mean"] = ess(sp)
    out["mcse_mean"] = out["sd"] / np.sqrt(out["ess_mean"])
    out["mcse_q05"], e05 = mcse_quantile(flat, sp, 0.05)
    out["mcse_q50"], _ = mcse_quantile(flat, sp, 0.5)
    out["mcse_q95"], e95 = mcse_quantile(flat, sp, 0.95)
    out["ess_tail"] = min(e05, e95)
    return out


def make_sets():
    """Invented draws that exercise the cases: autocorrelated chains of odd length, a chain
    stuck elsewhere, a chain with a wider heavy tail, and integer draws with many ties."""
    rng = np.random.default_rng(20260314)
    sets = {}
    ar = np.empty((4, 301))
    for c in range(4):
        v = rng.normal() / np.sqrt(1 - 0.36)
        for i in range(301):
            ar[c, i] = v
            v = 0.6 * v + rng.normal()
    sets["ar1"] = ar
    sh = rng.normal(size=(4, 200))
    sh[3] += 0.8
    sets["shifted"] = sh
    sc = rng.standard_t(3, size=(4, 200))
    sc[1] *= 3
    sets["scale"] = sc
    sets["ties"] = rng.poisson(2.0, size=(3, 100)).astype(float)
    return sets


def read_sets():
    sets = {}
    for name in ("ar1", "shifted", "scale", "ties"):
        with open(os.path.join(DATA, name + ".csv")) as f:
            sets[name] = np.array([[float(v) for v in line.split(",")] for line in f if line.strip()])
    return sets


def write(sets):
    os.makedirs(DATA, exist_ok=True)
    for name, x in sets.items():
        with open(os.path.join(DATA, name + ".csv"), "w") as f:
            for chain in x:
                f.write(",".join(repr(float(v)) for v in chain) + "\n")
    with open(os.path.join(DATA, "expected.csv"), "w") as f:
        f.write("# data set, statistic, value: tests/ref/test_diagnostics_ref.py (numpy/scipy)\n")
        for name, x in sets.items():
            s = summarise(x)
            for k in STATS:
                f.write("%s,%s,%r\n" % (name, k, float(s[k])))


def main():
    if "--write" in sys.argv[1:]:
        write(make_sets())
        return 0
    expected = {}
    with open(os.path.join(DATA, "expected.csv")) as f:
        for line in f:
            if line.startswith("#") or not line.strip():
                continue
            name, k, v = line.strip().split(",")
            expected[(name, k)] = float(v)
    bad = 0
    for name, x in read_sets().items():
        s = summarise(x)
        for k in STATS:
            want, got = expected[(name, k)], float(s[k])
            if not abs(got - want) <= SELF_TOL * max(1.0, abs(want)):
                print("%s %s: numpy gives %r, expected.csv has %r" % (name, k, got, want))
                bad += 1
    # The cases must show what they were made for, or the comparison proves little.
    if not expected[("shifted", "rhat_bulk")] > 1.01:
        print("shifted: bulk R-hat does not flag the stuck chain")
        bad += 1
    if not expected[("scale", "rhat_folded")] > expected[("scale", "rhat_bulk")]:
        print("scale: folded R-hat does not exceed bulk R-hat")
        bad += 1
    print("diagnostics reference: %d mismatches" % bad)
    return 1 if bad else 0


if __name__ == "__main__":
    sys.exit(main())
