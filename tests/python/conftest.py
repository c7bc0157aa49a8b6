"""Shared fixtures of the Python module's tests: the command line built beside
the module (PARITAS_CLI), the source tree (PARITAS_SOURCE_DIR) and one
command-line run of the demo that the tests compare with."""

import os
import subprocess

import pytest

SOURCE_DIR = os.environ.get("PARITAS_SOURCE_DIR",
                            os.path.join(os.path.dirname(__file__), "..", ".."))
CLI = os.environ.get("PARITAS_CLI", os.path.join(SOURCE_DIR, "build", "paritas"))
DEMO_CONFIG = os.path.join(SOURCE_DIR, "config", "demo.yaml")
DEMO_DATA = os.path.join(SOURCE_DIR, "data", "demo")


def run_cli(*args, cwd=None):
    """Runs the command line; returns (exit code, stdout, stderr)."""
    done = subprocess.run([CLI, *args], capture_output=True, text=True, cwd=cwd,
                          stdin=subprocess.DEVNULL, timeout=600)
    return done.returncode, done.stdout, done.stderr


def read_bytes(path):
    with open(path, "rb") as f:
        return f.read()


@pytest.fixture(scope="session")
def demo_cli_run(tmp_path_factory):
    """The command line's compute of the demo, every matrix written."""
    out = tmp_path_factory.mktemp("cli") / "out"
    code, _, err = run_cli("compute", DEMO_CONFIG, "--output", str(out), "--matrices", "all")
    assert code == 0, err
    return out
