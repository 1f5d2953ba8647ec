#!/usr/bin/python3
"""The observation densities against scipy.stats.

tests/data/obs_density.csv holds log p(y | mu) from scipy.stats on a grid (Poisson: poisson.logpmf;
log-normal: lognorm.logpdf with s=tau, scale=mu; negative binomial: nbinom.logpmf with n=phi,
p=phi/(phi+mu)). The unit test tests/unit/test_model.c compares the C functions (logpmf and the
vector kernel add_logweight) with that table; this script checks that the table is what scipy
computes now, so the reference cannot drift from scipy. Run with --write to regenerate it.
"""
import csv
import math
import os
import sys

import scipy
from scipy import stats

TABLE = os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "data", "obs_density.csv")

# Grid chosen to cover small and very large means, zero counts and near-Poisson negative binomials.
MUS = [1e-3, 0.5, 3.0, 47.5, 1000.0, 2.5e5]
COUNTS = [0, 1, 2, 5, 17, 100, 1234, 250000]
POSITIVE = [0.01, 0.7, 3.0, 40.0, 1234.5, 2.6e5]
TAUS = [0.05, 0.3, 1.2]
PHIS = [0.3, 2.0, 25.0, 1e4]


def rows():
    # Edge points: a mean of zero (only a zero count is possible) and a zero under the log-normal.
    yield "poisson", 0.0, 0, 0.0, stats.poisson.logpmf(0, 0.0)
    yield "poisson", 0.0, 3, 0.0, stats.poisson.logpmf(3, 0.0)
    yield "lognormal", 0.3, 0.0, 5.0, stats.lognorm.logpdf(0.0, s=0.3, scale=5.0)
    yield "negbin", 2.0, 0, 0.0, stats.nbinom.logpmf(0, n=2.0, p=1.0)
    yield "negbin", 2.0, 3, 0.0, stats.nbinom.logpmf(3, n=2.0, p=1.0)
    for mu in MUS:
        for y in COUNTS:
            yield "poisson", 0.0, y, mu, stats.poisson.logpmf(y, mu)
    for tau in TAUS:
        for mu in MUS:
            for y in POSITIVE:
                yield "lognormal", tau, y, mu, stats.lognorm.logpdf(y, s=tau, scale=mu)
    for phi in PHIS:
        for mu in MUS:
            for y in COUNTS:
                yield "negbin", phi, y, mu, stats.nbinom.logpmf(y, n=phi, p=phi / (phi + mu))


def main():
    computed = [(m, p, y, mu, float(v)) for m, p, y, mu, v in rows()]
    if "--write" in sys.argv:
        with open(TABLE, "w", newline="") as f:
            f.write("# log p(y | mu) from scipy.stats; made by tests/ref/test_obs_density.py --write\n")
            w = csv.writer(f, lineterminator="\n")
            w.writerow(["model", "param", "y", "mu", "logp"])
            for m, p, y, mu, v in computed:
                w.writerow([m, repr(p), repr(float(y)), repr(mu), repr(v)])
        print(f"wrote {len(computed)} rows to {TABLE}")
        return 0
    with open(TABLE) as f:
        table = [r for r in csv.reader(line for line in f if not line.startswith("#"))][1:]
    if len(table) != len(computed):
        print(f"FAIL: table has {len(table)} rows, scipy grid has {len(computed)}")
        return 1
    bad = 0
    for (m, p, y, mu, v), r in zip(computed, table):
        tv = float(r[4])
        same_point = r[0] == m and float(r[1]) == p and float(r[2]) == y and float(r[3]) == mu
        # Different scipy builds may differ in the last bits of lgamma sums: 1e-12 relative.
        ok = same_point and (v == tv or abs(v - tv) <= 1e-12 * max(1.0, abs(v)))
        if not ok:
            bad += 1
            print(f"FAIL: {m} param={p} y={y} mu={mu}: scipy {v!r}, table {r}")
    finite = sum(1 for *_, v in computed if math.isfinite(v))
    print(f"obs density table: {len(computed)} points ({finite} finite) agree with scipy {scipy.__version__}")
    return 1 if bad else 0


if __name__ == "__main__":
    sys.exit(main())
