#!/usr/bin/python3
"""The particle filter's likelihood against the exact Kalman-filter likelihood.

Gompertz growth with log-normal counting error is linear-Gaussian on the log scale (Dennis,
Ponciano, Lele, Taper & Staples 2006, Ecological Monographs 76:323, eqs. 1-2):
    x_{t+1} = a + c x_t + sigma eps_t,   a = r,  c = 1 - r / ln K,
    z_t = ln(y_t / E_t) = x_t + tau nu_t,
so its exact log-likelihood comes from the Kalman filter; statsmodels' state-space
KalmanFilter (statsmodels.tsa.statespace, prediction-error decomposition) computes it, with the
same first-year prior x_1 ~ N(x1_mean, x1_sd^2) as the 'known' initialisation and missing years
as NaN. The density of y itself (what tallyfit reports) adds -sum ln y_t over surveyed years.

1. On several series made by `tallyfit simulate` (one with effort, two with missing years, one
   oscillating), `tallyfit likelihood --repeat R` agrees with the exact value within 3 of its
   standard errors.
2. With few particles the log of a single estimate is biased downwards by about Var/2: if
   log L^ - log L is normal with variance s^2, unbiasedness of L^ forces its mean to be -s^2/2
   (Pitt, dos Santos Silva, Giordani & Kohn 2012, J. Econometrics 171:134, Sect. 3; asymptotically
   so, Berard, Del Moral & Doucet 2014, Electron. J. Probab. 19(94), Thm 1.1).
"""
import csv
import io
import math
import os
import subprocess
import sys
import tempfile

import numpy as np
from statsmodels.tsa.statespace.mlemodel import MLEModel

ROOT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "..")
TALLYFIT = os.environ.get("TALLYFIT", os.path.join(ROOT, "tallyfit"))


def run(*args):
    return subprocess.run([TALLYFIT, *args], capture_output=True, text=True, check=True).stdout


def exact_loglik(y, effort, r, K, sigma, tau, x1_mean, x1_sd):
    """Exact log p(y) of Gompertz + log-normal by statsmodels' Kalman filter."""
    z = np.log(y / effort)  # NaN where not surveyed
    mod = MLEModel(z, k_states=1)
    mod["design"] = np.array([[1.0]])
    mod["obs_cov"] = np.array([[tau ** 2]])
    mod["transition"] = np.array([[1.0 - r / math.log(K)]])
    mod["state_intercept"] = np.array([r])
    mod["selection"] = np.array([[1.0]])
    mod["state_cov"] = np.array([[sigma ** 2]])
    mod.ssm.initialize_known(np.array([x1_mean]), np.array([[x1_sd ** 2]]))
    surveyed = ~np.isnan(y)
    return mod.ssm.loglike() - np.sum(np.log(y[surveyed]))


def default_x1_mean(y, effort):
    """The documented default (src/model/model.h): ln of the mean of count / effort over the first
    3 surveyed years, a zero counting as 0.5."""
    v = [(c if c > 0 else 0.5) / e for c, e in zip(y, effort) if not math.isnan(c)][:3]
    return math.log(sum(v) / len(v))


def simulated(path, r, K, sigma, tau, years, start, seed, effort=None, missing=()):
    """Simulates with tallyfit, blanks the missing years' counts, writes path; returns y, effort."""
    args = ["simulate", "--model", "gompertz", "--obs", "lognormal",
            "--parameter", f"r={r},K={K},sigma={sigma},tau={tau}", "--years", str(years),
            "--start", str(start), "--seed", str(seed)]
    if effort is not None:
        args += ["--effort", ",".join(repr(e) for e in effort)]
    rows = list(csv.reader(io.StringIO(run(*args))))
    for i in missing:
        rows[1 + i][1] = ""  # an empty count: not surveyed
    with open(path, "w", newline="") as f:
        csv.writer(f, lineterminator="\n").writerows(rows)
    y = np.array([float(row[1]) if row[1] else math.nan for row in rows[1:]])
    e = np.array(effort if effort is not None else [1.0] * years, dtype=float)
    return y, e


def likelihood(path, setting, particles, repeats, seed, proposal):
    """setting: the options giving the values, ["--parameter", "r=..", "--prior", "x1_mean=.."]."""
    out = run("likelihood", path, "--estimates", "--model", "gompertz", "--obs", "lognormal", *setting,
              "--particles", str(particles), "--repeat", str(repeats), "--seed", str(seed), "--proposal", proposal)
    head, row = out.strip().split("\n")
    assert head == "population,model,log_likelihood,log_likelihood_mcse,particles,repeats,loglik_sd,proposal", head
    _, model, ll, se, n, rep, _, prop = row.split(",")
    assert model == "gompertz+lognormal", model
    assert int(n) == particles and int(rep) == repeats and prop == proposal
    return float(ll), float(se)


