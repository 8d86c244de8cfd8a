"""Capability routing by plugin version, with real processes.

One test plugin, "versioned", built at versions 1.0, 2.0 and 1.10
(tests/plugins/versioned.c): its first objective is the sum of x_i^2 of the
genome (recomputed here in Python), its second the version's mark (10, 20,
110), so the bits say which version computed a result. Worker b-v2 carries
2.0 and joins first (the version a plain name means: the first the store
saw), worker a-v1 carries 1.0. Checked:

- versioned@1 and versioned@1.0 only ever land on a-v1 (the store's
  provenance names the worker and the version of every result, and the
  mark is 10); versioned@2 and versioned@2.0 only on b-v2; a plain
  "versioned" on b-v2 (first seen);
- a worker given both versions loads one and says why it skipped the other;
- a constraint matching nothing, or an empty one, is refused naming the
  known versions;
- version 1.10, once seen and then gone: versioned@1 resolves to it (the
  highest known match, 1.10 after 1.9 in Debian's order, common practice),
  its jobs wait while status says no connected worker offers it, and
  finish on the 1.10 worker when it joins again;
- a broker killed and restarted while a versioned@2 batch waits keeps it
  bound to 2.0 (nothing runs on the other workers), and a plain name still
  means 2.0 after the restart.
Run with /usr/bin/python3 (Debian's)."""
import json
import os
import signal
import sqlite3
import subprocess
import sys
import time

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import fflib  # noqa: E402

check = fflib.Check("test_version_routing")
DIR = {v: os.path.join(fflib.BUILD, f"test-plugins-v{v}") for v in ("1.0", "2.0", "1.10")}
MARK = {"1.0": 10.0, "2.0": 20.0, "1.10": 110.0}
next_seed = [100]
inputs = {}  # run -> its genomes


def batch(n):
    next_seed[0] += 1
    return fflib.genomes(n, 3, seed=next_seed[0])


def provenance(pool, run):
    """(version, worker) of every result of run, from the store's rows."""
    db = sqlite3.connect(f"file:{os.path.join(pool.store, 'fitfarm.db')}?mode=ro", uri=True,
                         timeout=5)
    rows = db.execute("SELECT e.version, e.worker FROM requests r JOIN evaluations e"
                      " ON e.key = r.key WHERE r.run_id = ?", (run,)).fetchall()
    db.close()
    return rows


def eval_ok(pool, plugin, run, gs):
    rc, lines, err = fflib.run_eval(["--broker", pool.clients_ep, "--plugin", plugin,
                                     "--run", run], fflib.jsonl(gs), timeout=120)
    return rc, lines, err


def routed(pool, plugin, run, version, worker, n=24):
    gs = inputs[run] = batch(n)
    rc, lines, err = eval_ok(pool, plugin, run, gs)
    # Outside reference for objective 0: the sum of squares computed here.
    bits = rc == 0 and len(lines) == n and all(
        r["status"] == "ok" and r["fitness"] == [sum(x * x for x in gs[r["id"]]), MARK[version]]
        for r in lines)
    prov = provenance(pool, run)
    check.ok(bits, f"{plugin}: {n} results computed by version {version}: rc {rc} "
                   f"{lines[:1]} {err[-300:]}")
    check.ok(len(prov) == n and all(p == (version, worker) for p in prov),
             f"{plugin}: every result from {worker} at {version}: {sorted(set(prov))}")


def wait_n_workers(pool, n, timeout=20):
    deadline = time.time() + timeout
    st = None
    while time.time() < deadline:
        st = pool.status()
        if st is not None and len(st.get("workers", [])) == n:
            return st
        time.sleep(0.1)
    raise RuntimeError(f"pool did not come to {n} workers: {st}")


def warnings(pool):
    return (pool.status() or {}).get("warnings", [])


