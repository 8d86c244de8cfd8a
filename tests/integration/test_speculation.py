"""Straggler copies (broker/speculate.h) and the draining state, with real
processes: a broker, a worker "fast" and a worker "slow" whose spin
evaluations take 20 times as long (FITFARM_SPIN_SLOWDOWN, the plugin's
test knob: it sleeps after the CPU work; the fitness does not depend on it).

1. With copies (the default): a warm-up batch teaches the broker the
   plugin's median; then batches of 6 genomes. Whenever the slow worker
   holds a job past 1.5 x the median while "fast" is idle, a copy goes to
   "fast", finishes first, and the slow worker's child is killed (CANCEL).
   Checked: the broker logged a copy and a win, the slow worker logged the
   cancel, every genome is answered exactly once, the stored worker of a
   genome whose copy won is "fast" (the winner is recorded), and the bits
   equal those of the same run evaluated by a pool that never copies
   (--no-speculation): the seed is part of the job's content, so either
   copy gives the same fitness (speculate.h). `fitfarm status --json`
   shows each worker's median seconds for spin (slow's over twice
   fast's).
2. --no-speculation: the same batches, no copy in the broker's log.
3. Draining: a worker sent SIGTERM while evaluating shows "draining" in
   `fitfarm status --json`, finishes its evaluation, and leaves.
Run with /usr/bin/python3 (Debian's)."""
import json
import os
import re
import urllib.request
import signal
import sqlite3
import sys
import time

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import fflib  # noqa: E402

SPIN = '{"ms": 40}'
check = fflib.Check("test_speculation")


def evaluate(pool, run, genomes):
    rc, lines, err = fflib.run_eval(["--broker", pool.clients_ep, "--run", run, "--seed", "7",
                                     "--plugin", "spin", "--params", SPIN, "--quiet"],
                                    fflib.jsonl(genomes), timeout=120)
    if rc != 0:
        print(err, file=sys.stderr)
    return rc, lines


def two_workers(pool):
    pool.start_worker(slots=1, name="fast")
    pool.start_worker(slots=1, name="slow", env={"FITFARM_SPIN_SLOWDOWN": "20"})
    pool.wait_workers(2)


def batches():
    return [fflib.genomes(6, 3, seed=100 + k) for k in range(6)]


def run_pool(extra):
    """Evaluates the warm-up and the batches; returns (outputs, pool logs,
    stored worker by key, the pool's folder)."""
    outs = []
    with fflib.Pool(broker_args=extra) as pool:
        pool.start_broker(extra=["--http", "127.0.0.1:0"])
        two_workers(pool)
        rc, _ = evaluate(pool, "warm", fflib.genomes(80, 3, seed=1))
        check.ok(rc == 0, f"warm-up batch evaluated ({extra or 'copies on'})")
        for k, gs in enumerate(batches()):
            rc, lines = evaluate(pool, f"gen-{k}", gs)
            check.ok(rc == 0 and len(lines) == len(gs), f"batch {k}: {len(lines)} of {len(gs)} "
                     f"answers ({extra or 'copies on'})")
            outs.append(lines)
        with urllib.request.urlopen(pool.http_url + "/metrics", timeout=10) as r:
            page = r.read().decode()
        counts = {m.group(1): int(float(m.group(2))) for m in re.finditer(
            r'^fitfarm_straggler_copies_total\{end="(\w+)"\} (\S+)$', page, re.M)}
        st = pool.status() or {}
        medians = {w["name"]: dict(zip(w["plugins"], w["median_seconds"])).get("spin@1.0.0")
                   for w in st.get("workers", [])}
        pool.stop_all()
        db = sqlite3.connect(os.path.join(pool.store, "fitfarm.db"))
        workers = {bytes(k).hex(): w for k, w in db.execute("SELECT key, worker FROM evaluations")}
        db.close()
        logs = {name: open(os.path.join(pool.tmp, f"{name}.log"), errors="replace").read()
                for name in ("broker", "fast", "slow")}
    return outs, logs, workers, medians, counts


copied, logs, stored, medians, counts = run_pool([])
plain, plain_logs, _, _, plain_counts = run_pool(["--no-speculation"])

