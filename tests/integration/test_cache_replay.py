"""Never evaluate twice, replay bit for bit.

1. The same 2,000 genomes (spin, stochastic, 3 replicates) on one worker, on
   three workers in shuffled line order, and on two workers with one SIGKILLed
   mid-run give the same fitness bits per (genome, replicate); each seed equals
   the documented derivation recomputed with hashlib.blake2b, and each spin
   draw equals xoshiro256** seeded by splitmix64 recomputed here in Python.
2. A second run (other run id) over the same genomes: a deterministic plugin
   is answered entirely from the cache ("cached": true, nothing evaluated),
   also after a broker restart; a stochastic one with another seed not at all.
3. --seed-mode common: every genome of a replicate gets one seed; genome mode
   gives each genome its own.
4. --replay prints the original output byte for byte (including its cached
   flags) and stops naming the first line the run never saw, after printing
   every recorded line before it (also for input one line longer than recorded).
5. --no-cache evaluates again and keeps both results in the store.
6. `fitfarm runs` and `export` list what the store holds; --aggregate mean
   matches numpy's mean and sample standard deviation.
7. `fitfarm verify` reports zero mismatches on an honest pool and catches a
   deliberately different build of sphere (one ulp apart), naming both
   builds; a pool with two builds says so in `fitfarm status`.
"""
import hashlib
import json
import os
import random
import signal
import sqlite3
import struct
import subprocess
import time

import fflib
import refs

check = fflib.Check("test_cache_replay")
N = 2000
REPS = 3
SEED = 11
gs = fflib.genomes(N, 4, seed=1234)
lines = [json.dumps({"id": i, "genome": g}) for i, g in enumerate(gs)]
text = "\n".join(lines) + "\n"
M64 = (1 << 64) - 1


# ---- outside references -------------------------------------------------
def spin_u_ref(seed):
    """First xoshiro256** uniform after splitmix64 seeding (Blackman & Vigna,
    reference C code, transcribed here independently)."""
    sm = seed
    s = []
    for _ in range(4):
        sm = (sm + 0x9E3779B97F4A7C15) & M64
        z = sm
        z = ((z ^ (z >> 30)) * 0xBF58476D1CE4E5B9) & M64
        z = ((z ^ (z >> 27)) * 0x94D049BB133111EB) & M64
        s.append(z ^ (z >> 31))
    rotl = lambda x, k: ((x << k) | (x >> (64 - k))) & M64
    result = (rotl((s[1] * 5) & M64, 7) * 9) & M64
    return (result >> 11) * 2.0 ** -53


def bits(lines_out):
    """(id, replicate) -> tuple of fitness bit patterns."""
    out = {}
    for r in lines_out:
        if "replicate" in r and r.get("status") == "ok":
            out[(r["id"], r["replicate"])] = tuple(struct.pack("<d", x) for x in r["fitness"])
    return out


spin = ["--plugin", "spin", "--params", '{"ms": 0}', "--replicates", str(REPS), "--seed", str(SEED)]

# ---- 1. one worker, three workers shuffled, a worker killed mid-run -------
with fflib.Pool(log_prefix="one") as pool:
    pool.start_broker()
    pool.start_worker(slots=1)
    pool.wait_workers(1)
    rc, one, err = fflib.run_eval(["--broker", pool.clients_ep, "--run", "one"] + spin, text)
    check.ok(rc == 0 and len(one) == N * REPS, f"one worker: exit {rc}, {len(one)} lines {err[-500:]}")
    ref_ok = all(int(r["seed"]) == refs.seed(SEED, gs[r["id"]], r["replicate"]) and
                 r["fitness"][1] == spin_u_ref(int(r["seed"])) and
                 r["fitness"][0] == sum(gs[r["id"]]) for r in one)
    check.ok(ref_ok, "every seed and spin draw equals the hashlib/xoshiro256** reference")
    check.ok(len({r["seed"] for r in one}) == N * REPS, "replicates have distinct seeds")
    ref_bits = bits(one)
    if check.failed:
        check.done(pool)

with fflib.Pool(log_prefix="three") as pool:
    pool.start_broker()
    for _ in range(3):
        pool.start_worker(slots=1)
    pool.wait_workers(3)
    order = list(range(N))
    random.Random(5).shuffle(order)
    rc, three, err = fflib.run_eval(["--broker", pool.clients_ep, "--run", "three"] + spin,
                                    "\n".join(lines[i] for i in order) + "\n")
    check.ok(rc == 0 and bits(three) == ref_bits,
             f"three workers, shuffled: same bits per (genome, replicate) (exit {rc})")

