"""An exec program (protocol in worker/exec_plugin.h) for test_sandbox.py
that leaves helpers behind: each request's genome[0] selects
  0 fork a helper that calls os.setsid() and ignores SIGTERM; this program,
    its parent, lives on (the helper must die with it)
  1 double fork: the helper's parent exits at once, the helper calls
    os.setsid() (an orphan: it must die at the end of the evaluation)
Every helper appends its process id to the file named by argv[1] before the
answer is written."""
import json
import os
import signal
import sys
import time

PIDFILE = sys.argv[1]


def leave(twice):
    r, w = os.pipe()
    pid = os.fork()
    if pid == 0:
        os.close(r)
        if twice and os.fork() != 0:
            os._exit(0)
        helper_ready(w)
    os.close(w)
    os.read(r, 1)  # the helper recorded itself
    os.close(r)
    if twice:
        os.waitpid(pid, 0)


def helper_ready(w):
    os.setsid()
    signal.signal(signal.SIGTERM, signal.SIG_IGN)
    signal.signal(signal.SIGHUP, signal.SIG_IGN)
    with open(PIDFILE, "a") as f:
        f.write(f"{os.getpid()}\n")
    os.write(w, b"1")
    os.close(w)
    while True:
        time.sleep(3600)


print(json.dumps({"fitfarm_exec": 1, "name": "escape-exec", "version": "1", "objectives": 1,
                  "deterministic": False}), flush=True)
for line in sys.stdin:
    req = json.loads(line)
    mode = int(req["genome"][0])
    leave(twice=(mode == 1))
    print(json.dumps({"fitness": [float(mode)]}), flush=True)