with fflib.Pool() as pool:
    pool.start_broker()
    b = pool.start_worker(slots=2, name="b-v2", extra=["--plugin-dir", DIR["2.0"]])
    pool.wait_workers(1)
    a = pool.start_worker(slots=2, name="a-v1", extra=["--plugin-dir", DIR["1.0"]])
    st = pool.wait_workers(2)
    offers = sorted((w["name"], tuple(w["plugins"])) for w in st["workers"])
    check.ok(offers == [("a-v1", ("versioned@1.0",)), ("b-v2", ("versioned@2.0",))],
             f"each worker offers its version: {offers}")

    # One worker, two versions of the name: the first folder wins, and its
    # log says why the other was skipped.
    both = pool.start_worker(slots=1, name="both", extra=["--plugin-dir", DIR["1.0"],
                                                          "--plugin-dir", DIR["2.0"]])
    st = wait_n_workers(pool, 3)
    mine = [w["plugins"] for w in st["workers"] if w["name"] == "both"]
    log = open(os.path.join(pool.tmp, "both.log"), errors="replace").read()
    check.ok(mine == [["versioned@1.0"]] and
             "plugin versioned version 2.0 is not loaded: this worker already carries "
             "version 1.0" in log and "start another worker" in log,
             f"a worker carries one version per name and says so: {mine} {log[-400:]}")
    pool.kill(both, signal.SIGTERM)
    wait_n_workers(pool, 2)

    routed(pool, "versioned@1", "c1", "1.0", "a-v1")
    routed(pool, "versioned@2", "c2", "2.0", "b-v2")
    routed(pool, "versioned@1.0", "e1", "1.0", "a-v1")
    routed(pool, "versioned@2.0", "e2", "2.0", "b-v2")
    routed(pool, "versioned", "plain", "2.0", "b-v2")  # the first version seen

    # Nothing matches: refused, naming what the pool knows.
    rc, lines, err = eval_ok(pool, "versioned@3", "none", batch(2))
    check.ok(rc == 2 and not lines and
             "no worker has offered plugin versioned at a version matching 3" in err and
             "known versions: 1.0, 2.0" in err, f"@3 refused with the known versions: {rc} {err}")
    rc, lines, err = eval_ok(pool, "versioned@1.1", "none", batch(2))
    check.ok(rc == 2 and "matching 1.1" in err, f"@1.1 matches neither 1.0 nor 1.10: {rc} {err}")
    rc, lines, err = eval_ok(pool, "versioned@", "none", batch(2))
    check.ok(rc == 2 and "version constraint after '@' is empty" in err,
             f"an empty constraint is refused before anything is sent: {rc} {err}")

    # 1.10 is seen, then leaves: @1 now means 1.10 (the highest match), so
    # its batch waits, and status says which version nobody offers.
    d = pool.start_worker(slots=2, name="d-v110", extra=["--plugin-dir", DIR["1.10"]])
    wait_n_workers(pool, 3)
    pool.kill(d, signal.SIGTERM)
    wait_n_workers(pool, 2)
    gs = batch(10)
    waiting = subprocess.Popen([fflib.exe("fitfarm"), "eval", "--insecure", "--broker",
                                pool.clients_ep, "--plugin", "versioned@1", "--run", "w110"],
                               stdin=subprocess.PIPE, stdout=subprocess.PIPE,
                               stderr=subprocess.PIPE, text=True)
    waiting.stdin.write(fflib.jsonl(gs))
    waiting.stdin.close()
    first_err = waiting.stderr.readline()
    want = "plugin versioned 1.10: no connected worker offers plugin versioned version 1.10"
    check.ok("waiting: " + want in first_err, f"eval says its jobs wait: {first_err.strip()}")
    ws = warnings(pool)
    check.ok(any(w.startswith(want) and "1.0 (1 worker), 2.0 (1 worker)" in w for w in ws),
             f"status says no connected worker offers 1.10, and what is offered: {ws}")
    time.sleep(1.0)
    check.ok(waiting.poll() is None and provenance(pool, "w110") and
             all(p == ("1.10", None) for p in provenance(pool, "w110")),
             f"nothing ran on the other versions: {provenance(pool, 'w110')}")
    d = pool.start_worker(slots=2, name="d-v110", extra=["--plugin-dir", DIR["1.10"]])
    out = waiting.stdout.read()
    waiting.wait(timeout=60)
    lines = [json.loads(l) for l in out.splitlines()]
    check.ok(waiting.returncode == 0 and len(lines) == 10 and
             all(r["fitness"] == [sum(x * x for x in gs[r["id"]]), 110.0] for r in lines),
             f"... and they finish once 1.10 joins, computed by 1.10 (exit {waiting.returncode})")
    check.ok(all(p == ("1.10", "d-v110") for p in provenance(pool, "w110")),
             f"all on d-v110: {set(provenance(pool, 'w110'))}")
    check.ok(not any(w.startswith("plugin versioned 1.10:") for w in warnings(pool)),
             "the warning is gone once a carrier joined")

    # Restart mid-way: a versioned@2 batch waits (b-v2 gone); the broker is
    # killed and started again on its store; the batch stays bound to 2.0.
    pool.kill(b, signal.SIGTERM)
    wait_n_workers(pool, 2)
    gs = batch(12)
    waiting = subprocess.Popen([fflib.exe("fitfarm"), "eval", "--insecure", "--broker",
                                pool.clients_ep, "--plugin", "versioned@2", "--run", "restart"],
                               stdin=subprocess.PIPE, stdout=subprocess.PIPE,
                               stderr=subprocess.PIPE, text=True)
    waiting.stdin.write(fflib.jsonl(gs))
    waiting.stdin.close()
    first_err = waiting.stderr.readline()
    check.ok("waiting: plugin versioned 2.0: no connected worker offers" in first_err,
             f"the @2 batch waits: {first_err.strip()}")
    pool.kill(pool.broker, signal.SIGKILL)
    pool.start_broker()
    wait_n_workers(pool, 2)  # a-v1 and d-v110 come back by themselves
    deadline = time.time() + 20
    while time.time() < deadline and not any(
            w.startswith("plugin versioned 2.0: no connected worker offers") for w in warnings(pool)):
        time.sleep(0.2)
    ws = warnings(pool)
    check.ok(any(w.startswith("plugin versioned 2.0: no connected worker offers plugin versioned "
                              "version 2.0") for w in ws),
             f"after the restart the pending jobs wait for 2.0: {ws}")
    time.sleep(1.0)
    check.ok(waiting.poll() is None and len(provenance(pool, "restart")) == 12 and
             all(p == ("2.0", None) for p in provenance(pool, "restart")),
             f"none ran on 1.0 or 1.10: {set(provenance(pool, 'restart'))}")
    b = pool.start_worker(slots=2, name="b-v2", extra=["--plugin-dir", DIR["2.0"]])
    out = waiting.stdout.read()
    waiting.wait(timeout=90)
    lines = [json.loads(l) for l in out.splitlines()]
    check.ok(waiting.returncode == 0 and len(lines) == 12 and
             all(r["fitness"] == [sum(x * x for x in gs[r["id"]]), 20.0] for r in lines),
             f"the batch finishes on 2.0 after the restart (exit {waiting.returncode})")
    check.ok(all(p == ("2.0", "b-v2") for p in provenance(pool, "restart")),
             f"all on b-v2: {set(provenance(pool, 'restart'))}")
    wait_n_workers(pool, 3)
    routed(pool, "versioned", "plain-after", "2.0", "b-v2")  # still the first seen
    routed(pool, "versioned@1", "c1-after", "1.10", "d-v110")
    routed(pool, "versioned@1.0", "e1-after", "1.0", "a-v1")

    # Run c1 was keyed to 1.0 by versioned@1; 1.10 is known now, so the same
    # reference means 1.10: its resume is refused naming the recorded
    # version, and resuming with that version answers from the store.
    rc, lines, err = eval_ok(pool, "versioned@1", "c1", inputs["c1"])
    check.ok(rc != 0 and "was recorded with plugin versioned version 1.0, and versioned@1 now "
                         "means version 1.10" in err and "(versioned@1.0)" in err,
             f"a resume whose constraint now resolves higher is refused with the way out: {rc} "
             f"{err[-400:]}")
    rc, lines, err = eval_ok(pool, "versioned@1.0", "c1", inputs["c1"])
    check.ok(rc == 0 and len(lines) == 24 and all(
        r["fitness"] == [sum(x * x for x in inputs["c1"][r["id"]]), 10.0] for r in lines),
        f"... and resumes with the recorded version: {rc} {err[-300:]}")
    pool.stop_all()
check.done(pool)