with fflib.Pool(log_prefix="kill") as pool:
    pool.start_broker()
    victim = pool.start_worker(slots=1, name="victim")
    pool.start_worker(slots=1, name="survivor")
    pool.wait_workers(2)
    slow = ["--plugin", "spin", "--params", '{"ms": 1}', "--replicates", str(REPS), "--seed", str(SEED)]
    p = subprocess.Popen([fflib.exe("fitfarm"), "eval", "--broker", pool.clients_ep, "--insecure",
                          "--run", "kill"] + slow, stdin=subprocess.PIPE, stdout=subprocess.PIPE,
                         stderr=subprocess.PIPE, text=True)
    p.stdin.write(text)
    p.stdin.close()
    time.sleep(1.0)
    check.ok(p.poll() is None, "the run was still going when the worker was killed")
    pool.kill(victim)
    out_text = p.stdout.read()
    p.wait(timeout=300)
    killed = [json.loads(l) for l in out_text.splitlines() if l.strip()]
    # spin's first objective does not depend on ms, the second only on the seed.
    check.ok(p.returncode == 0 and bits(killed) == ref_bits,
             f"a worker SIGKILLed mid-run: same bits (exit {p.returncode}, {len(killed)} lines)")

# ---- 2-7 on one pool with a store ----------------------------------------
det = gs[:200]
det_text = fflib.jsonl(det)
with fflib.Pool(log_prefix="cache") as pool:
    pool.start_broker()
    pool.start_worker(slots=2, name="honest")
    pool.wait_workers(1)
    ep = ["--broker", pool.clients_ep]
    sphere = ["--plugin", "sphere", "--params", '{"n": 4}']
    rc, a, err = fflib.run_eval(ep + sphere + ["--run", "det-a"], det_text)
    check.ok(rc == 0 and len(a) == 200 and not any(r["cached"] for r in a),
             f"first sphere run evaluates everything (exit {rc}) {err[-300:]}")
    # sphere is sum x_i^2 (its definition); compare with numpy-free Python.
    check.ok(all(r["fitness"][0] == sum(x * x for x in det[r["id"]]) for r in a),
             "sphere values equal sum of squares")
    # Key order and spacing of params do not matter; run id and seed do not either.
    rc, b, _ = fflib.run_eval(ep + ["--plugin", "sphere", "--params", '{ "n" : 4 }', "--run", "det-b",
                                    "--seed", "99"], det_text)
    check.ok(rc == 0 and all(r["cached"] for r in b) and bits(a) == bits(b),
             "a second run (other id, other seed, respaced params) is answered from the cache")
    st = pool.status()
    runs = {r["run"]: r for r in st["runs"]}
    check.ok(runs["det-b"]["evaluated"] == 0 and runs["det-b"]["cached"] == 200,
             f"status: det-b evaluated nothing: {runs.get('det-b')}")
    rc, s1, _ = fflib.run_eval(ep + ["--plugin", "spin", "--params", '{"ms": 0}', "--run", "sto-a",
                                     "--seed", "1"], det_text)
    rc2, s2, _ = fflib.run_eval(ep + ["--plugin", "spin", "--params", '{"ms": 0}', "--run", "sto-b",
                                      "--seed", "2"], det_text)
    check.ok(rc == 0 and rc2 == 0 and not any(r["cached"] for r in s2),
             "a stochastic plugin with another run seed is not answered from the cache")

    # 3. seed modes
    rc, cm, _ = fflib.run_eval(ep + ["--plugin", "spin", "--params", '{"ms": 0}', "--run", "crn",
                                     "--seed", "3", "--seed-mode", "common", "--replicates", "2"],
                               fflib.jsonl(det[:20]))
    by_rep = {}
    for r in cm:
        by_rep.setdefault(r["replicate"], set()).add(r["seed"])
    check.ok(rc == 0 and all(len(v) == 1 for v in by_rep.values()) and len(by_rep) == 2 and
             by_rep[0] != by_rep[1], f"common mode: one seed per replicate across genomes: {by_rep}")
    check.ok(all(int(next(iter(by_rep[k]))) == refs.seed(3, None, k, "common") for k in by_rep),
             "common-mode seeds equal the hashlib reference")
    check.ok(len({r["seed"] for r in s1}) == len({tuple(g) for g in det}),
             "genome mode: each genome has its own seed")

    # 4. replay: output with a mix of cached and evaluated lines, byte for byte
    mix = fflib.jsonl(det[100:200] + gs[300:350])
    args = [fflib.exe("fitfarm"), "eval", "--insecure"] + ep + sphere + ["--run", "mix"]
    orig = subprocess.run(args, input=mix, capture_output=True, text=True, timeout=120)
    flags = [json.loads(l)["cached"] for l in orig.stdout.splitlines()]
    check.ok(orig.returncode == 0 and flags.count(True) == 100 and flags.count(False) == 50,
             f"mixed run: 100 cached, 50 evaluated ({flags.count(True)}, {flags.count(False)})")
    rep = subprocess.run(args + ["--replay"], input=mix, capture_output=True, text=True, timeout=120)
    check.ok(rep.returncode == 0 and rep.stdout == orig.stdout,
             f"replay prints the original bytes (exit {rep.returncode}) {rep.stderr[-300:]}")
    bad = mix.splitlines()
    bad[41] = json.dumps({"id": 41, "genome": [0.5, 0.5, 0.5, 0.25]})
    rep = subprocess.run(args + ["--replay"], input="\n".join(bad) + "\n", capture_output=True,
                         text=True, timeout=120)
    check.ok(rep.returncode == 1 and "input line 42 was never seen" in rep.stderr,
             f"replay stops at line 42: exit {rep.returncode}, {rep.stderr[-300:]}")
    check.ok(rep.stdout.splitlines() == orig.stdout.splitlines()[:41],
             f"... after printing the 41 recorded lines before it, as recorded "
             f"({len(rep.stdout.splitlines())} lines printed)")
    more = mix + json.dumps({"id": "extra", "genome": [0.1, 0.2, 0.3, 0.4]}) + "\n"
    rep = subprocess.run(args + ["--replay"], input=more, capture_output=True, text=True,
                         timeout=120)
    check.ok(rep.returncode == 1 and rep.stdout == orig.stdout and "input line 151" in rep.stderr,
             f"one line more than recorded: all 150 recorded lines, then the stop "
             f"(exit {rep.returncode}, {len(rep.stdout.splitlines())} lines) {rep.stderr[-200:]}")
    st = pool.status()
    runs = {r["run"]: r for r in st["runs"]}
    check.ok(runs["mix"]["evaluated"] == 50, f"replay simulated nothing: {runs['mix']}")

    # 5. --no-cache evaluates again and keeps both results
    again_args = ep + sphere + ["--run", "again", "--no-cache"]
    rc, nc, _ = fflib.run_eval(again_args, fflib.jsonl(det[:10]))
    check.ok(rc == 0 and not any(r["cached"] for r in nc) and bits(nc) == bits(a[:10]),
             "--no-cache: evaluated again, same bits")
    db = sqlite3.connect(f"file:{os.path.join(pool.store, 'fitfarm.db')}?mode=ro", uri=True)
    kept = db.execute("SELECT count(*) FROM simulations WHERE key IN (SELECT key FROM requests"
                      " WHERE run_id = 'again')").fetchone()[0]
    check.ok(kept == 20, f"both results of each of 10 keys kept: {kept} rows")
    db.close()

    # 6. runs, export, aggregate
    r = subprocess.run([fflib.exe("fitfarm"), "runs", "--store", pool.store, "--json"],
                       capture_output=True, text=True, timeout=60)
    listed = {j["run"]: j for j in map(json.loads, r.stdout.splitlines())}
    check.ok(r.returncode == 0 and listed.get("det-b", {}).get("cached") == 200 and
             listed["det-a"]["evaluated"] == 200 and listed["mix"]["requests"] == 150 and
             listed["det-a"]["plugin"] == "sphere", f"fitfarm runs: {r.stdout[:400]} {r.stderr}")
    r = subprocess.run([fflib.exe("fitfarm"), "export", "mix", "--store", pool.store, "--format",
                        "csv"], capture_output=True, text=True, timeout=60)
    import csv, io
    rows = list(csv.DictReader(io.StringIO(r.stdout)))
    check.ok(r.returncode == 0 and len(rows) == 150 and rows[0]["worker"] == "honest" and
             len(rows[0]["digest"]) == 64 and rows[0]["arch"] and rows[0]["cpu_seconds"] != "",
             f"export csv: {len(rows)} rows with provenance {rows[:1]}")
    import numpy as np
    rc, ag, _ = fflib.run_eval(ep + ["--plugin", "spin", "--params", '{"ms": 0}', "--run", "agg",
                                     "--replicates", "4", "--aggregate", "mean"], fflib.jsonl(det[:5]))
    ok = rc == 0
    for i in range(5):
        reps = [r["fitness"] for r in ag if r["id"] == i and "replicate" in r]
        summ = [r for r in ag if r["id"] == i and "aggregate" in r][0]
        ok &= np.allclose(summ["fitness"], np.mean(reps, axis=0), rtol=1e-15, atol=0)
        ok &= np.allclose(summ["std"], np.std(reps, axis=0, ddof=1), rtol=1e-12, atol=1e-300)
    check.ok(ok, "--aggregate mean: numpy mean and sample std (ddof=1)")

    # 2b. after a broker restart the cache still answers, flagged cached.
    # While it is down, mark the no-cache run's own results (a white-box edit
    # of the history) so that its replay shows which result it reads.
    pool.kill(pool.broker, signal.SIGTERM)
    db = sqlite3.connect(os.path.join(pool.store, "fitfarm.db"))
    db.execute("UPDATE results SET fitness = ? WHERE run_id = 'again' AND fresh = 1",
               (struct.pack("<d", 123.5),))
    db.commit()
    db.close()
    pool.start_broker()
    pool.wait_workers(1)
    replay_args = [a for a in again_args if a != "--no-cache"] + ["--replay"]
    rc, ra, err = fflib.run_eval(replay_args, fflib.jsonl(det[:10]))
    check.ok(rc == 0 and len(ra) == 10 and all(r["fitness"] == [123.5] and not r["cached"] for r in ra),
             f"replay of a --no-cache run reads its own re-evaluations: {ra[:1]} {err[-300:]}")
    rc, c, _ = fflib.run_eval(ep + sphere + ["--run", "det-c"], det_text)
    check.ok(rc == 0 and all(r["cached"] for r in c) and bits(c) == bits(a),
             "after a broker restart: answered from the store, cached true")

    # 7. verify: honest, then a deliberately different build
    r = subprocess.run([fflib.exe("fitfarm"), "verify", "det-a", "--store", pool.store,
                        "--insecure"] + ep + ["--sample", "50"], capture_output=True, text=True,
                       timeout=120)
    check.ok(r.returncode == 0 and "50 of 200 stored evaluations re-simulated, 0 mismatches" in r.stdout,
             f"verify on the honest pool: {r.returncode} {r.stdout[-300:]} {r.stderr[-300:]}")
    alt = os.path.join(fflib.BUILD, "test-plugins-alt")
    r = subprocess.run([fflib.exe("fitfarm"), "verify", "det-a", "--store", pool.store,
                        "--sample", "5", "--plugin-dir", alt, "--slots", "1"],
                       capture_output=True, text=True, timeout=120)
    digests = {l.split("build ")[1] for l in r.stdout.splitlines() if "build " in l}
    check.ok(r.returncode == 1 and "5 mismatches" in r.stdout and len(digests) == 2 and
             "objective 0: stored" in r.stdout,
             f"verify catches another build: {r.returncode} {r.stdout[-600:]} {r.stderr[-300:]}")
    # A second build joins the pool: status warns and it gets no jobs.
    pool.start_worker(slots=1, name="other-build", extra=["--plugin-dir", alt])
    pool.wait_workers(2)
    st = pool.status()
    warn = " ".join(st.get("warnings", []))
    check.ok("plugin sphere 1.0.0 is reported with two different builds" in warn and
             "results may differ bitwise" in warn, f"status warns: {st.get('warnings')}")
    rc, d, _ = fflib.run_eval(ep + sphere + ["--run", "det-d"], fflib.jsonl(gs[500:700]))
    check.ok(rc == 0 and all(r["fitness"][0] == sum(x * x for x in gs[500 + r["id"]]) for r in d),
             "new work still goes to the pinned build only (exact sum of squares)")

    # Only the other build left: eval says its jobs wait (not "no such
    # plugin", not silence), status says why, and a worker with the pinned
    # build finishes them.
    pool.kill(pool.workers[0], signal.SIGTERM)
    deadline = time.time() + 20
    while time.time() < deadline and len((pool.status() or {}).get("workers", [])) != 1:
        time.sleep(0.1)
    st = pool.status() or {}
    check.ok(any("plugin sphere 1.0.0: no connected worker can take its jobs" in w
                 for w in st.get("warnings", [])), f"status says the jobs wait: {st.get('warnings')}")
    waiting = subprocess.Popen([fflib.exe("fitfarm"), "eval", "--insecure"] + ep + sphere +
                               ["--run", "det-e"], stdin=subprocess.PIPE, stdout=subprocess.PIPE,
                               stderr=subprocess.PIPE, text=True)
    waiting.stdin.write(fflib.jsonl(gs[700:720]))
    waiting.stdin.close()
    first_err = waiting.stderr.readline()
    check.ok("waiting: plugin sphere 1.0.0: no connected worker can take its jobs" in first_err,
             f"eval says its jobs wait for the pinned build: {first_err.strip()}")
    pool.start_worker(slots=1, name="pinned-again")
    out_e = waiting.stdout.read()
    waiting.wait(timeout=60)
    e_lines = [json.loads(l) for l in out_e.splitlines()]
    check.ok(waiting.returncode == 0 and len(e_lines) == 20 and
             all(r["fitness"][0] == sum(x * x for x in gs[700 + r["id"]]) for r in e_lines),
             f"... and finishes once a worker with it joins (exit {waiting.returncode})")
check.done(pool)
