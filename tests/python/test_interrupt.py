"""Ctrl-C during a long blocking evaluation: the process ends cleanly with
KeyboardInterrupt, and the embedded pool's processes it started are gone a
few seconds later (found as its descendants through /proc before the signal)."""
import os
import signal
import subprocess
import time

import pytest

from conftest import PYTHON, child_env
from test_resume import alive, descendants

CHILD = r'''
import sys
import fitfarm
mode = sys.argv[1]
pool = fitfarm.Pool(slots=1)
f = pool.function("spin", params={"ms": 120000}, objective=0)
print("ready", flush=True)
if mode == "with":
    with pool:
        try:
            f([1.0])
        except KeyboardInterrupt:
            print("interrupted", flush=True)
            raise SystemExit(3)  # leaving the with-block destroys the client
else:
    f([1.0])   # uncaught: atexit destroys the client
'''


@pytest.mark.parametrize("mode", ["with", "atexit"])
def test_sigint_ends_cleanly_and_stops_the_pool(tmp_path, mode):
    script = tmp_path / "long.py"
    script.write_text(CHILD)
    p = subprocess.Popen([PYTHON, str(script), mode], stdout=subprocess.PIPE,
                         stderr=subprocess.PIPE, text=True, env=child_env())
    assert p.stdout.readline().strip() == "ready", p.stderr.read()
    time.sleep(1.0)  # the evaluation is running
    kids = descendants(p.pid)
    assert kids, "the embedded pool started no process"
    t0 = time.time()
    p.send_signal(signal.SIGINT)
    if mode == "with":
        # The wait is sliced (100 ms): the KeyboardInterrupt comes at once.
        assert p.stdout.readline().strip() == "interrupted"
        assert time.time() - t0 < 1.0, "KeyboardInterrupt took more than 1 s"
    out, err = p.communicate(timeout=30)
    # Destroying the client stops the pool; libfitfarm gives a worker that is
    # still evaluating up to 5 s (POOL_STOP_MS in client/lib/pool.c) to drain
    # before it kills it, so the whole exit may take that long.
    assert time.time() - t0 < 8, "Ctrl-C took more than 8 s to end the process"
    if mode == "with":
        assert p.returncode == 3, (p.returncode, out, err)
    else:
        assert "KeyboardInterrupt" in err and p.returncode != 0, (p.returncode, err)
    deadline = time.time() + 5
    while time.time() < deadline and any(alive(k) for k in kids):
        time.sleep(0.1)
    left = [k for k in kids if alive(k)]
    for k in left:  # do not leave them behind for the next test
        os.kill(k, signal.SIGKILL)
    assert not left, f"still alive after Ctrl-C: {left}"
