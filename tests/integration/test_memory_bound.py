"""Bounded broker memory: the evaluation table is a cache over the store and
results awaiting a client are capped in RAM.

1. A broker with --cache-entries 100 --max-unacked-per-run 50 evaluates 2,000
   sphere genomes, then a second run resubmits them: every answer is
   "cached": true and bit-identical to the first (so 1,900+ lookups fell
   through to SQLite, which the broker's memory line counts), and the
   broker's own memory line says the results kept in RAM never exceeded 100
   and the results held for clients never exceeded 50.
2. A client (`fitfarm eval`) is SIGKILLed mid-run while the rest of 2,000
   evaluations complete; a new client resumes with the same --run: it prints
   every line exactly once, bit-identical to an uninterrupted run, nothing was
   evaluated twice, and the broker held at most 50 results for the run at any
   time (the rest waited in the store and were paged back).
"""
import os
import re
import signal
import sqlite3
import subprocess
import time

import fflib

check = fflib.Check("test_memory_bound")
N = 2000
CAPS = ["--cache-entries", "100", "--max-unacked-per-run", "50"]
MEM = re.compile(r"memory: (\d+) cached results in RAM \(cap (\d+), peak (\d+), ~\d+ KiB\), "
                 r"(\d+) finished evaluations in RAM \(peak (\d+)\), \d+ evaluations indexed, "
                 r"(\d+) evicted, (\d+) read back from the store; (\d+) results held for clients "
                 r"\(peak (\d+), cap (\d+) per run\), (\d+) left in the store at the cap")


def memory_lines(pool):
    text = open(os.path.join(pool.tmp, "broker.log"), errors="replace").read()
    return [dict(zip(("cached", "cap", "peak_cached", "done", "peak_done", "evicted", "store_hits",
                      "held", "peak_held", "cap_run", "spilled"), map(int, m.groups())))
            for m in MEM.finditer(text)]


def stop_broker(pool):
    pool.kill(pool.broker, signal.SIGTERM)


# ---- 1. the cache bound ------------------------------------------------------
gs = fflib.genomes(N, 4, seed=4321)
text = fflib.jsonl(gs)
sphere = ["--plugin", "sphere", "--params", '{"n": 4}']
with fflib.Pool(broker_args=CAPS) as pool:
    pool.start_broker()
    pool.start_worker(slots=2)
    pool.wait_workers(1)
    ep = ["--broker", pool.clients_ep]
    rc, a, err = fflib.run_eval(ep + sphere + ["--run", "first"], text)
    check.ok(rc == 0 and len(a) == N and all(r["status"] == "ok" for r in a),
             f"first run: {N} sphere genomes evaluated (exit {rc}, {len(a)} lines) {err[-300:]}")
    # Outside reference: sphere is f(x) = sum x_i^2 (its published definition),
    # recomputed here in plain Python.
    by_id = {r["id"]: r for r in a}
    ref_ok = all(abs(by_id[i]["fitness"][0] - sum(x * x for x in g)) <= 1e-12 * max(1.0, sum(x * x for x in g))
                 for i, g in enumerate(gs))
    check.ok(ref_ok and not any(r["cached"] for r in a), "first run equals sum of squares, nothing cached")

    rc, b, err = fflib.run_eval(ep + sphere + ["--run", "second"], text)
    check.ok(rc == 0 and len(b) == N, f"second run answered (exit {rc}, {len(b)} lines) {err[-300:]}")
    check.ok(all(r["cached"] for r in b), f"every answer of the second run is cached: "
             f"{sum(1 for r in b if r['cached'])} of {len(b)}")
    # JSON prints 17 significant digits: equal text is equal bits.
    same = sum(1 for r in b if repr(r["fitness"]) == repr(by_id[r["id"]]["fitness"]))
    check.ok(same == N, f"{same} of {N} cached answers bit-identical to the first run")
    st = pool.status() or {}
    second = [r for r in st.get("runs", []) if r.get("run") == "second"]
    check.ok(second and second[0].get("evaluated") == 0 and second[0].get("cached") == N,
             f"the second run evaluated nothing: {second}")
    stop_broker(pool)
    mem = memory_lines(pool)
    check.ok(len(mem) >= 2, f"the broker logged its memory use ({len(mem)} lines)")
    last = mem[-1] if mem else {}
    print(f"cache test, broker's last memory line: {last}")
    check.ok(last.get("cap") == 100 and last.get("peak_cached", 999) <= 100,
             f"cached results in RAM peaked at {last.get('peak_cached')} (cap 100)")
    check.ok(last.get("peak_done", 999) <= 100,
             f"finished evaluations in RAM peaked at {last.get('peak_done')} (≤ 100)")
    check.ok(last.get("store_hits", 0) >= N - 100,
             f"{last.get('store_hits')} lookups were answered by the store (≥ {N - 100})")
    check.ok(last.get("evicted", 0) >= 2 * N - 100 - 100,
             f"{last.get('evicted')} results evicted from RAM")
    check.ok(last.get("cap_run") == 50 and last.get("peak_held", 999) <= 50 and last.get("spilled", 0) > 0,
             f"results held for clients peaked at {last.get('peak_held')} (cap 50); "
             f"{last.get('spilled')} waited in the store")


