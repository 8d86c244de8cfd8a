"""A worker killed with SIGKILL mid-batch does not hang the client: its jobs
go back to the queue and the other worker finishes the batch, with the same
fitness bits as an undisturbed run (the seed depends on content only)."""
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
check.done(pool)
