"""A worker killed with SIGKILL mid-batch does not hang the client: its jobs
go back to the queue and the other worker finishes the batch, with the same
fitness bits as an undisturbed run (the seed depends on content only). The
store tells the truth about it: `fitfarm export` counts the lost dispatch in
`attempts` of each re-queued job (computed then by the survivor), and a later
run answered from the cache is not shown as finished before it was asked."""
import json
import os
import signal
import subprocess
import threading
import time

import fflib

check = fflib.Check("test_worker_kill")
gs = fflib.genomes(600, 4, seed=41)
args_tail = ["--plugin", "spin", "--params", '{"ms": 10}', "--seed", "9"]
with fflib.Pool(broker_args=["--liveness", "1500"]) as pool:
    pool.start_broker()
    victim = pool.start_worker(slots=1, name="victim")
    pool.start_worker(slots=1, name="survivor")
    pool.wait_workers(2)

    def killer():
        time.sleep(1.5)
        pool.kill(victim, signal.SIGKILL)

    t = threading.Thread(target=killer)
    t.start()
    t0 = time.time()
    rc, out, err = fflib.run_eval(["--broker", pool.clients_ep, "--run", "kill-1"] + args_tail,
                                  fflib.jsonl(gs), timeout=300)
    t.join()
    check.ok(victim.returncode == -signal.SIGKILL, "the victim was killed mid-batch")
    check.ok(rc == 0 and len(out) == len(gs), f"batch finished after the kill: exit {rc}, {len(out)} lines, {err[-1000:]}")
    check.ok(all(r["status"] == "ok" for r in out), "every line ok")

    # The same input on an undisturbed embedded pool gives the same bits.
    rc2, ref, err2 = fflib.run_eval(["--slots", "2", "--run", "kill-ref"] + args_tail, fflib.jsonl(gs))
    check.ok(rc2 == 0, f"reference run: {err2[-500:]}")
    same = sum(1 for a, b in zip(out, ref) if a["fitness"] == b["fitness"] and a["seed"] == b["seed"])
    check.ok(same == len(gs), f"{same} of {len(gs)} lines bit-identical to an undisturbed run")

    # The same genomes again in another run: every answer from the cache.
    rc3, again, err3 = fflib.run_eval(["--broker", pool.clients_ep, "--run", "kill-again"]
                                      + args_tail, fflib.jsonl(gs[:50]))
    check.ok(rc3 == 0 and all(r["cached"] for r in again), f"second run cached: {err3[-300:]}")
    pool.kill(pool.broker, signal.SIGTERM)  # flush the store before reading it

    def export(run):
        r = subprocess.run([fflib.exe("fitfarm"), "export", run, "--store", pool.store],
                           capture_output=True, text=True, timeout=60)
        return [json.loads(l) for l in r.stdout.splitlines()] if r.returncode == 0 else []

    rows = export("kill-1")
    lost = [x for x in rows if x["attempts"] and x["attempts"] >= 1]
    check.ok(len(rows) == len(gs) and len(lost) >= 1,
             f"export counts the dispatches lost with the victim: {len(lost)} of {len(rows)} rows")
    check.ok(all(x["worker"] == "survivor" for x in lost),
             f"... and those jobs were computed by the survivor: {[x['worker'] for x in lost][:5]}")
    cached_rows = export("kill-again")
    check.ok(len(cached_rows) == 50 and all(x["cached"] for x in cached_rows) and
             all(x["requested_at"] <= x["finished_at"] for x in cached_rows) and
             all(x["computed_at"] <= x["requested_at"] for x in cached_rows),
             "cached rows: finished (answered) when requested, computed before: "
             f"{[(x['requested_at'], x['finished_at'], x['computed_at']) for x in cached_rows[:1]]}")
    log = open(os.path.join(pool.tmp, "broker.log"), errors="replace").read()
    check.ok("--liveness is now --lost-after" in log,
             "the old spelling --liveness still works, with a warning naming --lost-after")
check.done(pool)
