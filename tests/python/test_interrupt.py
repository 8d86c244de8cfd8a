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
    try:
        with pool:
            f([1.0])
    except KeyboardInterrupt:
        print("interrupted", flush=True)
        sys.exit(3)
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
    out, err = p.communicate(timeout=20)
    assert time.time() - t0 < 5, "Ctrl-C took more than 5 s"
    if mode == "with":
        assert p.returncode == 3 and "interrupted" in out, (p.returncode, out, err)
    else:
        assert "KeyboardInterrupt" in err and p.returncode != 0, (p.returncode, err)
    deadline = time.time() + 5
    while time.time() < deadline and any(alive(k) for k in kids):
        time.sleep(0.1)
    left = [k for k in kids if alive(k)]
    for k in left:  # do not leave them behind for the next test
        os.kill(k, signal.SIGKILL)
    assert not left, f"still alive after Ctrl-C: {left}"
