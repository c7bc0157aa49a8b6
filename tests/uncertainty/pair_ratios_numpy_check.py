#!/usr/bin/env python3
"""Pair intervals against the written replicates: runs `paritas sensitivity
--write-replicates --level 90` on the demo survey, reads replicates.bin with
numpy and recomputes every row of pair_ratios.csv independently:
- num_replicates = replicates in which both regions have a finite ln parity;
- lower, upper = exp(numpy.percentile of ln P_a - ln P_b over them at p and
  1 - p, method 'linear' = Hyndman and Fan type 7), 1e-12 relative, with the
  expanded interval's level p = scipy's norm.cdf(-k t^-1(0.95, nu)), nu the
  smaller of the two regions' interval_df in bootstrap.csv (empty = none:
  norm.ppf) and k the larger interval_scale; the row's interval_df and
  interval_scale must be those;
- ratio = P_a / P_b from bootstrap.csv's full-sample parities, 1e-12;
- excludes_one and verdict from lower > 1 (dearer) or upper < 1 (cheaper).
Checks the nodes covered (the root and the root's aggregate children) and
that each holds every pair of the 16 demo regions once (120 rows). Then
runs `paritas pair` for a pair at the root (read from pair_ratios.csv) and
at a basic heading (computed from replicates.bin) and checks the printed
interval (6 decimals) against numpy, to the ratio P_to / P_from.

Usage: pair_ratios_numpy_check.py PARITAS_EXE SOURCE_DIR
"""
import os
import re
import shutil
import struct
import subprocess
import sys
import tempfile

import numpy as np
import pandas as pd
from scipy import optimize, stats

TOL = 1e-12
REPLICATES = 120


def fail(message):
    sys.exit("pair_ratios_numpy_check: " + message)


def close(a, b):
    return abs(a - b) <= TOL * max(1.0, abs(b))


def t_quantile(q, df):
    """Student's t quantile solved on scipy's t.cdf (its t.ppf is good to
    about 1e-11 in p only, too coarse for a 1e-12 comparison)."""
    return optimize.brentq(lambda x: stats.t.cdf(x, df) - q, 0.0, 1e4, xtol=1e-15, rtol=1e-15)


def lower_level(df, scale, level=0.90):
    """The expanded percentile interval's lower level (Hesterberg 2015)."""
    q = (1.0 + level) / 2.0
    t = stats.norm.ppf(q) if np.isnan(df) else t_quantile(q, df)
    return float(stats.norm.cdf(-scale * t))


def pair_expansion(expansion, node, a, b):
    """nu = min of the two (NaN = none), k = max: bootstrap.csv's columns."""
    df_a, k_a = expansion[(node, a)]
    df_b, k_b = expansion[(node, b)]
    dfs = [d for d in (df_a, df_b) if not np.isnan(d)]
    return (min(dfs) if dfs else np.nan), max(k_a, k_b)


def same(a, b):
    return (np.isnan(a) and np.isnan(b)) or close(a, b)


