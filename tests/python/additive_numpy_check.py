"""Cross-checks paritas' Geary-Khamis parities against an independent solve.

The Geary (1958) - Khamis (1972) equations, with q_rh = e_rh / p_rh,
    pi_h = sum_r (e_rh / PPP_r) / sum_r q_rh,   PPP_r = E_r / sum_h pi_h q_rh,
give, for x_r = 1 / PPP_r, the eigenvector problem in region space
    x = C x,   C = diag(1 / E) Q diag(1 / sum_r q_rh) e^T,
which numpy solves here (eigenvalue 1, the Perron root); paritas solves a
headings x headings system and a fixed-point check instead. Runs a seeded
incomplete survey (regions missing headings, sizes over two orders of
magnitude) and the six-commodity data of the CPI Manual (2004, ch. 19, tables
19.1-19.2) read as five regions; ln parities (mean 0) must agree to 1e-10.

Usage: /usr/bin/python3 additive_numpy_check.py PATH_TO_additive_crosscheck_tool
"""

import csv
import os
import subprocess
import sys
import tempfile

import numpy as np

TOLERANCE = 1e-10
HERE = os.path.dirname(os.path.abspath(__file__))


def generated(seed, num_regions=80, num_headings=15, coverage=0.55):
    """Incomplete survey: every region keeps two headings, all regions linked."""
    rng = np.random.default_rng(seed)
    mask = rng.random((num_regions, num_headings)) < coverage
    for r in range(num_regions):
        mask[r, r % num_headings] = mask[r, (r + 1) % num_headings] = True
    size = np.exp(rng.uniform(0.0, 4.6, num_regions))
    price = np.exp(rng.normal(0.0, 0.25, mask.shape) + 0.1 * np.arange(num_headings))
    expenditure = size[:, None] * rng.uniform(0.2, 1.2, mask.shape)
    return np.where(mask, price, np.nan), np.where(mask, expenditure, np.nan)


def six_commodity():
    price = np.full((5, 6), np.nan)
    expenditure = np.full((5, 6), np.nan)
    path = os.path.join(HERE, "..", "data", "published", "six_commodity_prices_quantities.csv")
    with open(path, newline="") as f:
        for row in csv.DictReader(f):
            r, h = int(row["situation"]) - 1, int(row["commodity"][1:]) - 1
            price[r, h] = float(row["price"])
            expenditure[r, h] = float(row["price"]) * float(row["quantity"])
    return price, expenditure


def numpy_geary_khamis(price, expenditure):
    used = np.isfinite(price) & np.isfinite(expenditure) & (expenditure > 0)
    e = np.where(used, expenditure, 0.0)
    q = np.where(used, e / np.where(used, price, 1.0), 0.0)
    c = (q / q.sum(axis=0)) @ e.T / e.sum(axis=1)[:, None]
    values, vectors = np.linalg.eig(c)
    k = np.argmin(np.abs(values - 1.0))
    if abs(values[k] - 1.0) > 1e-10:
        raise SystemExit(f"numpy: no eigenvalue 1 (closest {values[k]})")
    x = np.real(vectors[:, k])
    x = x / x.sum()
    log_parity = -np.log(x)
    return log_parity - log_parity.mean()


def paritas(tool, price, expenditure, folder, name):
    path = os.path.join(folder, name + ".csv")
    with open(path, "w") as f:
        f.write("region,heading,price,expenditure\n")
        for r, h in zip(*np.nonzero(np.isfinite(price))):
            f.write(f"{r},{h},{price[r, h]!r},{expenditure[r, h]!r}\n")
    run = subprocess.run([tool, "geary-khamis", path], capture_output=True, text=True)
    if run.returncode != 0:
        raise SystemExit(f"{name}: additive_crosscheck_tool failed: {run.stderr}")
    rows = list(csv.DictReader(run.stdout.splitlines()))
    return np.array([float(row["log_parity"]) for row in rows])


def main():
    tool = sys.argv[1]
    failures = []
    with tempfile.TemporaryDirectory() as folder:
        cases = [("generated", *generated(20261202)), ("six_commodity", *six_commodity())]
        for name, price, expenditure in cases:
            ours = paritas(tool, price, expenditure, folder, name)
            theirs = numpy_geary_khamis(price, expenditure)
            worst = np.max(np.abs(ours - theirs))
            print(f"{name}: {len(ours)} regions, max |ln PPP difference| = {worst:.2e}")
            if not worst <= TOLERANCE:
                failures.append(f"{name}: differs from numpy by {worst:.3e} > {TOLERANCE}")
    if failures:
        raise SystemExit("\n".join(failures))


if __name__ == "__main__":
    main()
