"""Fair share across runs: real broker, one worker of 2 slots, the spin
plugin (2 ms of CPU per evaluation).

1. Round robin: a 50-job run submitted behind a 20,000-job run that is
   already running finishes before the big run is 10 % done (issue
   requirement; without turns the small run would wait for the whole
   queue ahead of it).
2. Weights: runs A (--weight 3) and B (weight 1), 3,000 jobs each, queued
   while no worker is connected. When A has finished, B has about a third of
   A's count done (weighted round robin: 3 jobs of A per job of B; we
   accept 0.2 to 0.5 for timing noise at the edges).
Counts are read from the store (committed results only).
Run with /usr/bin/python3 (Debian's)."""
import os
import signal
import sqlite3
import subprocess
import sys

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import fflib  # noqa: E402
from fflib import wait_for  # noqa: E402

SPIN = '{"ms": 2}'
check = fflib.Check("test_fair_share")


def done(db_path, run):
    try:
        db = sqlite3.connect(f"file:{db_path}?mode=ro", uri=True, timeout=2)
        n = db.execute("SELECT count(*) FROM requests r JOIN evaluations e ON e.key = r.key"
                       " WHERE r.run_id = ? AND e.status IS NOT NULL", (run,)).fetchone()[0]
        db.close()
        return n
    except sqlite3.Error:
        return 0


def start_eval(pool, run, genomes, extra=()):
    path = os.path.join(pool.tmp, f"{run}.jsonl")
    open(path, "w").write(fflib.jsonl(genomes))
    p = subprocess.Popen([fflib.exe("fitfarm"), "eval", "--broker", pool.clients_ep, "--insecure",
                          "--quiet", "--run", run, "--plugin", "spin", "--params", SPIN,
                          "--in", path, "--out", os.path.join(pool.tmp, f"{run}.out")] + list(extra),
                         stderr=open(os.path.join(pool.tmp, f"{run}.log"), "wb"))
    pool.procs.append(p)
    return p



with fflib.Pool() as pool:
    pool.start_broker()
    pool.start_worker(slots=2)
    pool.wait_workers(1)
    db = os.path.join(pool.store, "fitfarm.db")

    big = start_eval(pool, "big", fflib.genomes(20000, 2, seed=1))
    check.ok(wait_for(lambda: done(db, "big") >= 100, 60), "the big run is running")
    small = start_eval(pool, "small", fflib.genomes(50, 2, seed=2))
    rc = small.wait(timeout=120)
    big_done = done(db, "big")
    check.ok(rc == 0 and done(db, "small") == 50, f"the small run finished: exit {rc}")
    check.ok(big_done < 2000, f"... before the big run was 10 % done ({big_done} of 20,000)")
    pool.kill(big, signal.SIGTERM)
    pool.stop_all()

with fflib.Pool() as pool:
    pool.start_broker()
    w = pool.start_worker(slots=1, name="w0")
    pool.wait_workers(1)
    pool.kill(w)  # the catalog keeps spin; nobody runs the jobs until the next worker
    a = start_eval(pool, "a", fflib.genomes(3000, 2, seed=3), ["--weight", "3"])
    b = start_eval(pool, "b", fflib.genomes(3000, 2, seed=4))
    db = os.path.join(pool.store, "fitfarm.db")

    def queued():
        try:
            c = sqlite3.connect(f"file:{db}?mode=ro", uri=True, timeout=2)
            n = c.execute("SELECT count(*) FROM requests").fetchone()[0]
            c.close()
            return n
        except sqlite3.Error:
            return 0

    check.ok(wait_for(lambda: queued() == 6000, 60), f"both runs queued: {queued()} requests")
    pool.start_worker(slots=2)
    rc = a.wait(timeout=180)
    na, nb = done(db, "a"), done(db, "b")
    ratio = nb / na if na else 0
    check.ok(rc == 0 and na == 3000, f"run a (weight 3) finished: exit {rc}, {na} done")
    check.ok(0.2 <= ratio <= 0.5, f"run b (weight 1) had {nb} done then: {ratio:.2f} of a's")
    rc = b.wait(timeout=180)
    check.ok(rc == 0 and done(db, "b") == 3000, f"run b finished too: exit {rc}")
    pool.stop_all()
    check.done(pool)
