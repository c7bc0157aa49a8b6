"""Ctrl-C stops a long sensitivity run: the library checks the cancellation
flag before each bootstrap replicate, the module raises KeyboardInterrupt."""

import os
import signal
import subprocess
import sys
import time

from conftest import DEMO_CONFIG

# Python's own Ctrl-C handler, as in an interactive session (a shell that
# starts the tests in the background may have left SIGINT ignored).
SCRIPT = f"""
import signal, sys, time, paritas
signal.signal(signal.SIGINT, signal.default_int_handler)
print("started", flush=True)
start = time.monotonic()
try:
    paritas.sensitivity({DEMO_CONFIG!r}, replicates=100000, parts=["bootstrap"], threads=1)
except KeyboardInterrupt:
    print("interrupted after %.1f s" % (time.monotonic() - start), flush=True)
    sys.exit(42)
print("finished", flush=True)
"""


def test_long_sensitivity_stops_on_sigint():
    child = subprocess.Popen([sys.executable, "-c", SCRIPT], stdout=subprocess.PIPE,
                             stderr=subprocess.PIPE, text=True, env=os.environ)
    assert child.stdout.readline().strip() == "started"
    time.sleep(3)  # well into the bootstrap (100,000 replicates take minutes)
    sent = time.monotonic()
    child.send_signal(signal.SIGINT)
    out, err = child.communicate(timeout=60)
    stopped_after = time.monotonic() - sent
    assert child.returncode == 42, err
    assert out.startswith("interrupted after")
    # One replicate of the demo takes milliseconds: the stop is prompt.
    assert stopped_after < 10, stopped_after
