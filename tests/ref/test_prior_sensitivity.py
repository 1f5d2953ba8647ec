#!/usr/bin/python3
"""The prior sensitivity of `tallyfit compare` against direct runs and against the identity behind it.

For two demo surveys (heron-colony, squirrel-transect) and the Ricker model with Poisson counting
error, whose K has a log-normal prior (sdlog 1.5 in models/ricker.ini):

1. Reweighting against a direct run. The `K x2` row of prior-sensitivity.csv reweights the
   comparison's own importance draws to the prior with sdlog 3. A second run of `tallyfit compare`
   with that prior written into a copy of the model files (and another seed) estimates the same
   log p(y) directly. Importance sampling is exact for any target its density covers (Robert &
   Casella 2004, Monte Carlo Statistical Methods, section 3.3), so the two must agree within
   their Monte Carlo errors: |difference| <= 3 sqrt(se_1^2 + se_2^2) + 0.02. The 0.02 is the
   allowance test_evidence_kalman.py documents (the log of a mean is biased by about -se^2 / 2,
   and the delta-method se is itself estimated from the same draws).

2. The same ratio from the posterior draws. p'(y) / p(y) = E_post[p'(K) / p(K)] (the prior ratio
   averaged over the posterior under p; Gelfand & Dey 1994, JRSS B 56:501, use the same identity),
   computed here from draws.csv with scipy.stats.lognorm: independent of the importance draws.
   Tolerance: 3 times the combined errors: the two log_ml se's and the posterior mean's error,
   sd(ratio) / (sqrt(ESS) mean(ratio)) with the bulk ESS of K from parameters.csv.

3. Lindley (1957, Biometrika 44:187) and Kass & Raftery (1995, JASA 90:773, section 5): doubling
   the prior scale of a parameter only one model has lowers its log p(y) by about ln 2 when the
   data dominate. For a log-normal prior, p'(K) / p(K) = exp((3/8) z^2) / 2 with z = (ln K -
   meanlog) / sdlog (algebra of the two densities), so the fall is ln 2 - ln E_post[exp((3/8)
   z^2)]: ln 2 exactly where the posterior sits at the prior's centre, less by up to (3/8) z^2
   across the posterior. The check: the fall lies in [ln 2 - (3/8) z_hi^2, ln 2], with z_hi the
   largest |z| of the central 95 % of the posterior draws, widened by 3 combined se.

The default priors are read from the models/ folder of this tree: K ~ lognormal(meanlog = the log of
the survey's median count per unit effort, sdlog 1.5), checked before the runs.
"""
import csv
import math
import os
import re
import shutil
import subprocess
import sys
import tempfile

import numpy as np
from scipy import stats

import output_tables

ROOT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "..")
TALLYFIT = os.environ.get("TALLYFIT", os.path.join(ROOT, "tallyfit"))
MODELS = os.path.join(ROOT, "models")
SURVEYS = ["heron-colony", "squirrel-transect"]
MODEL = "ricker+poisson"
K_SDLOG = 1.5
RUN = ["--model", "ricker", "--obs", "poisson", "--threads", "2", "-q"]


def run(survey, out, models, seed, extra=()):
    env = dict(os.environ, TALLYFIT_MODELS=models)
    cmd = [TALLYFIT, "compare", os.path.join(ROOT, "surveys", survey + ".csv"), "-o", out, "--seed", str(seed),
           *RUN, *extra]
    p = subprocess.run(cmd, env=env, capture_output=True, text=True)
    if p.returncode != 0:
        sys.exit(f"{' '.join(cmd)} failed: {p.stderr}")


def survey_meanlog(survey):
    """The meanlog of "meanlog = survey" (model_file.h): the log of the median count per unit
    effort over the surveyed years."""
    rows = [r for r in csv.DictReader(line for line in open(os.path.join(ROOT, "surveys", survey + ".csv"),
                                                            encoding="utf-8") if not line.startswith("#"))]
    per = [float(r["count"]) / float(r.get("effort") or 1) for r in rows
           if r["count"].strip() and r["count"].strip().upper() != "NA"]
    return math.log(float(np.median(per)))


