#!/usr/bin/env python3
"""Written replicates read back to the bootstrap table: runs `paritas
sensitivity --write-replicates` on the demo survey, reads
sensitivity/replicates.bin (header and values as the README documents them)
with numpy and replicates_key.csv with pandas, and recomputes per node and
region from the replicates alone:
- num_replicates = replicates with a finite ln parity (exactly);
- median, lower and upper = 100 exp(numpy.percentile of the ln parities at
  50 %, p and 1 - p, method 'linear' = Hyndman and Fan type 7), 1e-12
  relative, where p is the expanded interval's lower level
  norm.cdf(-k t^-1(0.975, nu))  (scipy, t^-1 by brentq on t.cdf) from the row's interval_df nu (empty:
  norm.ppf) and interval_scale k; and, run again with --interval percentile,
  p = 2.5 %;
- log_se = their standard deviation with ddof 1, 1e-12 relative.
Also checks the file's size against its header.

Usage: replicates_readback_check.py PARITAS_EXE SOURCE_DIR
"""
import os
import struct
import subprocess
import sys
import tempfile

import numpy as np
import pandas as pd
from scipy import optimize, stats

TOL = 1e-12
REPLICATES = 150


def rel_err(a, b):
    a, b = np.asarray(a, float), np.asarray(b, float)
    both_nan = np.isnan(a) & np.isnan(b)
    err = np.where(both_nan, 0.0, np.abs(a - b) / np.maximum(1.0, np.abs(b)))
    return float(np.nanmax(np.where(np.isnan(err), np.inf, err)))


def t_quantile(q, df):
    """Student's t quantile solved on scipy's t.cdf (its t.ppf is good to
    about 1e-11 in p only, too coarse for a 1e-12 comparison)."""
    return optimize.brentq(lambda x: stats.t.cdf(x, df) - q, 0.0, 1e4, xtol=1e-15, rtol=1e-15)


def lower_level(df, scale, interval, level=0.95):
    """The interval's lower quantile level: expanded (Hesterberg 2015) or plain."""
    if interval == "percentile":
        return (1.0 - level) / 2.0
    q = (1.0 + level) / 2.0
    t = stats.norm.ppf(q) if np.isnan(df) else t_quantile(q, df)
    return float(stats.norm.cdf(-scale * t))


def check_run(exe, source, interval):
    out = os.path.join(tempfile.mkdtemp(prefix="paritas-replicates-"), "out")
    subprocess.run([exe, "sensitivity", os.path.join(source, "config", "demo.yaml"), "--output",
                    out, "--parts", "bootstrap", "--replicates", str(REPLICATES), "--seed", "5",
                    "--write-replicates", "--interval", interval], check=True,
                   stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, stdin=subprocess.DEVNULL)
    folder = os.path.join(out, "sensitivity")
    with open(os.path.join(folder, "replicates.bin"), "rb") as f:
        data = f.read()
    if data[:8] != b"PRTSREP1":
        sys.exit("replicates_readback_check: bad magic %r" % data[:8])
    num_nodes, num_regions, num_b, reserved = struct.unpack("<4I", data[8:24])
    expected_size = 24 + 8 * num_nodes * num_regions * num_b
    if len(data) != expected_size or reserved != 0 or num_b != REPLICATES:
        sys.exit("replicates_readback_check: header %d x %d x %d (reserved %d) does not match "
                 "the file size %d" % (num_nodes, num_regions, num_b, reserved, len(data)))
    values = np.frombuffer(data, dtype="<f8", offset=24).reshape(num_nodes, num_regions, num_b)

    key = pd.read_csv(os.path.join(folder, "replicates_key.csv"), keep_default_na=False,
                      dtype={"code": str})
    nodes = key[key["kind"] == "node"].sort_values("index")["code"].tolist()
    regions = key[key["kind"] == "region"].sort_values("index")["code"].tolist()
    if len(nodes) != num_nodes or len(regions) != num_regions:
        sys.exit("replicates_readback_check: the key lists %d nodes and %d regions, the header "
                 "%d and %d" % (len(nodes), len(regions), num_nodes, num_regions))

    table = pd.read_csv(os.path.join(folder, "bootstrap.csv"), keep_default_na=False,
                        na_values=[""], dtype={"node": str, "region": str})
    node_index = {code: n for n, code in enumerate(nodes)}
    region_index = {code: r for r, code in enumerate(regions)}
    worst = 0.0
    checked = expanded = 0
    for row in table.itertuples(index=False):
        lp = values[node_index[row.node], region_index[row.region]]
        lp = lp[np.isfinite(lp)]
        if lp.size != row.num_replicates:
            sys.exit("replicates_readback_check: %s/%s: %d finite replicates, the table says %d"
                     % (row.node, row.region, lp.size, row.num_replicates))
        if lp.size < 2:
            continue
        df = float(row.interval_df)  # NaN when empty
        if interval == "percentile" and (not np.isnan(df) or row.interval_scale != 1.0):
            sys.exit("replicates_readback_check: %s/%s: the percentile interval has interval_df "
                     "%r, interval_scale %r" % (row.node, row.region, df, row.interval_scale))
        expanded += not np.isnan(df)
        p = lower_level(df, row.interval_scale, interval)
        lower, median, upper = 100.0 * np.exp(np.percentile(lp, [100 * p, 50.0, 100 * (1 - p)]))
        for name, ours, theirs in (("median", row.median, median), ("lower", row.lower, lower),
                                   ("upper", row.upper, upper),
                                   ("log_se", row.log_se, np.std(lp, ddof=1))):
            err = rel_err(ours, theirs)
            if err > TOL:
                sys.exit("replicates_readback_check: %s/%s: %s is %.17g in bootstrap.csv, %.17g "
                         "from replicates.bin" % (row.node, row.region, name, ours, theirs))
            worst = max(worst, err)
        checked += 1
    if checked < 50:
        sys.exit("replicates_readback_check: only %d node x region rows checked" % checked)
    if interval == "expanded" and expanded < checked // 2:
        sys.exit("replicates_readback_check: only %d of %d rows expanded" % (expanded, checked))
    print("replicates_readback_check: OK (%s): %d nodes x %d regions x %d replicates; %d rows "
          "(%d expanded) agree to %.1e" % (interval, num_nodes, num_regions, num_b, checked,
                                           expanded, worst))


def main():
    exe, source = sys.argv[1], sys.argv[2]
    for interval in ("expanded", "percentile"):
        check_run(exe, source, interval)


if __name__ == "__main__":
    main()
