"""Processes that stop without dying (SIGSTOP: a laptop lid closed, a debugger,
a swapped-out machine) and come back (SIGCONT):

1. the broker stopped for 20 s mid-run, then continued: the client waits (its
   ZeroMQ heartbeat drops the connection and reconnects), workers keep their
   results until the broker reads them, and every line arrives exactly once;
2. a worker stopped past the broker's lost-worker window (--liveness 1500 ms,
   stopped 5 s), then continued: the broker dropped it and re-queued its jobs
   on the other worker; its late results are the first to win or are ignored,
   and nothing is delivered twice.

Each run must exit 0 with one ok line per input line, in order, and fitness
0 of `spin` equal to the IEEE 754 left-to-right sum of the genome (Python's
float addition is the same binary64 addition), bit for bit as a fault-free
run on an embedded pool."""
import json
import os
import signal
import subprocess
import threading
import time

import fflib

check = fflib.Check("test_stall")
common = ["--plugin", "spin", "--params", '{"ms": 5}', "--seed", "3"]


def eval_with(pool, run, gs, action, after_lines):
    """Runs `fitfarm eval` on pool and calls action() once after_lines
    results are printed. Returns (exit status, parsed lines, stderr)."""
    p = subprocess.Popen([fflib.exe("fitfarm"), "eval", "--insecure", "--broker", pool.clients_ep,
                          "--run", run, "--stats"] + common,
                         stdin=subprocess.PIPE, stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                         text=True)
    threading.Thread(target=lambda: (p.stdin.write(fflib.jsonl(gs)), p.stdin.close()),
                     daemon=True).start()
    err_chunks = []
    threading.Thread(target=lambda: err_chunks.append(p.stderr.read()), daemon=True).start()
    out, fired = [], False
    for line in p.stdout:
        out.append(json.loads(line))
        if not fired and len(out) >= after_lines:
            fired = True
            threading.Thread(target=action, daemon=True).start()
    p.wait(timeout=600)
    time.sleep(0.1)
    return p.returncode, out, "".join(err_chunks), fired


def verify(name, rc, out, err, gs, ref):
    check.ok(rc == 0, f"{name}: the client exited 0, not {rc}: {err[-1500:]}")
    check.ok([r["line"] for r in out] == list(range(1, len(gs) + 1)),
             f"{name}: one line per input line, in order ({len(out)} lines)")
    check.ok(all(r["status"] == "ok" for r in out), f"{name}: every line ok")
    check.ok(all(r["fitness"][0] == sum(g, 0.0) for r, g in zip(out, gs)),
             f"{name}: fitness 0 is the IEEE 754 left-to-right sum of the genome")
    same = sum(1 for a, b in zip(out, ref) if a["fitness"] == b["fitness"] and a["seed"] == b["seed"])
    check.ok(same == len(gs), f"{name}: {same} of {len(gs)} lines bit-identical to a fault-free run")


gs = fflib.genomes(1500, 3, seed=77)
rc0, ref, err0 = fflib.run_eval(["--slots", "2", "--run", "stall-ref"] + common, fflib.jsonl(gs))
check.ok(rc0 == 0 and len(ref) == len(gs), f"fault-free reference: {err0[-300:]}")

with fflib.Pool(broker_args=["--lost-after", "1500"]) as pool:
    pool.start_broker()
    pool.start_worker(slots=2, name="a")
    pool.start_worker(slots=2, name="b")
    pool.wait_workers(2)

    # 1. The broker stopped for 20 s.
    def stall_broker():
        os.kill(pool.broker.pid, signal.SIGSTOP)
        time.sleep(20)
        os.kill(pool.broker.pid, signal.SIGCONT)

    t0 = time.time()
    rc, out, err, fired = eval_with(pool, "stall-broker", gs, stall_broker, 300)
    took = time.time() - t0
    check.ok(fired, "the broker was stopped mid-run")
    check.ok(took >= 20, f"the run spanned the 20 s stop ({took:.1f} s)")
    verify("broker stopped 20 s", rc, out, err, gs, ref)
    print(f"broker stopped 20 s: {len(out)} lines in {took:.1f} s")

    # 2. A worker stopped past the lost-worker window, then continued.
    gs2 = fflib.genomes(1500, 3, seed=78)
    rc2, ref2, _ = fflib.run_eval(["--slots", "2", "--run", "stall-ref2"] + common, fflib.jsonl(gs2))
    victim = pool.workers[0]

    def stall_worker():
        os.kill(victim.pid, signal.SIGSTOP)
        time.sleep(5)
        os.kill(victim.pid, signal.SIGCONT)

    rc, out, err, fired = eval_with(pool, "stall-worker", gs2, stall_worker, 300)
    check.ok(fired, "the worker was stopped mid-run")
    verify("worker stopped past liveness", rc, out, err, gs2, ref2)
    log = open(os.path.join(pool.tmp, "broker.log"), errors="replace").read()
    check.ok("worker a left: silent" in log, "the broker dropped the stopped worker as silent")
    check.ok(victim.poll() is None, "the continued worker is still running")
    late = log.count("late result") + log.count("no such job is held there")
    print(f"worker stopped 5 s: {len(out)} lines; late results accepted or ignored: {late}")
check.done(pool)
