"""Cross-checks paritas' robust-cpd against statsmodels' RLM with HuberT.

A seeded incomplete heading with 4 % of its prices ten times too high (numpy)
is fitted by the cpd_crosscheck_tool (loss huber, scale re-estimated as the
fit iterates) and by statsmodels RLM(HuberT()) on a constant plus region and
item dummies (region 0 and item 0 dropped), so each region coefficient is
a_r - a_0. Two statsmodels fits:
- iterated to convergence (conv='coefs', tol=1e-13): the same fixed point as
  paritas, so parities, the scale and the H1 standard errors (Huber 1973;
  Huber 1981, ch. 7; cov='H1') must agree to 1e-8;
- with its default settings (scale_est='mad', conv='dev', tol=1e-8,
  maxiter=50): parities within 1e-5 and standard errors within 1e-4
  relative, the distance its looser stopping rule leaves.
Exits non-zero with a message on any mismatch.

Usage: /usr/bin/python3 robust_cpd_statsmodels_check.py PATH_TO_cpd_crosscheck_tool
"""

import csv
import os
import subprocess
import sys
import tempfile

import numpy as np
import statsmodels.api as sm

NUM_REGIONS = 12
NUM_ITEMS = 15
COVERAGE = 0.8
GROSS_SHARE = 0.04
TIGHT = 1e-8
DEFAULT_PARITY = 1e-5
DEFAULT_SE = 1e-4


def make_heading(seed):
    rng = np.random.default_rng(seed)
    while True:
        mask = rng.random((NUM_REGIONS, NUM_ITEMS)) < COVERAGE
        if mask.sum(axis=0).min() >= 2 and mask.sum(axis=1).min() >= 3:
            break
    region, item = np.nonzero(mask)
    log_price = (rng.normal(0.0, 0.1, NUM_REGIONS)[region]
                 + rng.uniform(np.log(0.5), np.log(500.0), NUM_ITEMS)[item]
                 + rng.normal(0.0, 0.05, region.size))
    gross = rng.random(region.size) < GROSS_SHARE
    log_price[gross] += np.log(10.0)
    return region, item, log_price, int(gross.sum())


def run_tool(tool, region, item, log_price, folder):
    path = os.path.join(folder, "cells.csv")
    with open(path, "w", newline="") as out:
        writer = csv.writer(out, lineterminator="\n")
        writer.writerow(["region", "item", "log_price", "weight"])
        for r, i, y in zip(region, item, log_price):
            writer.writerow([r, i, repr(float(y)), ""])
    completed = subprocess.run([tool, path, "off", "huber"], capture_output=True, text=True,
                               check=False)
    if completed.returncode != 0:
        sys.exit("robust_cpd_statsmodels_check: tool failed (exit %d): %s"
                 % (completed.returncode, completed.stderr.strip()))
    lines = completed.stdout.splitlines()
    rows = list(csv.DictReader([line for line in lines if not line.startswith("#")]))
    scale_line = [line for line in lines if line.startswith("# scale,")][0].split(",")
    get = lambda key: np.array([float(row[key]) for row in rows])
    return get("log_parity"), get("log_se"), float(scale_line[1]), int(scale_line[2])


def fit_statsmodels(region, item, log_price, **fit_options):
    x = np.zeros((region.size, NUM_REGIONS + NUM_ITEMS - 1))
    x[:, 0] = 1.0
    for k, (r, i) in enumerate(zip(region, item)):
        if r > 0:
            x[k, r] = 1.0
        if i > 0:
            x[k, NUM_REGIONS - 1 + i] = 1.0
    fit = sm.RLM(log_price, x, M=sm.robust.norms.HuberT()).fit(**fit_options)
    parity = np.concatenate([[0.0], fit.params[1:NUM_REGIONS]])
    se = np.concatenate([[0.0], fit.bse[1:NUM_REGIONS]])
    return parity, se, fit.scale


def check(what, ours, theirs, tolerance):
    error = np.abs(ours - theirs) / np.maximum(1e-3, np.abs(theirs))
    worst = int(np.argmax(error))
    if not np.all(np.isfinite(ours)) or error[worst] > tolerance:
        sys.exit("robust_cpd_statsmodels_check: %s of region %d is %.17g, statsmodels gives "
                 "%.17g (tolerance %g)" % (what, worst, ours[worst], theirs[worst], tolerance))
    return error[worst]


def main():
    if len(sys.argv) != 2:
        sys.exit("usage: robust_cpd_statsmodels_check.py PATH_TO_cpd_crosscheck_tool")
    tool = sys.argv[1]
    worst = 0.0
    with tempfile.TemporaryDirectory(prefix="paritas_robust_check_") as folder:
        for seed in (11, 2024):
            region, item, log_price, num_gross = make_heading(seed)
            parity, se, threshold, fits = run_tool(tool, region, item, log_price, folder)
            # Region 0 is the reference: its standard error is not defined.
            se[0] = 0.0
            t_parity, t_se, t_scale = fit_statsmodels(region, item, log_price, conv="coefs",
                                                      tol=1e-13, maxiter=5000)
            worst = max(worst, check("tight: log parity", parity, t_parity, TIGHT))
            worst = max(worst, check("tight: H1 log_se", se, t_se, TIGHT))
            worst = max(worst, check("tight: scale", np.array([threshold / 1.345]),
                                     np.array([t_scale]), TIGHT))
            d_parity, d_se, _ = fit_statsmodels(region, item, log_price)
            check("default: log parity", parity, d_parity, DEFAULT_PARITY)
            check("default: H1 log_se", se, d_se, DEFAULT_SE)
            print("seed %d: %d cells, %d gross errors, %d reweighted fits"
                  % (seed, region.size, num_gross, fits))
    print("robust_cpd_statsmodels_check: OK: parities, scale and H1 errors agree with "
          "statsmodels %s RLM(HuberT) to %.1e" % (sm.__version__, worst))


if __name__ == "__main__":
    main()
