#!/usr/bin/env python3
"""Numbers that read back exactly: recomputes from the files `paritas compute`
writes on the demo survey what the run computed, and matches it to 1e-12
relative.

- real_expenditure = expenditure / (parity / 100) on every row of parities.csv;
- every parity matrix cell (a, b) = 100 parity(b) / parity(a) (matrix/*.csv);
- the root's GEKS-Fisher parities from bilateral/<root>.csv: with every pair
  present GEKS is ln P_b = mean_a ln F_ab (Gini 1931; Eltetö and Köves 1964;
  Szulc 1964), then normalised to a geometric mean of 100 as the run's
  reference "mean" does.
Reads with pandas and numpy (Debian's python3-pandas, python3-numpy).

Usage: roundtrip_check.py PARITAS_EXE SOURCE_DIR
"""
import os
import subprocess
import sys
import tempfile

import numpy as np
import pandas as pd

TOL = 1e-12


def rel_err(a, b):
    a, b = np.asarray(a, float), np.asarray(b, float)
    return np.max(np.abs(a - b) / np.maximum(1.0, np.abs(b)))


def main():
    exe, source = sys.argv[1], sys.argv[2]
    out = os.path.join(tempfile.mkdtemp(prefix="paritas-roundtrip-"), "out")
    subprocess.run([exe, "compute", os.path.join(source, "config", "demo.yaml"), "--output", out,
                    "--matrices", "all", "--no-report"], check=True, stdout=subprocess.DEVNULL,
                   stdin=subprocess.DEVNULL)
    failures = []
    par = pd.read_csv(os.path.join(out, "parities.csv"), keep_default_na=False, na_values=[""],
                      dtype={"node": str, "region": str})
    rows = par.dropna(subset=["parity", "expenditure", "real_expenditure"])
    if len(rows) < 100:
        failures.append(f"only {len(rows)} rows with real expenditure")
    err = rel_err(rows["real_expenditure"], rows["expenditure"] / (rows["parity"] / 100.0))
    if err > TOL:
        failures.append(f"real_expenditure differs from expenditure / (parity / 100) by {err:.3g}")

    nodes = par["node"].unique()
    checked = 0
    for node in nodes:
        path = os.path.join(out, "matrix", node + ".csv")
        if not os.path.exists(path):
            failures.append(f"no matrix for {node}")
            continue
        m = pd.read_csv(path, index_col=0, keep_default_na=False, dtype={"region": str})
        p = par[par["node"] == node].set_index("region")["parity"]
        for a in m.index:
            expected = 100.0 * p[m.columns].to_numpy() / p[str(a)]
            err = rel_err(m.loc[a].to_numpy(), expected)
            if err > TOL:
                failures.append(f"matrix/{node}.csv row {a} differs from the parities by {err:.3g}")
            checked += 1
    if checked == 0:
        failures.append("no matrix row checked")

    root = nodes[0]
    bil = pd.read_csv(os.path.join(out, "bilateral", root + ".csv"), keep_default_na=False,
                      dtype={"from": str, "to": str})
    regions = list(par[par["node"] == root]["region"])
    index = {r: k for k, r in enumerate(regions)}
    n = len(regions)
    log_f = np.zeros((n, n))
    for a, b, f in zip(bil["from"], bil["to"], bil["fisher"]):
        log_f[index[a], index[b]] = np.log(f)
    log_p = log_f.mean(axis=0)
    geks = 100.0 * np.exp(log_p - log_p.mean())
    err = rel_err(geks, par[par["node"] == root]["parity"].to_numpy())
    if err > TOL:
        failures.append(f"GEKS from bilateral/{root}.csv differs from parities.csv by {err:.3g}")
    if failures:
        print("\n".join(failures))
        return 1
    print(f"round trip exact to {TOL}: {len(rows)} rows, {checked} matrix rows, GEKS of {n} regions")
    return 0


if __name__ == "__main__":
    sys.exit(main())
