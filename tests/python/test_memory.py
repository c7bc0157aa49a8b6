"""Memory is released after each call: 100 computes of the demo leave the
resident set where it was after the first ten."""

import gc

import paritas
from conftest import DEMO_CONFIG


def resident_kib():
    with open("/proc/self/status", encoding="ascii") as f:
        for line in f:
            if line.startswith("VmRSS:"):
                return int(line.split()[1])
    raise AssertionError("no VmRSS")


def test_no_growth_over_100_computes():
    for _ in range(10):  # warm up: allocator pools, thread stacks, imports
        paritas.compute(DEMO_CONFIG, report=False)
    gc.collect()
    before = resident_kib()
    for _ in range(100):
        run = paritas.compute(DEMO_CONFIG, report=False)
        del run
    gc.collect()
    grown = resident_kib() - before
    # A leak of one demo's results (parities, files: about 1 MiB) per call
    # would add 100 MiB; allow 8 MiB of allocator noise.
    assert grown < 8 * 1024, f"resident set grew by {grown} KiB"
