"""Reads the publication workbook of the demo back with openpyxl.

Runs `paritas compute` on config/demo.yaml, a small bootstrap (`paritas
sensitivity --parts bootstrap`) into the same folder, then `paritas publish`
with two decimals, regions sorted by level. The workbook must hold, sheet by
sheet, exactly the figures of parities.csv and sensitivity/bootstrap.csv
rounded here (Python's correctly rounded format(x, '.2f'), computed here),
stored as numbers with the number format 0.00; regions named as in
regions.csv and ordered dearest first at the root; a notes sheet with the
cautions, the sources and the run id of run.json; and the CSV written beside
must carry the same figures as text.

Usage: /usr/bin/python3 publication_openpyxl_check.py PATH_TO_paritas SOURCE_DIR
"""

import csv
import json
import os
import subprocess
import sys
import tempfile

import openpyxl
import pandas as pd

DECIMALS = 2
HEADER_ROW = 4  # 1-based row of the headers; data start below


def run(arguments):
    result = subprocess.run(arguments, capture_output=True, text=True)
    if result.returncode != 0:
        sys.exit(f"{' '.join(arguments)} failed ({result.returncode}):\n{result.stderr}")
    return result.stdout


def rounded(value):
    """The published figure: None for a missing one."""
    if pd.isna(value):
        return None
    return float(format(value, f".{DECIMALS}f"))


def check(condition, message):
    if not condition:
        sys.exit("FAILED: " + message)


def sheet_rows(sheet):
    rows = list(sheet.iter_rows(min_row=HEADER_ROW))
    header = [cell.value for cell in rows[0]]
    return header, rows[1:]


def check_table(sheet, expected, names, what):
    """expected: {(node, region): value}; every numeric cell is compared."""
    header, rows = sheet_rows(sheet)
    check(header[:2] == ["region", "name"], f"{what}: header starts {header[:2]}")
    num_compared = 0
    for row in rows:
        region = row[0].value
        check(row[1].value == names[region], f"{what}: name of {region} is {row[1].value}")
        for column, cell in zip(header[2:], row[2:]):
            want = rounded(expected.get((column, region)))
            if want is None:
                check(cell.value is None, f"{what}: {column}/{region} should be empty, is {cell.value}")
                continue
            check(isinstance(cell.value, (int, float)) and not isinstance(cell.value, bool),
                  f"{what}: {column}/{region} is stored as {type(cell.value).__name__}, not a number")
            check(cell.value == want, f"{what}: {column}/{region} is {cell.value}, expected {want}")
            check(cell.number_format == "0." + "0" * DECIMALS,
                  f"{what}: {column}/{region} has number format {cell.number_format}")
            num_compared += 1
    return [row[0].value for row in rows], num_compared


def main():
    paritas, source = sys.argv[1], sys.argv[2]
    with tempfile.TemporaryDirectory() as folder:
        out = os.path.join(folder, "run")
        config = os.path.join(source, "config", "demo.yaml")
        run([paritas, "compute", config, "--output", out, "--no-report"])
        run([paritas, "sensitivity", config, "--output", out, "--replicates", "20", "--parts",
             "bootstrap"])
        xlsx, levels_csv = os.path.join(folder, "tables.xlsx"), os.path.join(folder, "levels.csv")
        run([paritas, "publish", out, "--xlsx", xlsx, "--csv", levels_csv, "--decimals",
             str(DECIMALS), "--sort", "level"])

        parities = pd.read_csv(os.path.join(out, "parities.csv"), keep_default_na=False,
                               na_values=[""], dtype={"node": str, "region": str})
        bootstrap = pd.read_csv(os.path.join(out, "sensitivity", "bootstrap.csv"),
                                keep_default_na=False, na_values=[""],
                                dtype={"node": str, "region": str})
        regions = pd.read_csv(os.path.join(source, "data", "demo", "regions.csv"), dtype=str)
        names = dict(zip(regions["region"], regions["name"]))
        with open(os.path.join(out, "run.json")) as f:
            run_id = json.load(f)["run_id"]

        levels = {(r.node, r.region): r.parity for r in parities.itertuples()}
        for r in bootstrap.itertuples():
            levels[(r.node + " lower", r.region)] = r.lower
            levels[(r.node + " upper", r.region)] = r.upper
        per_head = {(r.node, r.region): r.real_per_capita_index for r in parities.itertuples()}

        book = openpyxl.load_workbook(xlsx)
        check(book.sheetnames == ["Price levels", "Real per head", "Notes"],
              f"sheets are {book.sheetnames}")
        order, n_levels = check_table(book["Price levels"], levels, names, "Price levels")
        _, n_per_head = check_table(book["Real per head"], per_head, names, "Real per head")
        nodes = list(dict.fromkeys(parities["node"]))
        header, _ = sheet_rows(book["Price levels"])
        expected_header = ["region", "name"]
        for node in nodes:
            expected_header += [node, node + " lower", node + " upper"]
        check(header == expected_header, f"price level header is {header}")
        # Every figure of the files is in the workbook: none dropped.
        want_levels = sum(1 for (column, region), v in levels.items()
                          if column in header and region in names and not pd.isna(v))
        want_per_head = sum(1 for v in per_head.values() if not pd.isna(v))
        check(n_levels == want_levels, f"{n_levels} price level cells, expected {want_levels}")
        check(n_per_head == want_per_head,
              f"{n_per_head} real-per-head cells, expected {want_per_head}")

        # Dearest first at the root; ties by code.
        root = parities[parities["node"] == nodes[0]].set_index("region")["parity"]
        expected_order = sorted(root.index, key=lambda region: (-root[region], region))
        check(order == expected_order, f"regions in order {order}, expected {expected_order}")

        notes = "\n".join(str(c.value) for c in book["Notes"]["A"] if c.value is not None)
        for needle in ["Sampling error", "Item comparability", "Formula choice",
                       "statistical authority", "Run id: " + run_id, "prices: ", "SHA-256",
                       "bootstrap interval over item resamples (20 replicates)"]:
            check(needle in notes, f"the notes lack '{needle}'")

        # The CSV carries the same figures as text with exactly two decimals.
        with open(levels_csv, newline="") as f:
            records = list(csv.reader(f))
        check(records[0] == expected_header, f"CSV header is {records[0]}")
        check([r[0] for r in records[1:]] == order, "CSV rows are not in the workbook's order")
        for record in records[1:]:
            for column, text in zip(records[0][2:], record[2:]):
                want = rounded(levels.get((column, record[0])))
                shown = "" if want is None else format(want, f".{DECIMALS}f")
                check(text == shown, f"CSV {column}/{record[0]} is '{text}', expected '{shown}'")
        print(f"ok: {n_levels} price level and {n_per_head} real-per-head cells, "
              f"{len(order)} regions, {len(nodes)} nodes")


if __name__ == "__main__":
    main()