def main():
    exe, source = sys.argv[1], sys.argv[2]
    tmp = tempfile.mkdtemp(prefix="paritas-pairs-")
    out = os.path.join(tmp, "out")
    config = os.path.join(source, "config", "demo.yaml")
    subprocess.run([exe, "sensitivity", config, "--output", out, "--parts", "bootstrap",
                    "--replicates", str(REPLICATES), "--seed", "3", "--level", "90",
                    "--write-replicates"], check=True, stdout=subprocess.DEVNULL,
                   stderr=subprocess.DEVNULL, stdin=subprocess.DEVNULL)
    folder = os.path.join(out, "sensitivity")
    raw = open(os.path.join(folder, "replicates.bin"), "rb").read()
    num_nodes, num_regions, num_b, _ = struct.unpack("<4I", raw[8:24])
    lp = np.frombuffer(raw, "<f8", offset=24).reshape(num_nodes, num_regions, num_b)
    key = pd.read_csv(os.path.join(folder, "replicates_key.csv"), keep_default_na=False,
                      dtype={"code": str})
    node_index = {c: int(i) for c, i in zip(key[key.kind == "node"].code,
                                             key[key.kind == "node"]["index"])}
    region_index = {c: int(i) for c, i in zip(key[key.kind == "region"].code,
                                               key[key.kind == "region"]["index"])}
    boot = pd.read_csv(os.path.join(folder, "bootstrap.csv"), keep_default_na=False,
                       dtype={"node": str, "region": str})
    parity = {(n, r): float(p) for n, r, p in zip(boot.node, boot.region, boot.parity)}
    expansion = {(n, r): (float(d) if d != "" else np.nan, float(k))
                 for n, r, d, k in zip(boot.node, boot.region, boot.interval_df,
                                       boot.interval_scale)}
    if not any(not np.isnan(d) for d, _ in expansion.values()):
        fail("bootstrap.csv expands no interval (every interval_df empty)")
    pairs = pd.read_csv(os.path.join(folder, "pair_ratios.csv"), keep_default_na=False,
                        dtype={"node": str, "region_a": str, "region_b": str,
                               "excludes_one": str, "verdict": str, "interval_df": str})
    nodes = list(dict.fromkeys(pairs.node))
    want_nodes = ["all", "food", "clothing", "housing", "utilities", "health", "transport",
                  "communication", "recreation", "restaurants_hotels"]
    if nodes != want_nodes:
        fail("nodes %r, expected %r" % (nodes, want_nodes))
    for node in nodes:
        rows = pairs[pairs.node == node]
        seen = {frozenset((a, b)) for a, b in zip(rows.region_a, rows.region_b)}
        if len(rows) != num_regions * (num_regions - 1) // 2 or len(seen) != len(rows):
            fail("node %s has %d rows (%d distinct pairs) for %d regions"
                 % (node, len(rows), len(seen), num_regions))
    for row in pairs.itertuples():
        a = lp[node_index[row.node], region_index[row.region_a]]
        b = lp[node_index[row.node], region_index[row.region_b]]
        both = np.isfinite(a) & np.isfinite(b)
        d = a[both] - b[both]
        df, scale = pair_expansion(expansion, row.node, row.region_a, row.region_b)
        p = lower_level(df, scale)
        lower, upper = np.exp(np.percentile(d, [100 * p, 100 * (1 - p)], method="linear"))
        row_df = float(row.interval_df) if row.interval_df != "" else np.nan
        if not same(row_df, df) or not close(float(row.interval_scale), scale):
            fail("%s %s/%s: interval_df %s, interval_scale %s; bootstrap.csv gives %r, %r"
                 % (row.node, row.region_a, row.region_b, row.interval_df, row.interval_scale,
                    df, scale))
        ratio = parity[(row.node, row.region_a)] / parity[(row.node, row.region_b)]
        verdict = "dearer" if lower > 1 else "cheaper" if upper < 1 else "indistinguishable"
        excludes = "yes" if verdict != "indistinguishable" else "no"
        if (int(row.num_replicates) != int(both.sum()) or not close(float(row.lower), lower)
                or not close(float(row.upper), upper) or not close(float(row.ratio), ratio)
                or row.verdict != verdict or row.excludes_one != excludes):
            fail("%s %s/%s: file %s %s %s %s %s %s, numpy %r %r %r %d %s %s"
                 % (row.node, row.region_a, row.region_b, row.ratio, row.lower, row.upper,
                    row.num_replicates, row.excludes_one, row.verdict, ratio, lower, upper,
                    both.sum(), excludes, verdict))
    # `pair` with the sensitivity results of the same run: output beside them.
    for node, frm, to, source_file in (("all", "cap", "har", "pair_ratios.csv"),
                                       ("bread_cereals", "har", "cap", "replicates.bin")):
        text = subprocess.run([exe, "pair", config, "--output", out, "--from", frm, "--to", to,
                               "--node", node], check=True, capture_output=True, text=True,
                              stdin=subprocess.DEVNULL).stdout
        found = re.search(r"90 % interval of the transitive ratio: ([0-9.]+) - ([0-9.]+)\n"
                          r"  excludes 1: (yes|no)", text)
        if not found or source_file not in text:
            fail("pair %s %s->%s printed no interval from %s:\n%s" % (node, frm, to,
                                                                     source_file, text))
        a = lp[node_index[node], region_index[to]]
        b = lp[node_index[node], region_index[frm]]
        both = np.isfinite(a) & np.isfinite(b)
        p = lower_level(*pair_expansion(expansion, node, to, frm))
        lower, upper = np.exp(np.percentile(a[both] - b[both], [100 * p, 100 * (1 - p)],
                                            method="linear"))
        if found.group(1) != "%.6f" % lower or found.group(2) != "%.6f" % upper:
            fail("pair %s %s->%s printed %s - %s, numpy %.6f - %.6f"
                 % (node, frm, to, found.group(1), found.group(2), lower, upper))
        if found.group(3) != ("yes" if lower > 1 or upper < 1 else "no"):
            fail("pair %s %s->%s printed excludes 1: %s for %.6f - %.6f"
                 % (node, frm, to, found.group(3), lower, upper))
    shutil.rmtree(tmp)
    print("pair_ratios_numpy_check: %d pair rows and 2 pair commands agree with numpy"
          % len(pairs))


if __name__ == "__main__":
    main()