def doubled_models(tmp):
    """A copy of the model files with the sdlog of K in ricker.ini doubled."""
    d = os.path.join(tmp, "models-doubled")
    shutil.copytree(MODELS, d)
    path = os.path.join(d, "ricker.ini")
    text = open(path, encoding="utf-8").read()
    head, k_section = text.split("[K]", 1)
    k_body, rest = k_section.split("\n[", 1)
    m = re.search(r"sdlog\s*=\s*([0-9.]+)", k_body)
    if float(m.group(1)) != K_SDLOG or "meanlog = survey" not in k_body:
        sys.exit(f"ricker.ini's prior of K is not the one this check expects (sdlog {K_SDLOG}, survey meanlog)")
    k_body = k_body.replace(m.group(0), f"sdlog = {2 * float(m.group(1))}")
    open(path, "w", encoding="utf-8").write(head + "[K]" + k_body + "\n[" + rest)
    return d


def main():
    failures = []
    with tempfile.TemporaryDirectory() as tmp:
        doubled = doubled_models(tmp)
        for n, survey in enumerate(SURVEYS):
            out1, out2 = os.path.join(tmp, survey + "-1"), os.path.join(tmp, survey + "-2")
            run(survey, out1, MODELS, 11 + n)
            run(survey, out2, doubled, 101 + n, ["--prior-sensitivity", "off"])
            if os.path.exists(os.path.join(out2, "prior-sensitivity.csv")):
                failures.append(f"{survey}: --prior-sensitivity off still wrote the table")
            sens = output_tables.read(os.path.join(out1, "prior-sensitivity.csv"))
            row = {(r["alternative"], r["model"]): r for r in sens}
            fitted, k2 = row[("fitted", MODEL)], row[("K x2", MODEL)]
            if k2["status"] != "reweighted":
                failures.append(f"{survey}: K x2 row is {k2['status']} ({k2['note']})")
            direct = [r for r in output_tables.read(os.path.join(out2, "models.csv")) if r["model"] == MODEL][0]
            l0, s0 = float(fitted["log_ml"]), float(fitted["log_ml_mcse"])
            l2, s2 = float(k2["log_ml"]), float(k2["log_ml_mcse"])
            ld, sd = float(direct["log_ml"]), float(direct["log_ml_mcse"])
            tol = 3 * math.hypot(s2, sd) + 0.02
            print(f"{survey}: reweighted {l2:.4f} (se {s2:.4f}), direct {ld:.4f} (se {sd:.4f}), "
                  f"difference {l2 - ld:+.4f}, tolerance {tol:.4f}")
            if not abs(l2 - ld) <= tol:
                failures.append(f"{survey}: reweighted {l2} against direct {ld}, beyond {tol}")

            # 2. The posterior-draw identity.
            params = output_tables.read(os.path.join(out1, "parameters.csv"))
            kp = [r for r in params if r["model"] == MODEL and r["parameter"] == "K"][0]
            meanlog, sdlog = survey_meanlog(survey), K_SDLOG
            ess = float(kp["bulk_ess"])
            draws = output_tables.read(os.path.join(out1, "draws.csv"))
            K = np.array([float(r["k"]) for r in draws if r["model"] == MODEL])
            ratio = stats.lognorm.pdf(K, 2 * sdlog, scale=math.exp(meanlog)) / \
                stats.lognorm.pdf(K, sdlog, scale=math.exp(meanlog))
            post = math.log(ratio.mean())
            post_se = ratio.std(ddof=1) / math.sqrt(ess) / ratio.mean()
            tol2 = 3 * (math.hypot(s0, s2) + post_se)
            print(f"{survey}: log p'(y) - log p(y) reweighted {l2 - l0:+.4f}, from the posterior draws {post:+.4f} "
                  f"(se {post_se:.4f}), tolerance {tol2:.4f}")
            if not abs((l2 - l0) - post) <= tol2:
                failures.append(f"{survey}: reweighted change {l2 - l0} against posterior identity {post}")

            # 3. Lindley: a fall of about ln 2.
            z = (np.log(K) - meanlog) / sdlog
            z_hi = max(abs(np.quantile(z, 0.025)), abs(np.quantile(z, 0.975)))
            fall, slack = l0 - l2, 3 * math.hypot(s0, s2)
            lo, hi = math.log(2) - 3 / 8 * z_hi ** 2 - slack, math.log(2) + slack
            print(f"{survey}: fall {fall:.4f}, ln 2 = {math.log(2):.4f}, allowed [{lo:.4f}, {hi:.4f}] (z_hi {z_hi:.3f})")
            if not lo <= fall <= hi:
                failures.append(f"{survey}: doubling K's prior scale lowered log p(y) by {fall}, outside [{lo}, {hi}]")
    if failures:
        sys.exit("FAIL: " + "; ".join(failures))
    print("ok")


if __name__ == "__main__":
    main()
