"""Cross-checks the cprd elementary method against statsmodels' OLS.

A seeded incomplete one-heading survey with representativity flags (numpy) is
written as CSV files, run through `paritas compute` with `elementary: cprd`,
and fitted again by statsmodels OLS on region dummies (region 0 dropped),
item dummies (no constant) and the representativity dummy. Must agree to
1e-8: the dummy's coefficient and its standard error (representativity.csv),
the regions' ln parities relative to their geometric mean and their classic
standard errors (parities.csv, contrasts c'b with c'Vc from statsmodels'
covariance). A second case flags whole items only, where the dummy is not
identified: paritas must leave the effect empty and give the CPD parities.

Usage: /usr/bin/python3 cprd_statsmodels_check.py PATH_TO_paritas
"""

import csv
import os
import subprocess
import sys
import tempfile

import numpy as np
import statsmodels.api as sm

NUM_REGIONS = 10
NUM_ITEMS = 12
TOLERANCE = 1e-8


def make_survey(rng, per_item_flags):
    """Cells (region, item, price, flag) of a linked incomplete heading."""
    region_effect = rng.normal(0.0, 0.1, NUM_REGIONS)
    item_effect = rng.normal(1.0, 0.5, NUM_ITEMS)
    item_flag = rng.random(NUM_ITEMS) < 0.4
    cells = []
    for r in range(NUM_REGIONS):
        for i in range(NUM_ITEMS):
            # Item 0 everywhere keeps the heading linked; others at 70 %.
            if i > 0 and rng.random() > 0.7:
                continue
            flag = item_flag[i] if per_item_flags else rng.random() < 0.4
            y = region_effect[r] + item_effect[i] + 0.08 * flag + rng.normal(0.0, 0.05)
            # The price as written (shortest repr) and its log, as paritas reads it.
            price = float(np.exp(y))
            cells.append((r, i, price, int(flag)))
    return cells


def run_paritas(paritas, folder, cells):
    with open(os.path.join(folder, "prices.csv"), "w") as f:
        f.write("region,item,price,representative,heading\n")
        for r, i, price, flag in cells:
            f.write(f"r{r:02d},i{i:02d},{price!r},{flag},h\n")
    with open(os.path.join(folder, "expenditure.csv"), "w") as f:
        f.write("region,heading,expenditure\n")
        for r in range(NUM_REGIONS):
            f.write(f"r{r:02d},h,100\n")
    with open(os.path.join(folder, "run.yaml"), "w") as f:
        f.write("survey:\n  prices: prices.csv\n  expenditure: expenditure.csv\n"
                "elementary: cprd\nreport: false\noutput: out\n")
    done = subprocess.run([paritas, "compute", os.path.join(folder, "run.yaml")],
                          capture_output=True, text=True, stdin=subprocess.DEVNULL)
    if done.returncode not in (0, 3):
        sys.exit(f"paritas compute failed ({done.returncode}): {done.stderr}")
    out = os.path.join(folder, "out")
    with open(os.path.join(out, "parities.csv")) as f:
        rows = [row for row in csv.DictReader(f) if row["node"] == "h"]
    with open(os.path.join(out, "representativity.csv")) as f:
        rep = list(csv.DictReader(f))
    return rows, rep


def statsmodels_fit(cells):
    """OLS on the dummies; returns (result, names)."""
    # Region dummies 1..R-1, item dummies 0..I-1, then the flag.
    x = np.zeros((len(cells), NUM_REGIONS - 1 + NUM_ITEMS + 1))
    y = np.zeros(len(cells))
    for k, (r, i, price, flag) in enumerate(cells):
        if r > 0:
            x[k, r - 1] = 1.0
        x[k, NUM_REGIONS - 1 + i] = 1.0
        x[k, -1] = flag
        y[k] = np.log(price)
    return sm.OLS(y, x).fit()


def check(name, got, want, failures):
    if not np.isfinite(got) or abs(got - want) > TOLERANCE * max(1.0, abs(want)):
        failures.append(f"{name}: paritas {got!r}, statsmodels {want!r}")


def main():
    if len(sys.argv) != 2:
        sys.exit("usage: cprd_statsmodels_check.py PATH_TO_paritas")
    rng = np.random.default_rng(20261202)
    failures = []
    with tempfile.TemporaryDirectory() as folder:
        cells = make_survey(rng, per_item_flags=False)
        rows, rep = run_paritas(sys.argv[1], folder, cells)
        fit = statsmodels_fit(cells)
        check("representativity effect", float(rep[0]["effect"]), fit.params[-1], failures)
        check("representativity log_se", float(rep[0]["log_se"]), fit.bse[-1], failures)
        # a_r - mean_s a_s with a_0 = 0: contrast over the region coefficients.
        num_coef = len(fit.params)
        for row in rows:
            r = int(row["region"][1:])
            c = np.zeros(num_coef)
            c[: NUM_REGIONS - 1] -= 1.0 / NUM_REGIONS
            if r > 0:
                c[r - 1] += 1.0
            want = c @ fit.params
            want_se = np.sqrt(c @ fit.cov_params() @ c)
            check(f"ln parity of {row['region']}", np.log(float(row["parity"]) / 100.0), want,
                  failures)
            check(f"log_se of {row['region']}", float(row["log_se"]), want_se, failures)
    with tempfile.TemporaryDirectory() as folder:
        cells = make_survey(rng, per_item_flags=True)
        rows, rep = run_paritas(sys.argv[1], folder, cells)
        if rep[0]["effect"] != "" or rep[0]["log_se"] != "":
            failures.append("flags constant within items: the effect should be empty, got "
                            f"{rep[0]['effect']!r}")
    if failures:
        print("\n".join(failures))
        sys.exit(1)
    print("cprd matches statsmodels OLS with the representativity dummy")


if __name__ == "__main__":
    main()
