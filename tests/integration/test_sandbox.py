"""Plugins cannot escape their evaluation, nor flood the worker's log.

Real broker, real workers, the test-only plugin `escape` (tests/plugins/escape.c)
and an exec program in Python (escape_exec.py). Every process a plugin leaves
behind records its process id in a file; the test then checks by that id that
it is gone:
  - after the evaluation: a helper that ignores SIGTERM (same process group),
    and an orphan that called setsid() (found through the child subreaper);
  - after a time-out: the same two kinds, left by an evaluation that hangs;
  - after the worker exits: an exec program's helper that called setsid()
    (it lives as long as its program, then dies with it), and a running
    evaluation's helper when the worker is stopped at once;
  - an evaluation that prints 100 MiB to stdout and 100 MiB to stderr: the
    worker logs 64 KiB of it under the job's id plus one line counting the
    bytes cut, exactly the rest (the byte count we printed is the reference),
    and its log stays under 1 MB.
"""
import os
import re
import signal
import tempfile
import time

import fflib
from fflib import alive

PYTHON = os.environ.get("PYTHON", "/usr/bin/python3")
EXEC = os.path.join(fflib.SOURCE, "tests", "integration", "escape_exec.py")
PLUGINS = os.path.join(fflib.BUILD, "test-plugins")
check = fflib.Check("test_sandbox")



def pids(path):
    try:
        return [int(x) for x in open(path).read().split()]
    except FileNotFoundError:
        return []


def all_gone(ps, timeout=5.0):
    deadline = time.time() + timeout
    while time.time() < deadline:
        if not any(alive(p) for p in ps):
            return True
        time.sleep(0.05)
    return False


def cleanup(ps):
    """A failed check must not leave our helpers behind either."""
    for p in ps:
        if alive(p):
            try:
                os.kill(p, signal.SIGKILL)
            except ProcessLookupError:
                pass


