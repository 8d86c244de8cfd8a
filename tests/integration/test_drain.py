"""A worker drained by SIGTERM: it takes no new jobs, finishes the ones its
children are running (their results reach the broker after the signal),
hands back the jobs it only held, and exits 0; the batch completes with every
line ok, each evaluated exactly once (nothing running was lost and re-run)."""
import json
import os
import signal
import sqlite3
import subprocess
import time

import fflib

N = 16
check = fflib.Check("test_drain")
gs = fflib.genomes(N, 2, seed=5)
common = ["--plugin", "spin", "--params", '{"ms": 500}', "--seed", "1"]
with fflib.Pool() as pool:
    pool.start_broker()
    drainee = pool.start_worker(slots=2, name="drainee")
    pool.start_worker(slots=1, name="other")
    pool.wait_workers(2)
    out_path = os.path.join(pool.tmp, "out.jsonl")
    inp = os.path.join(pool.tmp, "in.jsonl")
    open(inp, "w").write(fflib.jsonl(gs))
    cli = subprocess.Popen([fflib.exe("fitfarm"), "eval", "--broker", pool.clients_ep, "--run", "drain",
                            "--insecure", "--in", inp, "--out", out_path] + common,
                           stderr=subprocess.DEVNULL)
    time.sleep(0.8)  # the drainee's two children are mid-evaluation (500 ms CPU each)
    t_term = time.time()
    os.kill(drainee.pid, signal.SIGTERM)
    drainee.wait(timeout=60)
    cli.wait(timeout=120)
    out = [json.loads(l) for l in open(out_path).read().splitlines() if l.strip()]
    check.ok(drainee.returncode == 0, f"the drained worker exited 0, not {drainee.returncode}")
    check.ok(cli.returncode == 0 and len(out) == N and all(r["status"] == "ok" for r in out),
             f"the batch completed: exit {cli.returncode}, {len(out)} lines")
    db = sqlite3.connect(f"file:{os.path.join(pool.store, 'fitfarm.db')}?mode=ro", uri=True)
    after = db.execute("SELECT count(*) FROM evaluations WHERE worker = 'drainee' AND finished_at > ?",
                       (t_term,)).fetchone()[0]
    total, attempts = db.execute("SELECT count(*), sum(attempts) FROM evaluations").fetchone()
    db.close()
    check.ok(after >= 1, f"{after} evaluations the drainee was running finished after SIGTERM")
    check.ok(total == N and attempts == 0, f"each line evaluated once: {total} evaluations, {attempts} failed attempts")
    st = pool.status() or {}
    ev = [r.get("evaluated") for r in st.get("runs", []) if r.get("run") == "drain"]
    check.ok(ev == [N], f"the run counts {ev} evaluations for {N} lines")
    log = open(os.path.join(pool.tmp, "broker.log"), errors="replace").read()
    check.ok("worker drainee left: said goodbye" in log, "the drainee said goodbye to the broker")
    print(f"finished by the drainee after SIGTERM: {after}")
check.done(pool)
