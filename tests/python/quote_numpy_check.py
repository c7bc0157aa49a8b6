"""Cross-checks paritas' weighted cell prices and quantity conversion with numpy.

A seeded survey of quotes with a weight (quantities sold, spread over three
orders of magnitude) and an observed quantity per quote, and a
reference_quantity per item, is loaded by paritas (quote_crosscheck_tool).
For every cell numpy computes, independently of paritas' running update,
    x = ln(price * reference_quantity / quantity),
    log_price = numpy.average(x, weights=w),
    log_sd = sqrt(numpy.cov(x, aweights=w))   (0 for one quote),
    weight = sum w.
They must agree to 1e-12 (relative for weight, absolute in log points for
the others).

Usage: /usr/bin/python3 quote_numpy_check.py PATH_TO_quote_crosscheck_tool
"""

import csv
import io
import os
import subprocess
import sys
import tempfile

import numpy as np

TOLERANCE = 1e-12


def write_survey(folder, seed):
    rng = np.random.default_rng(seed)
    regions = ["R%02d" % r for r in range(12)]
    items = ["I%02d" % i for i in range(9)]
    reference = {item: float(rng.choice([1.0, 250.0, 500.0, 1000.0])) for item in items}
    quotes = []  # region, item, price, weight, quantity
    for r, region in enumerate(regions):
        for i, item in enumerate(items):
            if rng.random() < 0.25:
                continue
            for _ in range(int(rng.integers(1, 9))):
                quantity = float(rng.choice([100.0, 250.0, 400.0, 750.0, 1000.0, 1500.0]))
                price = float(np.round(np.exp(rng.normal(0.1 * i + 0.05 * r, 0.3)) * quantity / 100, 2))
                weight = float(np.round(np.exp(rng.uniform(0.0, 7.0)), 3))
                quotes.append((region, item, price, weight, quantity))
    order = rng.permutation(len(quotes))
    with open(os.path.join(folder, "prices.csv"), "w") as f:
        f.write("region,item,price,heading,weight,quantity\n")
        for k in order:
            region, item, price, weight, quantity = quotes[k]
            f.write("%s,%s,%r,food,%r,%r\n" % (region, item, price, weight, quantity))
    with open(os.path.join(folder, "items.csv"), "w") as f:
        f.write("item,heading,reference_quantity\n")
        for item in items:
            f.write("%s,food,%r\n" % (item, reference[item]))
    with open(os.path.join(folder, "expenditure.csv"), "w") as f:
        f.write("region,heading,expenditure\n")
        for region in regions:
            f.write("%s,food,100\n" % region)
    return quotes, reference


def expected_cells(quotes, reference):
    cells = {}
    for region, item, price, weight, quantity in quotes:
        x = np.log(price * reference[item] / quantity)
        cells.setdefault((region, item), ([], []))
        cells[(region, item)][0].append(x)
        cells[(region, item)][1].append(weight)
    out = {}
    for key, (x, w) in cells.items():
        x, w = np.array(x), np.array(w)
        sd = float(np.sqrt(np.cov(x, aweights=w))) if len(x) > 1 else 0.0
        out[key] = (len(x), float(np.average(x, weights=w)), sd, float(w.sum()))
    return out


def main():
    tool = sys.argv[1]
    failures = 0
    for seed in (1, 2, 3):
        with tempfile.TemporaryDirectory() as folder:
            quotes, reference = write_survey(folder, seed)
            run = subprocess.run(
                [tool] + [os.path.join(folder, name) for name in
                          ("prices.csv", "items.csv", "expenditure.csv")],
                capture_output=True, text=True)
            if run.returncode != 0:
                print("tool failed: " + run.stderr)
                return 1
            expected = expected_cells(quotes, reference)
            rows = list(csv.DictReader(io.StringIO(run.stdout)))
            if len(rows) != len(expected):
                print("seed %d: %d cells, numpy has %d" % (seed, len(rows), len(expected)))
                failures += 1
            for row in rows:
                n, mean, sd, weight = expected[(row["region"], row["item"])]
                got = (int(row["num_quotes"]), float(row["log_price"]), float(row["log_sd"]),
                       float(row["weight"]))
                if (got[0] != n or abs(got[1] - mean) > TOLERANCE or abs(got[2] - sd) > TOLERANCE
                        or abs(got[3] - weight) > TOLERANCE * weight):
                    print("seed %d, cell %s x %s: paritas %r, numpy %r" %
                          (seed, row["region"], row["item"], got, (n, mean, sd, weight)))
                    failures += 1
            print("seed %d: %d cells agree with numpy" % (seed, len(rows) - failures))
    return 1 if failures else 0


if __name__ == "__main__":
    sys.exit(main())
