#!/usr/bin/env python3
"""Written replicates read back to the bootstrap table: runs `paritas
sensitivity --write-replicates` on the demo survey, reads
sensitivity/replicates.bin (header and values as the README documents them)
with numpy and replicates_key.csv with pandas, and recomputes per node and
region from the replicates alone:
- num_replicates = replicates with a finite ln parity (exactly);
- median, lower and upper = 100 exp(numpy.percentile of the ln parities at
  50, 2.5 and 97.5 %, method 'linear' = Hyndman and Fan type 7), 1e-12
  relative;
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

TOL = 1e-12
REPLICATES = 150


def rel_err(a, b):
    a, b = np.asarray(a, float), np.asarray(b, float)
    both_nan = np.isnan(a) & np.isnan(b)
    err = np.where(both_nan, 0.0, np.abs(a - b) / np.maximum(1.0, np.abs(b)))
    return float(np.nanmax(np.where(np.isnan(err), np.inf, err)))


def main():
    exe, source = sys.argv[1], sys.argv[2]
    out = os.path.join(tempfile.mkdtemp(prefix="paritas-replicates-"), "out")
    subprocess.run([exe, "sensitivity", os.path.join(source, "config", "demo.yaml"), "--output",
                    out, "--parts", "bootstrap", "--replicates", str(REPLICATES), "--seed", "5",
                    "--write-replicates"], check=True, stdout=subprocess.DEVNULL,
                   stderr=subprocess.DEVNULL, stdin=subprocess.DEVNULL)
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
    checked = 0
    for row in table.itertuples(index=False):
        lp = values[node_index[row.node], region_index[row.region]]
        lp = lp[np.isfinite(lp)]
        if lp.size != row.num_replicates:
            sys.exit("replicates_readback_check: %s/%s: %d finite replicates, the table says %d"
                     % (row.node, row.region, lp.size, row.num_replicates))
        if lp.size < 2:
            continue
        lower, median, upper = 100.0 * np.exp(np.percentile(lp, [2.5, 50.0, 97.5]))
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
    print("replicates_readback_check: OK: %d nodes x %d regions x %d replicates; %d rows agree "
          "to %.1e" % (num_nodes, num_regions, num_b, checked, worst))


if __name__ == "__main__":
    main()