tmp = tempfile.mkdtemp(prefix="fitfarm-sandbox-")
leftovers = []
try:
    with fflib.Pool(tmp=tmp, broker_args=["--lost-after", "3000"]) as pool:
        pool.start_broker()
        so = pool.start_worker(slots=1, name="so", extra=["--plugin-dir", PLUGINS])
        pool.wait_workers(1)
        ep = ["--broker", pool.clients_ep, "--plugin", "escape", "--attempts", "1"]

        # 1. End of an evaluation.
        pf = os.path.join(tmp, "end.pids")
        params = '{"pidfile": "%s"}' % pf
        rc, out, err = fflib.run_eval(ep + ["--run", "end", "--params", params],
                                      "[0, 1]\n[1, 2]\n", timeout=120)
        check.ok(rc == 0 and [r["status"] for r in out] == ["ok", "ok"],
                 f"both evaluations ok: exit {rc}, {out}, {err[-500:]}")
        ps = pids(pf)
        leftovers += ps
        check.ok(len(ps) == 2, f"two helpers recorded themselves: {ps}")
        check.ok(all_gone(ps), f"no helper survives its evaluation: alive {[p for p in ps if alive(p)]}")

        # 2. A time-out: the evaluation hangs after starting its helper.
        pf = os.path.join(tmp, "timeout.pids")
        params = '{"pidfile": "%s"}' % pf
        rc, out, err = fflib.run_eval(ep + ["--run", "timeout", "--params", params, "--timeout", "1"],
                                      "[2, 1]\n[3, 2]\n", timeout=120)
        check.ok([r["status"] for r in out] == ["timeout", "timeout"],
                 f"both hanging evaluations time out: {out}, {err[-500:]}")
        ps = pids(pf)
        leftovers += ps
        check.ok(len(ps) == 2, f"two helpers recorded themselves: {ps}")
        check.ok(all_gone(ps), f"no helper survives a time-out: alive {[p for p in ps if alive(p)]}")

        # 3. 200 MiB of output from one evaluation.
        log_path = os.path.join(tmp, "so.log")
        size0 = os.path.getsize(log_path)
        rc, out, err = fflib.run_eval(ep + ["--run", "loud", "--params", params],
                                      "[4, 100]\n", timeout=300)
        check.ok(rc == 0 and out and out[0]["status"] == "ok", f"the loud evaluation is ok: {out} {err[-300:]}")
        time.sleep(0.5)
        grown = os.path.getsize(log_path) - size0
        check.ok(grown < 1_000_000, f"the worker's log grew by {grown} bytes (< 1 MB) for 200 MiB printed")
        print(f"worker log growth for 200 MiB printed by one evaluation: {grown} bytes")
        text = open(log_path, errors="replace").read()
        cut = re.findall(r"job (\d+) printed more than 65536 bytes: \[\.\.\. (\d+) bytes cut\]", text)
        printed = 2 * 100 * 1024 * 1024  # what escape.c behaviour 4 writes for x1 = 100
        check.ok(len(cut) == 1 and int(cut[0][1]) == printed - 65536,
                 f"one cut note counting {printed - 65536} bytes: {cut}")
        if cut:
            kept = len(re.findall(rf"job {cut[0][0]} printed: x", text))
            # 64 KiB of 1024-byte lines (1023 'x' and a newline) is 64 lines.
            check.ok(kept == 64, f"64 output lines logged under job {cut[0][0]}, found {kept}")

        # 4. The worker exits while an evaluation runs and its helper waits.
        pf = os.path.join(tmp, "exit.pids")
        params = '{"pidfile": "%s"}' % pf
        import subprocess
        hang = subprocess.Popen([fflib.exe("fitfarm"), "eval", "--insecure"] + ep +
                                ["--run", "exit", "--params", params, "--timeout", "600"],
                                stdin=subprocess.PIPE, stdout=subprocess.DEVNULL,
                                stderr=subprocess.DEVNULL, text=True)
        pool.procs.append(hang)
        hang.stdin.write("[3, 7]\n")
        hang.stdin.close()
        deadline = time.time() + 30
        while not pids(pf) and time.time() < deadline:
            time.sleep(0.05)
        ps = pids(pf)
        leftovers += ps
        check.ok(len(ps) == 1 and alive(ps[0]), f"the running evaluation's helper is up: {ps}")
        os.kill(so.pid, signal.SIGTERM)
        time.sleep(0.3)
        os.kill(so.pid, signal.SIGTERM)  # a second one stops at once
        so.wait(timeout=30)
        check.ok(all_gone(ps), f"no helper survives the worker: alive {[p for p in ps if alive(p)]}")
        pool.kill(hang)

        # 5. An exec program's helpers.
        pf = os.path.join(tmp, "exec.pids")
        ex = pool.start_worker(slots=1, name="exec",
                               extra=["--exec", f"escape-exec={PYTHON} {EXEC} {pf}"])
        pool.wait_workers(1)
        time.sleep(1.5)  # the stopped worker's registration expires
        rc, out, err = fflib.run_eval(["--broker", pool.clients_ep, "--plugin", "escape-exec",
                                       "--attempts", "1", "--run", "exec-orphan"], "[1]\n", timeout=120)
        check.ok(rc == 0 and out and out[0]["status"] == "ok", f"exec evaluation ok: {out} {err[-300:]}")
        ps = pids(pf)
        leftovers += ps
        check.ok(len(ps) == 1 and all_gone(ps),
                 f"the exec program's orphaned setsid() helper dies at the end of the evaluation: {ps}")
        rc, out, err = fflib.run_eval(["--broker", pool.clients_ep, "--plugin", "escape-exec",
                                       "--attempts", "1", "--run", "exec-kept"], "[0]\n", timeout=120)
        check.ok(rc == 0 and out and out[0]["status"] == "ok", f"exec evaluation ok: {out} {err[-300:]}")
        kept = [p for p in pids(pf) if p not in ps]
        leftovers += kept
        check.ok(len(kept) == 1 and alive(kept[0]),
                 f"a helper whose program lives stays while the program does: {kept}")
        os.kill(ex.pid, signal.SIGTERM)  # a drain: the worker stops by itself
        ex.wait(timeout=30)
        check.ok(ex.returncode == 0, f"the exec worker drained and exited 0, not {ex.returncode}")
        check.ok(all_gone(kept), f"the exec program's setsid() helper dies with the worker: {kept}")
        log = open(os.path.join(tmp, "exec.log"), errors="replace").read()
        check.ok(re.search(r"left \d+ processes running after the evaluation", log) is not None,
                 "the exec worker's log says what it killed")
finally:
    cleanup(leftovers)
check.done(pool)
