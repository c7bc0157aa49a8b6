#!/usr/bin/env python3
"""Checks that a paritas output folder holds exactly one complete run.

Every file listed in run.json's "outputs" must exist with the listed size and
SHA-256, and no other file may be there; a sensitivity/ subfolder is a run of
its own and is checked the same way. The staging folder a killed
`sensitivity` left (".sensitivity.paritas-staging-PID-..." at the top, its
process gone) is not part of the run: `sensitivity` stages beside its target,
inside the folder, and the next run removes it (README, "One run, one
folder"); any other, or one of a live process, is reported. Prints the run id and exits 0, or prints what is wrong and exits 1.
Standard library only.

Usage: verify_run_folder.py FOLDER
"""
import hashlib
import json
import os
import re
import sys

# The staging folder of `sensitivity`, which sits beside its sensitivity/
# target, inside the run folder.
SENSITIVITY_STAGING = re.compile(r"^\.sensitivity\.paritas-staging-(\d+)-")


def left_by_a_killed_run(name):
    """Whether `name` is sensitivity's staging folder and its process no longer
    runs (as the program judges it: an id of 0 or one no process can have)."""
    match = SENSITIVITY_STAGING.match(name)
    if not match:
        return False
    pid = int(match.group(1))
    if pid <= 0:
        return True
    try:
        os.kill(pid, 0)
    except (ProcessLookupError, OverflowError, ValueError):
        return True
    except PermissionError:
        return False  # a process of another user has that id
    return False


def check(folder, problems):
    record_path = os.path.join(folder, "run.json")
    try:
        with open(record_path, "rb") as f:
            record = json.loads(f.read().decode("utf-8"))
    except (OSError, ValueError) as e:
        problems.append(f"{record_path}: {e}")
        return None
    listed = {"run.json"}
    for entry in record.get("outputs", []):
        if not isinstance(entry, dict):
            problems.append(f"{record_path}: outputs without digests")
            return record.get("run_id")
        path = entry["path"]
        listed.add(path)
        if path == "run.json":
            continue
        full = os.path.join(folder, path)
        try:
            with open(full, "rb") as f:
                data = f.read()
        except OSError as e:
            problems.append(f"{full}: listed in run.json but {e.strerror}")
            continue
        if len(data) != entry["bytes"] or hashlib.sha256(data).hexdigest() != entry["sha256"]:
            problems.append(f"{full}: differs from run.json (another run's file)")
    for root, dirs, files in os.walk(folder):
        rel_root = os.path.relpath(root, folder)
        if rel_root == ".":
            dirs[:] = [d for d in dirs if not left_by_a_killed_run(d)]
        if rel_root == "sensitivity" or rel_root.startswith("sensitivity" + os.sep):
            continue
        for name in files:
            rel = os.path.normpath(os.path.join(rel_root, name))
            if rel not in listed:
                problems.append(f"{os.path.join(folder, rel)}: not written by run {record.get('run_id')}")
    if os.path.isdir(os.path.join(folder, "sensitivity")) and folder == sys.argv[1]:
        check(os.path.join(folder, "sensitivity"), problems)
    return record.get("run_id")


def main():
    if len(sys.argv) != 2:
        print(__doc__.strip().splitlines()[-1], file=sys.stderr)
        return 2
    problems = []
    run_id = check(sys.argv[1], problems)
    if problems:
        print("\n".join(problems))
        return 1
    print(run_id)
    return 0


if __name__ == "__main__":
    sys.exit(main())
