#!/usr/bin/python3
"""The rounded log-normal count model (src/model/obs_lognormal_int.c) against scipy.

P(y | mu, tau) = F(y + 1/2) - F(y - 1/2) with F the log-normal distribution function
(scipy.stats.lognorm with s=tau, scale=mu), and P(0) = F(1/2). The log of that difference is
computed here from scipy.special.log_ndtr of the two standardised ends, always as the difference
of the two smaller tails (so it keeps its precision far out in either tail), and cross-checked on
the moderate points against plain scipy.stats.lognorm.cdf differences and against
scipy.integrate.quad of the normal density of ln Y over the
interval's logs. tests/data/obs_lognormal_int.csv holds the
values; tests/unit/test_obs_lognormal_int.c compares the C code with it; this script checks that
the table is what scipy computes now. Run with --write to regenerate it.
"""
import csv
import math
import os
import sys

import numpy as np
import scipy
from scipy import integrate, special, stats

TABLE = os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "data", "obs_lognormal_int.csv")

MUS = [1e-3, 0.5, 3.0, 47.5, 1000.0, 2.5e5]
COUNTS = [0, 1, 2, 5, 17, 100, 1234, 250000]
TAUS = [0.05, 0.3, 1.2]


def log_interval(a, b):
    """log(Phi(b) - Phi(a)), a < b, from the smaller tails."""
    if a >= 0:  # both ends in the upper half: mirror to lower tails
        a, b = -b, -a
    if b <= 0:
        la, lb = special.log_ndtr(a), special.log_ndtr(b)
        if lb == -math.inf:
            return -math.inf
        return lb + math.log1p(-math.exp(la - lb)) if la > -math.inf else lb
    return math.log1p(-(special.ndtr(a) + special.ndtr(-b)))


def ref(y, mu, tau):
    a = -math.inf if y == 0 else (math.log(y - 0.5) - math.log(mu)) / tau
    b = (math.log(y + 0.5) - math.log(mu)) / tau
    return log_interval(a, b)


def rows():
    for tau in TAUS:
        for mu in MUS:
            for y in COUNTS:
                yield tau, y, mu, ref(y, mu, tau)


def cross_check(points):
    """Moderate points, where plain cdf differences and quadrature are accurate enough."""
    bad = 0
    n = 0
    for tau, y, mu, v in points:
        if not (v > -30):
            continue
        d = stats.lognorm(s=tau, scale=mu)
        lo = 0.0 if y == 0 else y - 0.5
        p_cdf = d.cdf(y + 0.5) - d.cdf(lo)
        # Quadrature of the normal density of ln Y over the interval's logs; a zero count's
        # interval starts 40 sd below the centre, where the rest of the mass is below 1e-300.
        m = math.log(mu)
        ulo = m - 40 * tau if y == 0 else math.log(lo)
        uhi = math.log(y + 0.5)
        inside = [m] if ulo < m < uhi else None
        p_quad, _ = integrate.quad(stats.norm(m, tau).pdf, ulo, uhi, epsabs=0, epsrel=1e-12,
                                   limit=200, points=inside)
        n += 1
        # cdf differences lose about eps / P relative; quadrature is asked for 1e-12.
        tol_cdf = 1e-13 / p_cdf + 1e-11
        if abs(math.log(p_cdf) - v) > tol_cdf or abs(math.log(p_quad) - v) > 1e-9:
            bad += 1
            print(f"FAIL cross-check tau={tau} y={y} mu={mu}: table {v!r}, cdf {math.log(p_cdf)!r}, "
                  f"quad {math.log(p_quad)!r}")
    return bad, n


def pmf_sums_to_one():
    """Sum over y of P(y) telescopes to F(inf) = 1; checked numerically on a moderate case."""
    tau, mu = 0.4, 12.0
    ys = np.arange(0, 2000)
    s = sum(math.exp(ref(int(y), mu, tau)) for y in ys)
    ok = abs(s - 1.0) < 1e-12
    if not ok:
        print(f"FAIL: pmf sums to {s!r}")
    return 0 if ok else 1


def main():
    computed = list(rows())
    if "--write" in sys.argv:
        with open(TABLE, "w", newline="") as f:
            f.write("# log P(y | mu, tau) of the rounded log-normal; made by tests/ref/test_obs_lognormal_int.py --write\n")
            w = csv.writer(f, lineterminator="\n")
            w.writerow(["tau", "y", "mu", "logp"])
            for tau, y, mu, v in computed:
                w.writerow([repr(tau), repr(float(y)), repr(mu), repr(v)])
        print(f"wrote {len(computed)} rows to {TABLE}")
        return 0
    with open(TABLE) as f:
        table = [r for r in csv.reader(line for line in f if not line.startswith("#"))][1:]
    bad = 0
    if len(table) != len(computed):
        print(f"FAIL: table has {len(table)} rows, grid has {len(computed)}")
        return 1
    for (tau, y, mu, v), r in zip(computed, table):
        tv = float(r[3])
        same = float(r[0]) == tau and float(r[1]) == y and float(r[2]) == mu
        if not same or not (v == tv or abs(v - tv) <= 1e-12 * max(1.0, abs(v))):
            bad += 1
            print(f"FAIL: tau={tau} y={y} mu={mu}: scipy {v!r}, table {r}")
    b, n = cross_check(computed)
    bad += b + pmf_sums_to_one()
    print(f"rounded log-normal: {len(computed)} table points agree with scipy {scipy.__version__}; "
          f"{n} moderate points agree with cdf differences and quadrature")
    return 1 if bad else 0


if __name__ == "__main__":
    sys.exit(main())
