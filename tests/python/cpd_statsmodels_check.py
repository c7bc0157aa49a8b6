"""Cross-checks paritas' CPD fit against statsmodels' WLS on the dummy matrix.

A seeded incomplete survey (numpy) is written to a CSV, fitted by the
cpd_crosscheck_tool given on the command line, and fitted again by
statsmodels with region and item dummies (region 0 dropped, no constant), so
each region coefficient is a_r - a_0. Parities, classic standard errors and
the HC0, HC1 and HC3 sandwich errors (statsmodels get_robustcov_results,
MacKinnon and White 1985) must agree to 1e-8. Runs a weighted and an
unweighted case; exits non-zero with a message on any mismatch. Every item is
priced by at least two regions and no cell has hat value 1, so statsmodels'
HC3 is finite (paritas gives such cells no weight; statsmodels divides 0 by 0).

Usage: /usr/bin/python3 cpd_statsmodels_check.py PATH_TO_cpd_crosscheck_tool
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
COVERAGE = 0.65
TOLERANCE = 1e-8


def linked(region, item):
    """True when every region is linked to region 0 through shared items."""
    parent = list(range(NUM_REGIONS))

    def find(x):
        while parent[x] != x:
            parent[x] = parent[parent[x]]
            x = parent[x]
        return x

    first = {}
    for r, i in zip(region, item):
        if i in first:
            parent[find(r)] = find(first[i])
        else:
            first[i] = r
    return len({find(r) for r in range(NUM_REGIONS)}) == 1


def dummies(region, item):
    """Region dummies without region 0, then every item dummy."""
    x = np.zeros((region.size, NUM_REGIONS - 1 + NUM_ITEMS))
    for k, (r, i) in enumerate(zip(region, item)):
        if r > 0:
            x[k, r - 1] = 1.0
        x[k, NUM_REGIONS - 1 + i] = 1.0
    return x


def max_hat(region, item):
    """Largest hat value of the unweighted design."""
    x = dummies(region, item)
    return float(np.max(np.einsum("ij,ji->i", x, np.linalg.pinv(x))))


def make_survey(seed, weighted):
    """Incomplete survey: every region and item kept, all regions linked."""
    rng = np.random.default_rng(seed)
    while True:
        mask = rng.random((NUM_REGIONS, NUM_ITEMS)) < COVERAGE
        if mask.sum(axis=0).min() >= 2 and mask.sum(axis=1).min() >= 2:
            region, item = np.nonzero(mask)
            if linked(region, item) and max_hat(region, item) < 1.0 - 1e-6:
                break
    region_effect = rng.normal(0.0, 0.1, NUM_REGIONS)
    item_effect = rng.uniform(np.log(0.5), np.log(500.0), NUM_ITEMS)
    # Heteroskedastic noise, so classic and HC0 errors differ.
    noise = rng.normal(0.0, 0.05, region.size) * (1.0 + region / NUM_REGIONS)
    log_price = region_effect[region] + item_effect[item] + noise
    weight = rng.uniform(0.2, 3.0, region.size) if weighted else np.ones(region.size)
    return region, item, log_price, weight


def run_tool(tool, region, item, log_price, weight, weighted, folder, errors):
    path = os.path.join(folder, "cells.csv")
    with open(path, "w", newline="") as out:
        writer = csv.writer(out, lineterminator="\n")
        writer.writerow(["region", "item", "log_price", "weight"])
        for r, i, y, w in zip(region, item, log_price, weight):
            writer.writerow([r, i, repr(float(y)), repr(float(w)) if weighted else ""])
    completed = subprocess.run([tool, path, errors], capture_output=True, text=True,
                               check=False)
    if completed.returncode != 0:
        sys.exit("cpd_statsmodels_check: tool failed (exit %d): %s"
                 % (completed.returncode, completed.stderr.strip()))
    lines = [line for line in completed.stdout.splitlines() if not line.startswith("#")]
    rows = list(csv.DictReader(lines))
    get = lambda key: np.array([float(row[key]) for row in rows])
    return get("log_parity"), get("log_se"), get("log_se_robust")


def fit_statsmodels(region, item, log_price, weight, errors):
    fit = sm.WLS(log_price, dummies(region, item), weights=weight).fit()
    sandwich = fit.get_robustcov_results(cov_type=errors.upper())
    parity = np.concatenate([[0.0], fit.params[:NUM_REGIONS - 1]])
    se = np.concatenate([[0.0], fit.bse[:NUM_REGIONS - 1]])
    se_robust = np.concatenate([[0.0], sandwich.bse[:NUM_REGIONS - 1]])
    return parity, se, se_robust


def compare(name, case, ours, theirs):
    error = np.abs(ours - theirs) / np.maximum(1.0, np.abs(theirs))
    worst = int(np.argmax(error))
    if not np.all(np.isfinite(ours)) or error[worst] > TOLERANCE:
        sys.exit("cpd_statsmodels_check: %s case: %s of region %d is %.17g, statsmodels "
                 "gives %.17g (tolerance %g)"
                 % (case, name, worst, ours[worst], theirs[worst], TOLERANCE))
    return error[worst]


def main():
    if len(sys.argv) != 2:
        sys.exit("usage: cpd_statsmodels_check.py PATH_TO_cpd_crosscheck_tool")
    tool = sys.argv[1]
    worst = 0.0
    num_cells = []
    with tempfile.TemporaryDirectory(prefix="paritas_cpd_check_") as folder:
        for case, seed, weighted in (("weighted", 20240601, True), ("unweighted", 7, False)):
            region, item, log_price, weight = make_survey(seed, weighted)
            for errors in ("hc0", "hc1", "hc3"):
                ours = run_tool(tool, region, item, log_price, weight, weighted, folder, errors)
                theirs = fit_statsmodels(region, item, log_price, weight, errors)
                names = ("log parity", "log_se", "log_se_robust (%s)" % errors.upper())
                for name, a, b in zip(names, ours, theirs):
                    worst = max(worst, compare(name, case, a, b))
            num_cells.append(region.size)
    print("cpd_statsmodels_check: OK: %d regions x %d items, %s cells (weighted, unweighted); "
          "parities, classic, HC0, HC1 and HC3 errors agree with statsmodels %s to %.1e"
          % (NUM_REGIONS, NUM_ITEMS, " and ".join(map(str, num_cells)), sm.__version__, worst))


if __name__ == "__main__":
    main()
