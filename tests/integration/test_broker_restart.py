"""Broker restart on the same store, mid-batch: first a graceful stop
(SIGTERM: it stops accepting, commits and exits 0), then a SIGKILL. Each time
a new broker process starts on the same store and ports; workers and the
client reconnect by themselves, the pending work is reloaded, and the client
finishes with every line ok and bit-identical to an undisturbed run."""
import os
import signal
import subprocess
import time

import fflib

N = 600
check = fflib.Check("test_broker_restart")
gs = fflib.genomes(N, 4, seed=17)
text = fflib.jsonl(gs)
common = ["--plugin", "spin", "--params", '{"ms": 10}', "--seed", "3"]


def wait_done(path, n, proc):
    deadline = time.time() + 120
    while fflib.done_in_store(path) < n and time.time() < deadline and proc.poll() is None:
        time.sleep(0.05)
    return fflib.done_in_store(path)


with fflib.Pool(broker_args=["--lost-after", "2000"]) as pool:
    pool.start_broker()
    pool.start_worker(slots=1, name="b0")
    pool.start_worker(slots=1, name="b1")
    pool.wait_workers(2)
    db_path = os.path.join(pool.store, "fitfarm.db")
    inp = os.path.join(pool.tmp, "in.jsonl")
    out_path = os.path.join(pool.tmp, "out.jsonl")
    open(inp, "w").write(text)
    cli = subprocess.Popen([fflib.exe("fitfarm"), "eval", "--broker", pool.clients_ep, "--run", "restart",
                            "--insecure", "--in", inp, "--out", out_path] + common,
                           stderr=open(os.path.join(pool.tmp, "cli.log"), "wb"))

    at_term = wait_done(db_path, N // 4, cli)
    old = pool.broker
    pool.kill(old, signal.SIGTERM)
    check.ok(old.returncode == 0, f"SIGTERM: the broker exited 0, not {old.returncode}")
    pool.start_broker()

    at_kill = wait_done(db_path, (2 * N) // 3, cli)
    pool.kill(pool.broker, signal.SIGKILL)
    pool.start_broker()

    cli.wait(timeout=300)
    out = [__import__("json").loads(l) for l in open(out_path).read().splitlines() if l.strip()]
    check.ok(0 < at_term < at_kill < N, f"both stops came mid-batch: {at_term}, {at_kill} of {N} done")
    check.ok(cli.returncode == 0, f"the client finished: exit {cli.returncode}")
    check.ok(len(out) == N and all(r["status"] == "ok" for r in out), f"{len(out)} lines, all ok")
    log = open(os.path.join(pool.tmp, "broker.log"), errors="replace").read()
    check.ok("store loaded:" in log, "the restarted broker reloaded the store")

    rc2, ref, err2 = fflib.run_eval(["--slots", "2", "--run", "restart-ref"] + common, text)
    check.ok(rc2 == 0, f"reference run: {err2[-500:]}")
    same = sum(1 for a, b in zip(out, ref) if a["fitness"] == b["fitness"] and a["seed"] == b["seed"])
    check.ok(same == N, f"{same} of {N} lines bit-identical to an undisturbed run")
    # spin's first objective is the left-to-right IEEE 754 sum of the genome.
    check.ok(all(r["fitness"][0] == sum(g, 0.0) for r, g in zip(out, gs)), "fitness 0 is the genome's sum")
    print(f"done at SIGTERM: {at_term}; done at SIGKILL: {at_kill}; lines: {N}")
check.done(pool)
