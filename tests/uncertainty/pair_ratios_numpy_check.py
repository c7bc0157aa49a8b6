#!/usr/bin/env python3
"""Pair intervals against the written replicates: runs `paritas sensitivity
--write-replicates --level 90` on the demo survey, reads replicates.bin with
numpy and recomputes every row of pair_ratios.csv independently:
- num_replicates = replicates in which both regions have a finite ln parity;
- lower, upper = exp(numpy.percentile of ln P_a - ln P_b over them at 5 and
  95 %, method 'linear' = Hyndman and Fan type 7), 1e-12 relative;
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

TOL = 1e-12
REPLICATES = 120


def fail(message):
    sys.exit("pair_ratios_numpy_check: " + message)


def close(a, b):
    return abs(a - b) <= TOL * max(1.0, abs(b))


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
    pairs = pd.read_csv(os.path.join(folder, "pair_ratios.csv"), keep_default_na=False,
                        dtype={"node": str, "region_a": str, "region_b": str,
                               "excludes_one": str, "verdict": str})
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
        lower, upper = np.exp(np.percentile(d, [5.0, 95.0], method="linear"))
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
        lower, upper = np.exp(np.percentile(a[both] - b[both], [5.0, 95.0], method="linear"))
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
