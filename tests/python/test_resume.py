"""A search killed mid-way (SIGKILL by PID, embedded pool with a fixed store
and run id) and restarted with the same run id and store re-simulates nothing
that was done, and ends with the bits of the uninterrupted in-process search
(scipy's differential_evolution on Rastrigin, conftest.rastrigin: Rastrigin
1974, Muehlenbein et al. 1991).

Counting: the store's `results` table has one row per simulation that
finished (README, "The store"); a key that appears there twice was simulated
twice."""
import json
import os
import signal
import sqlite3
import subprocess
import sys
import time

from scipy.optimize import differential_evolution

from conftest import PYTHON, child_env, rastrigin

BOUNDS = [(-5.12, 5.12)] * 3
DE = dict(seed=1, maxiter=25, popsize=10, polish=False, tol=0.0, updating="deferred")

CHILD = r'''
import json, sys, time
import fitfarm
from scipy.optimize import differential_evolution
store, pause = sys.argv[1], float(sys.argv[2])
BOUNDS = [(-5.12, 5.12)] * 3
with fitfarm.Pool(slots=2, store=store) as pool:
    f = pool.function("rastrigin", objective=0, run=pool.run("de-resume", seed=3))
    def cb(xk, convergence):
        print("generation", flush=True)
        time.sleep(pause)
    r = differential_evolution(f, BOUNDS, seed=1, maxiter=25, popsize=10, polish=False,
                               tol=0.0, updating="deferred", workers=pool.map, callback=cb)
    print("result " + json.dumps({"x": r.x.tobytes().hex(), "fun": float(r.fun).hex(),
                                  "nfev": int(r.nfev), "stats": f.run.stats()}), flush=True)
'''


def descendants(pid):
    out, todo = [], [pid]
    while todo:
        p = todo.pop()
        try:
            for tid in os.listdir(f"/proc/{p}/task"):
                with open(f"/proc/{p}/task/{tid}/children") as fh:
                    kids = [int(k) for k in fh.read().split()]
                out += kids
                todo += kids
        except (FileNotFoundError, ProcessLookupError):
            pass
    return out


def alive(pid):
    try:
        with open(f"/proc/{pid}/stat") as fh:
            return fh.read().split(") ")[-1][0] != "Z"
    except FileNotFoundError:
        return False


def q(db, sql):
    con = sqlite3.connect(f"file:{db}?mode=ro", uri=True, timeout=5)
    try:
        return con.execute(sql).fetchone()[0]
    finally:
        con.close()


def test_killed_search_resumes_without_re_evaluating(tmp_path):
    store = str(tmp_path / "store")
    db = os.path.join(store, "fitfarm.db")
    script = tmp_path / "search.py"
    script.write_text(CHILD)
    env = child_env()

    p = subprocess.Popen([PYTHON, str(script), store, "0.15"], stdout=subprocess.PIPE,
                         stderr=subprocess.PIPE, text=True, env=env)
    gens = 0
    kids = []
    for line in p.stdout:
        if line.startswith("generation"):
            gens += 1
            kids = descendants(p.pid) or kids
            if gens == 6:
                break
    assert gens == 6, p.stderr.read()
    os.kill(p.pid, signal.SIGKILL)
    p.wait(timeout=30)
    # The embedded pool's processes end by themselves when their client dies.
    deadline = time.time() + 15
    while time.time() < deadline and any(alive(k) for k in kids):
        time.sleep(0.1)
    assert kids and not any(alive(k) for k in kids), [k for k in kids if alive(k)]
    done_before = q(db, "SELECT count(*) FROM evaluations WHERE status IS NOT NULL")
    assert done_before > 0

    r = subprocess.run([PYTHON, str(script), store, "0"], capture_output=True, text=True,
                       env=env, timeout=600)
    assert r.returncode == 0, r.stderr
    res = json.loads(r.stdout.splitlines()[-1].split(" ", 1)[1])
    seen = set()

    def counting(x):
        seen.add(x.tobytes())
        return rastrigin(x)
    ref = differential_evolution(counting, BOUNDS, **DE)
    assert res["x"] == ref.x.tobytes().hex() and res["fun"] == float(ref.fun).hex()
    assert res["nfev"] == ref.nfev
    assert done_before < ref.nfev  # the kill was mid-way
    # Nothing was simulated twice, and what was done before the kill was not redone.
    assert q(db, "SELECT count(*) FROM simulations") == q(db, "SELECT count(DISTINCT key) FROM simulations")
    assert q(db, "SELECT count(*) FROM evaluations WHERE status IS NULL") == 0
    # Every distinct genome of the search was simulated exactly once over both
    # processes (DE may propose a genome twice: those are counted once).
    assert q(db, "SELECT count(*) FROM evaluations") == len(seen)
    assert q(db, "SELECT count(*) FROM simulations") == len(seen)
    assert res["stats"]["delivered"] == ref.nfev
