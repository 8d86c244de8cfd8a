"""One meaning, one evaluation: zdt1 declares its default {"n": 30}
(fitfarm_plugin_param_defaults), so the same genomes sent with params {},
{"n": 30} and {"n": 30.0} in three runs are evaluated once: the second and
third runs are answered entirely from the cache with the same content keys,
the store holds one evaluation per genome, and its params are the completed
ones. The fitness is checked against the ZDT1 formula (Zitzler, Deb, Thiele
2000, refs.py). A plugin without declared defaults (sphere) keeps {} and its
explicit params apart, as before."""
import json
import os
import signal
import sqlite3
import subprocess
import time

import fflib
import refs

check = fflib.Check("test_param_defaults")
gs = fflib.genomes(40, 30, seed=5)
gs = [[abs(x) % 1.0 for x in g] for g in gs]  # ZDT1's domain is [0, 1]

with fflib.Pool() as pool:
    pool.start_broker()
    pool.start_worker(slots=2)
    pool.wait_workers(1)
    ep = ["--broker", pool.clients_ep]
    runs = {}
    for run, params in (("p-empty", None), ("p-int", '{"n": 30}'), ("p-real", '{"n": 30.0}')):
        args = ep + ["--plugin", "zdt1", "--run", run] + (["--params", params] if params else [])
        rc, out, err = fflib.run_eval(args, fflib.jsonl(gs))
        runs[run] = out
        check.ok(rc == 0 and len(out) == len(gs), f"{run}: exit {rc} {err[-300:]}")
    check.ok(not any(r["cached"] for r in runs["p-empty"]), "the first run evaluates")
    for run in ("p-int", "p-real"):
        check.ok(all(r["cached"] for r in runs[run]), f"{run} is answered from the cache")
        check.ok([r["key"] for r in runs[run]] == [r["key"] for r in runs["p-empty"]],
                 f"{run} has the first run's content keys")
    check.ok(all(refs.close(r["fitness"], refs.zdt(1, g)) for r, g in zip(runs["p-empty"], gs)),
             "fitness is ZDT1's")

    rc, sph_a, _ = fflib.run_eval(ep + ["--plugin", "sphere", "--run", "s-a"], fflib.jsonl(gs[:5]))
    rc, sph_b, _ = fflib.run_eval(ep + ["--plugin", "sphere", "--run", "s-b", "--params",
                                        '{"n": 30}'], fflib.jsonl(gs[:5]))
    check.ok(not any(r["cached"] for r in sph_b) and
             {r["key"] for r in sph_a}.isdisjoint({r["key"] for r in sph_b}),
             "sphere declares no defaults: {} and {\"n\": 30} stay two evaluations")

    pool.kill(pool.broker, signal.SIGTERM)
    db = sqlite3.connect(f"file:{os.path.join(pool.store, 'fitfarm.db')}?mode=ro", uri=True)
    n, params = db.execute("SELECT count(*), group_concat(DISTINCT params) FROM evaluations "
                           "WHERE plugin = 'zdt1'").fetchone()
    dflt = db.execute("SELECT param_defaults FROM plugins WHERE name = 'zdt1'").fetchone()[0]
    db.close()
    check.ok(n == len(gs), f"one stored evaluation per genome: {n}")
    check.ok(params == '{"n":30}', f"stored with the completed params: {params}")
    check.ok(json.loads(dflt) == {"n": 30}, f"the store remembers the defaults: {dflt}")

    # A restarted broker keys the same before any worker has said hello.
    pool.start_broker()
    r = subprocess.run([fflib.exe("fitfarm"), "eval", "--insecure"] + ep +
                       ["--plugin", "zdt1", "--run", "p-after", "--params", '{"n": 30.0}'],
                       input=fflib.jsonl(gs[:10]), capture_output=True, text=True, timeout=60)
    after = [json.loads(l) for l in r.stdout.splitlines()]
    check.ok(r.returncode == 0 and all(x["cached"] for x in after) and
             [x["key"] for x in after] == [x["key"] for x in runs["p-empty"][:10]],
             f"after a restart: same keys, from the cache ({r.stderr[-200:]})")

    # A run recorded by a broker that did not know the defaults (a store
    # from before them: plugins.param_defaults NULL, no worker connected, so
    # its requests are keyed as given) resumes with its own keys once a
    # worker has told the broker the defaults; not refused as "another genome
    # or params".
    pool.stop_all()
    pool.procs, pool.workers = [], []
    db = sqlite3.connect(os.path.join(pool.store, "fitfarm.db"))
    db.execute("UPDATE plugins SET param_defaults = NULL WHERE name = 'zdt1'")
    db.commit()
    db.close()
    pool.start_broker()
    legacy_in = fflib.jsonl(gs[:10])
    first = subprocess.Popen([fflib.exe("fitfarm"), "eval", "--insecure"] + ep +
                             ["--plugin", "zdt1", "--run", "legacy", "--params", '{"n": 30.0}'],
                             stdin=subprocess.PIPE, stdout=subprocess.PIPE,
                             stderr=subprocess.PIPE, text=True)
    first.stdin.write(legacy_in)
    first.stdin.close()
    time.sleep(2)  # accepted and stored; no worker, so nothing is answered
    first.kill()
    first.wait()
    pool.stop_all()
    pool.start_broker()
    pool.start_worker(slots=2)
    pool.wait_workers(1)
    rc, res, err = fflib.run_eval(ep + ["--plugin", "zdt1", "--run", "legacy", "--params",
                                        '{"n": 30.0}'], legacy_in)
    check.ok(rc == 0 and len(res) == 10 and all(r["status"] == "ok" for r in res),
             f"a run recorded before the defaults were known resumes: exit {rc} {err[-300:]}")
    check.ok(all(refs.close(r["fitness"], refs.zdt(1, g)) for r, g in zip(res, gs)),
             "... with ZDT1's values")
check.done(pool)
