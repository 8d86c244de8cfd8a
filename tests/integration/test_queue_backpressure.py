"""A batch larger than the broker's queue cap for a run is evaluated whole
by one fitfarm_evaluate: the broker takes what fits (--max-queued-per-run
100 here), refuses the rest as "queue full", and the library sends the rest
again while the accepted part drains, instead of failing the whole batch
(before: FITFARM_EQUEUEFULL after the first chunk). The helper program
evaluate_big checks all 20,000 results against the sphere formula (sum of
squares, De Jong 1975). Every request is answered once: the store holds
20,000 requests and 20,000 simulations for the run.
Run with /usr/bin/python3 (Debian's)."""
import os
import sqlite3
import subprocess
import sys

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import fflib  # noqa: E402

N = 20000
HELPER = os.path.join(fflib.BUILD, "tests", "integration", "evaluate_big")
check = fflib.Check("test_queue_backpressure")
with fflib.Pool(broker_args=["--max-queued-per-run", "5000"]) as pool:
    pool.start_broker()
    pool.start_worker(slots=2)
    pool.wait_workers(1)
    r = subprocess.run([HELPER, pool.clients_ep, str(N)], capture_output=True, text=True,
                       timeout=180)
    check.ok(r.returncode == 0 and r.stdout.strip() == f"ok {N}",
             f"one evaluate of {N} past a cap of 5000: {r.returncode} {r.stdout!r} {r.stderr[-500:]!r}")
    log = open(os.path.join(pool.tmp, "broker.log"), errors="replace").read()
    check.ok("queue full" in log, "the broker did refuse part of the batch (the cap was reached)")
    db = sqlite3.connect(f"file:{os.path.join(pool.store, 'fitfarm.db')}?mode=ro", uri=True)
    reqs = db.execute("SELECT count(*), count(DISTINCT tag) FROM requests").fetchone()
    sims = db.execute("SELECT count(*) FROM simulations").fetchone()[0]
    db.close()
    check.ok(reqs == (N, N) and sims == N, f"each request once: {reqs} requests, {sims} simulations")
    pool.stop_all()
    check.done(pool)