# Status shows each worker's median for spin. Bounds from the work itself:
# a spin evaluation is at least its 40 ms of CPU; on "slow" the knob adds a
# sleep of (20 - 1) x 40 = 760 ms, which load cannot shorten. Load stretches
# the CPU part (the children run at nice +10), so "fast" is only required
# to be well under "slow".
fast, slow = medians.get("fast"), medians.get("slow")
check.ok(fast is not None and fast >= 0.040, f"status: fast's median {fast} s (>= 40 ms)")
check.ok(slow is not None and fast and slow >= 0.800 and slow > 2 * fast,
         f"status: slow's median {slow} s (>= 800 ms), over twice fast's {fast} s")

check.ok("a copy goes to worker fast" in logs["broker"],
         "the broker copied a straggler of the slow worker to the fast one")
won = [line for line in logs["broker"].splitlines() if "finished first" in line]
check.ok(len(won) >= 1, f"a copy finished first ({len(won)} times)")
check.ok("cancelled: child pid" in logs["slow"],
         "the slow worker killed the child running the cancelled job")
check.ok("a copy goes" not in plain_logs["broker"], "--no-speculation: no copy started")
# The metrics page counts what the log says (its parser: test_metrics.py).
check.ok(counts.get("started") == logs["broker"].count("a copy goes to") and
         counts.get("won") == len(won) and
         counts["started"] == counts["won"] + counts["beaten"] + counts["failed"],
         f"fitfarm_straggler_copies_total matches the log: {counts}")
check.ok(plain_counts.get("started") == 0, f"--no-speculation: metrics {plain_counts}")

for k, (a, b) in enumerate(zip(copied, plain)):
    ids = [line["id"] for line in a]
    check.ok(len(ids) == len(set(ids)) == 6, f"batch {k}: each genome answered once")
    # Bits: fitness, seed and key as JSON text, compared exactly.
    fa = {line["id"]: json.dumps([line["fitness"], line["seed"], line["key"]]) for line in a}
    fb = {line["id"]: json.dumps([line["fitness"], line["seed"], line["key"]]) for line in b}
    check.ok(fa == fb, f"batch {k}: identical bits with and without copies")

# The winner is recorded: a job whose copy won was evaluated on "fast".
won_jobs = {line.split("job ", 1)[1].split(":", 1)[0] for line in won}
copies = [line for line in logs["broker"].splitlines() if "a copy goes to worker fast" in line]
check.ok(all(s == "fast" or s == "slow" for s in stored.values()) and
         list(stored.values()).count("fast") > list(stored.values()).count("slow"),
         "stored workers name who evaluated (fast did most)")
check.ok(len(won_jobs) >= 1 and len(copies) >= len(won_jobs),
         f"{len(copies)} copies started, {len(won_jobs)} won")

# 3. Draining shows in status.
with fflib.Pool() as pool:
    pool.start_broker()
    w = pool.start_worker(slots=1, name="leaving")
    pool.wait_workers(1)
    import subprocess
    path = os.path.join(pool.tmp, "long.jsonl")
    open(path, "w").write(fflib.jsonl(fflib.genomes(3, 2, seed=5)))
    ev = subprocess.Popen([fflib.exe("fitfarm"), "eval", "--broker", pool.clients_ep, "--insecure",
                           "--quiet", "--plugin", "spin", "--params", '{"ms": 1500}', "--in", path,
                           "--out", os.path.join(pool.tmp, "long.out")],
                          stderr=open(os.path.join(pool.tmp, "eval.log"), "wb"))
    pool.procs.append(ev)
    deadline = time.time() + 20
    busy = False
    while time.time() < deadline and not busy:
        st = pool.status() or {}
        busy = any(x.get("busy", 0) > 0 for x in st.get("workers", []))
        time.sleep(0.05)
    check.ok(busy, "the worker is evaluating")
    os.kill(w.pid, signal.SIGTERM)
    state = None
    deadline = time.time() + 5
    while time.time() < deadline and state != "draining":
        st = pool.status() or {}
        state = next((x.get("state") for x in st.get("workers", []) if x["name"] == "leaving"),
                     None)
        time.sleep(0.05)
    check.ok(state == "draining", f"status shows the stopping worker as {state!r}")
    w.wait(timeout=30)
    log = open(os.path.join(pool.tmp, "leaving.log"), errors="replace").read()
    check.ok(w.returncode == 0 and "1 evaluations" in log.split("stopped after", 1)[-1][:20],
             "the worker finished its running evaluation and stopped")
    blog = open(os.path.join(pool.tmp, "broker.log"), errors="replace").read()
    check.ok("worker leaving is draining" in blog, "the broker logged the draining worker")

check.done()
