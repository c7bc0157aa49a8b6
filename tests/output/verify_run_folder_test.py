#!/usr/bin/env python3
"""Checks verify_run_folder.py, the kill test's judge: it accepts one complete
run, with a killed run's staging folder left inside it (the next run removes
that), and refuses a stray file, another run's file, and a staging folder of a
process still running.

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
        # A process that has ended: its id is free.
        ended = subprocess.Popen(["true"])
        ended.wait()
        left = os.path.join(out, f".sensitivity.paritas-staging-{ended.pid}-0123abcd")
        os.makedirs(left)
        with open(os.path.join(left, "bootstrap.csv"), "w") as f:
            f.write("node,region\n")
        expect("a killed run's staging folder", True, out)
        live = os.path.join(out, f".sensitivity.paritas-staging-{os.getpid()}-0123abcd")
        shutil.copytree(left, live)
        expect("a live run's staging folder", False, out, "bootstrap.csv: not written by run")
        shutil.rmtree(live)
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
