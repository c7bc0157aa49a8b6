#!/usr/bin/env python3
"""Checks verify_run_folder.py, the kill test's judge: it accepts one complete
run, with a killed sensitivity run's staging folder left inside it (the next
run removes that), and refuses a stray file, another run's file, a staging
folder of a process still running, and any other staging folder.

Usage: verify_run_folder_test.py PARITAS_EXE CONFIG
"""
import os
import shutil
import subprocess
import sys
import tempfile

HERE = os.path.dirname(os.path.abspath(__file__))
VERIFY = [sys.executable, os.path.join(HERE, "verify_run_folder.py")]


def verdict(folder):
    result = subprocess.run(VERIFY + [folder], capture_output=True, text=True)
    return result.returncode, result.stdout


def main():
    exe, config = sys.argv[1], sys.argv[2]
    failures = []

    def expect(what, ok, folder, text=None):
        code, out = verdict(folder)
        if (code == 0) != ok or (text is not None and text not in out):
            failures.append(f"{what}: exit {code}, output {out!r}")

    with tempfile.TemporaryDirectory() as work:
        out = os.path.join(work, "out")
        subprocess.run([exe, "compute", config, "--output", out, "--no-report"], check=True,
                       stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
        expect("a complete run", True, out)
        # An id above any pid_max (2^22 at most): no process has it.
        left = os.path.join(out, ".sensitivity.paritas-staging-999999999-0123abcd")
        os.makedirs(left)
        with open(os.path.join(left, "bootstrap.csv"), "w") as f:
            f.write("node,region\n")
        expect("a killed run's staging folder", True, out)
        live = os.path.join(out, f".sensitivity.paritas-staging-{os.getpid()}-0123abcd")
        shutil.copytree(left, live)
        expect("a live run's staging folder", False, out, "bootstrap.csv: not written by run")
        shutil.rmtree(live)
        # Another staging name, or one below the top, is not passed over.
        other = os.path.join(out, ".out.paritas-staging-999999999-0123abcd")
        shutil.copytree(left, other)
        expect("another command's staging folder", False, out, "bootstrap.csv: not written by run")
        shutil.rmtree(other)
        deeper = os.path.join(out, "tree", ".sensitivity.paritas-staging-999999999-0123abcd")
        shutil.copytree(left, deeper)
        expect("a staging folder below the top", False, out, "bootstrap.csv: not written by run")
        shutil.rmtree(os.path.join(out, "tree"))
        # An id no process can have (beyond the C long) is an ended run's.
        huge = os.path.join(out, ".sensitivity.paritas-staging-99999999999999999999-0123abcd")
        shutil.copytree(left, huge)
        expect("an id beyond any process", True, out)
        shutil.rmtree(huge)
        with open(os.path.join(out, "notes.txt"), "w") as f:
            f.write("x\n")
        expect("a stray file", False, out, "notes.txt: not written by run")
        os.remove(os.path.join(out, "notes.txt"))
        with open(os.path.join(out, "warnings.csv"), "a") as f:
            f.write("x\n")
        expect("another run's file", False, out, "warnings.csv: differs from run.json")
    for failure in failures:
        print(failure)
    return 1 if failures else 0


if __name__ == "__main__":
    sys.exit(main())