def main():
    failures = 0
    tmp = tempfile.mkdtemp()
    scenarios = [
        # name, r, K, sigma, tau, years, start, seed, effort, missing, x1 (None = default)
        ("plain", 0.6, 800.0, 0.15, 0.2, 30, 300, 5, None, (), (math.log(300.0), 0.5)),
        ("effort", 1.2, 3000.0, 0.1, 0.3, 30, 900, 6, [1.0 + 0.25 * (t % 5) for t in range(30)], (), (6.5, 1.0)),
        ("missing", 0.3, 500.0, 0.2, 0.15, 30, 150, 7, None, (4, 5, 11, 19), None),
        ("oscillating", 1.6, 200.0, 0.25, 0.1, 40, 120, 8, None, (1, 2, 3, 30), None),
    ]
    for name, r, K, sigma, tau, years, start, seed, effort, missing, x1 in scenarios:
        path = os.path.join(tmp, name + ".csv")
        y, e = simulated(path, r, K, sigma, tau, years, start, seed, effort, missing)
        setting = ["--parameter", f"r={r},K={K},sigma={sigma},tau={tau}"]
        if x1 is None:
            x1 = (default_x1_mean(y, e), 1.0)  # and tallyfit must use the same default
        else:
            setting += ["--prior", f"x1_mean={x1[0]!r},x1_sd={x1[1]!r}"]
        exact = exact_loglik(y, e, r, K, sigma, tau, *x1)
        for proposal in ("guided", "bootstrap"):
            ll, se = likelihood(path, setting, 1000, 40, 11, proposal)
            ok = abs(ll - exact) < 3 * se and se > 0
            failures += not ok
            print(f"{'ok  ' if ok else 'FAIL'} {name}, {proposal}: particle filter {ll:.4f} (se {se:.4f}), "
                  f"Kalman {exact:.4f}, difference {ll - exact:+.4f} = {(ll - exact) / se:+.2f} se")

    # 2. Downward bias of log L^ with few particles: n single estimates (--repeat 1) of the bootstrap
    # filter at N = 80, where Var(log L^) is about 1 for this series (the regime Pitt et al. 2012
    # recommend). (The guided filter is fully adapted on this model: its Var(log L^) at 80
    # particles is far below 0.2, see tests/unit/test_filter.c.)
    # The check: the mean is clearly below log L (by > 3 se), and mean - log L = -Var/2 within
    # 3 combined standard errors (se of the mean sd / sqrt(n); se of Var/2 by the normal-theory
    # (Var/2) sqrt(2 / (n - 1))) plus 10 % of Var/2 for the normal approximation itself (it gave
    # 6 % at this N when the test was written; at N = 20 the bias is only 0.7 Var/2).
    path = os.path.join(tmp, "plain.csv")
    r, K, sigma, tau = 0.6, 800.0, 0.15, 0.2
    setting = ["--parameter", f"r={r},K={K},sigma={sigma},tau={tau}", "--prior", f"x1_mean={math.log(300.0)!r},x1_sd=0.5"]
    y, e = simulated(path, r, K, sigma, tau, 30, 300, 5)
    exact = exact_loglik(y, e, r, K, sigma, tau, math.log(300.0), 0.5)
    n = 400
    ls = np.array([float(run("likelihood", path, "--estimates", "--model", "gompertz", "--obs", "lognormal", *setting,
                             "--particles", "80", "--repeat", "1", "--seed", str(s + 1), "--proposal", "bootstrap").split("\n")[1].split(",")[2])
                   for s in range(n)])
    bias, half_var = ls.mean() - exact, ls.var(ddof=1) / 2
    se_mean, se_half_var = ls.std(ddof=1) / math.sqrt(n), half_var * math.sqrt(2.0 / (n - 1))
    clearly_low = bias < -3 * se_mean
    about_half_var = abs(bias + half_var) < 3 * math.hypot(se_mean, se_half_var) + 0.1 * half_var
    ok = clearly_low and about_half_var and 0.2 < half_var < 2.0
    failures += not ok
    print(f"{'ok  ' if ok else 'FAIL'} bias with 80 particles: mean log L^ - log L = {bias:+.3f} "
          f"(se {se_mean:.3f}), -Var/2 = {-half_var:+.3f} (se {se_half_var:.3f})")
    return 1 if failures else 0


if __name__ == "__main__":
    sys.exit(main())
