"""Memory is released after each call: 100 computes of the demo leave the
resident set where it was after the first ten, arrays over the library's
memory included."""

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
    kept = []
    for _ in range(100):
        run = paritas.compute(DEMO_CONFIG, report=False)
        # The arrays over the library's memory, kept past their result:
        # freed with the last of them (the capsule), not with the result.
        kept.append((run.arrays.parity, run.matrices["all"]))
        del run
        if len(kept) > 3:
            kept.pop(0)
    del kept
    gc.collect()
    grown = resident_kib() - before
    # A leak of one demo's results (parities, files: about 1 MiB) per call
    # would add 100 MiB; allow 8 MiB of allocator noise.
    assert grown < 8 * 1024, f"resident set grew by {grown} KiB"


def test_only_the_arrays_hold_the_library_memory():
    # The capsule owning a run's numbers is referenced by its arrays alone:
    # once the result and every array are gone, only the reference taken
    # here is left (getrefcount counts its own argument too), so the last
    # array's release frees the library's memory.
    import sys
    run = paritas.compute(DEMO_CONFIG, report=False, matrices="all")
    owner = run.arrays.parity.base
    assert sys.getrefcount(owner) > 2
    del run
    gc.collect()
    assert sys.getrefcount(owner) == 2