# ---- 2. a client away while its run completes ---------------------------------
def done_in_store(path):
    try:
        db = sqlite3.connect(f"file:{path}?mode=ro", uri=True, timeout=1)
        n = db.execute("SELECT count(*) FROM evaluations WHERE status IS NOT NULL").fetchone()[0]
        db.close()
        return n
    except sqlite3.Error:
        return 0


gs2 = fflib.genomes(N, 3, seed=8765)
text2 = fflib.jsonl(gs2)
spin = ["--plugin", "spin", "--params", '{"ms": 1}', "--seed", "9"]
with fflib.Pool(broker_args=CAPS) as pool:
    pool.start_broker()
    pool.start_worker(slots=2)
    pool.wait_workers(1)
    db_path = os.path.join(pool.store, "fitfarm.db")
    inp = os.path.join(pool.tmp, "in.jsonl")
    open(inp, "w").write(text2)
    first_out = os.path.join(pool.tmp, "first.jsonl")
    args = [fflib.exe("fitfarm"), "eval", "--broker", pool.clients_ep, "--insecure",
            "--run", "away", "--in", inp] + spin
    p = subprocess.Popen(args + ["--out", first_out], stderr=subprocess.DEVNULL)
    deadline = time.time() + 120
    while done_in_store(db_path) < N // 5 and time.time() < deadline and p.poll() is None:
        time.sleep(0.02)
    os.kill(p.pid, signal.SIGKILL)
    p.wait()
    at_kill = done_in_store(db_path)
    check.ok(p.returncode == -signal.SIGKILL and 0 < at_kill < N,
             f"the client was killed mid-run ({at_kill} of {N} evaluated)")
    deadline = time.time() + 120
    while done_in_store(db_path) < N and time.time() < deadline:
        time.sleep(0.05)
    check.ok(done_in_store(db_path) == N, "the broker finished the run with its client away")
    time.sleep(0.3)  # the idle line follows the last result
    mem = memory_lines(pool)
    away = mem[-1] if mem else {}
    check.ok(away.get("peak_held", 999) <= 50 and away.get("spilled", 0) >= N - at_kill - 50 - 50,
             f"with the client away the broker held at most {away.get('peak_held')} results "
             f"(cap 50); {away.get('spilled')} waited in the store")

    rc, out, err = fflib.run_eval(["--broker", pool.clients_ep, "--run", "away", "--in", inp] + spin,
                                  "", timeout=300)
    ids = [r["id"] for r in out]
    check.ok(rc == 0 and sorted(ids) == list(range(N)),
             f"the resumed client printed every line exactly once: exit {rc}, {len(ids)} lines, "
             f"{len(set(ids))} distinct {err[-500:]}")
    st = pool.status() or {}
    run = [r for r in st.get("runs", []) if r.get("run") == "away"]
    check.ok(run and run[0].get("evaluated") == N,
             f"nothing evaluated twice: evaluated {run[0].get('evaluated') if run else '?'} for {N} lines")
    def count_unacked():
        db = sqlite3.connect(f"file:{db_path}?mode=ro", uri=True)
        try:
            return db.execute("SELECT count(*) FROM requests_owed WHERE run_id = 'away'"
                              ).fetchone()[0]
        finally:
            db.close()
    # Acknowledgements commit with the next write or within 100 ms
    # (BROKER_STORE_LAZY_MS, broker/store.h): give them a moment.
    deadline = time.time() + 3
    unacked = count_unacked()
    while unacked and time.time() < deadline:
        time.sleep(0.05)
        unacked = count_unacked()
    check.ok(unacked == 0, f"the store marks every request of the run acknowledged ({unacked} not)")
    # Outside reference for the bits: an uninterrupted embedded run of the
    # same input and seed (spin draws from the documented seed derivation).
    rc2, ref, err2 = fflib.run_eval(["--slots", "2", "--run", "away-ref"] + spin, text2)
    ref_by = {r["id"]: r["fitness"] for r in ref}
    same = sum(1 for r in out if repr(r["fitness"]) == repr(ref_by.get(r["id"])))
    check.ok(rc2 == 0 and same == N, f"{same} of {N} resumed lines bit-identical to an uninterrupted run")
    stop_broker(pool)
    mem = memory_lines(pool)
    last = mem[-1] if mem else {}
    print(f"resume test: killed at {at_kill} evaluated; broker's last memory line: {last}")
    check.ok(last.get("peak_held", 999) <= 50,
             f"results held for clients peaked at {last.get('peak_held')} over the resume (cap 50)")
check.done(pool)
