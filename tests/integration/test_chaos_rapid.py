"""Chaos, repeated and rapid: `spin` evaluations with 2 replicates from
`fitfarm eval --broker` against a broker with a store and three workers,
while a killer SIGKILLs a random worker every 0.3-1 s (restarting it), SIGKILLs
the broker several times and restarts it at once on the same store (no delay:
a supervisor's fastest restart; the new broker waits for its dying
predecessor's store lock), and the client itself is SIGKILLed once mid-run
and started again with the same run id. Passes only if the second client
exits 0 with exactly one ok line per input line and replicate, and every
fitness and seed is bit-identical to a fault-free run of the same input.

Sizes: CI runs FITFARM_CHAOS_N=1500 genomes (3,000 evaluations) and 3 broker
kills (a sanitizer build 600); the longer run quoted in the README is
  FITFARM_CHAOS_N=10000 FITFARM_CHAOS_BROKER_KILLS=5 /usr/bin/python3 \\
      tests/integration/test_chaos_rapid.py
(20,000 evaluations with replicates). Prints what happened."""
import json
import os
import random
import signal
import subprocess
import threading
import time

import fflib


def sanitizer_build():
    try:
        return "FITFARM_SANITIZE:BOOL=ON" in open(os.path.join(fflib.BUILD, "CMakeCache.txt")).read()
    except OSError:
        return False


N = int(os.environ.get("FITFARM_CHAOS_N", "600" if sanitizer_build() else "1500"))
BROKER_KILLS = int(os.environ.get("FITFARM_CHAOS_BROKER_KILLS", "3"))
REPS = 2
check = fflib.Check("test_chaos_rapid")
gs = fflib.genomes(N, 3, seed=2026)
text = fflib.jsonl(gs)
common = ["--plugin", "spin", "--params", '{"ms": 2}', "--seed", "78", "--replicates", str(REPS)]
rnd = random.Random(11)


def client(pool, extra=()):
    return subprocess.Popen([fflib.exe("fitfarm"), "eval", "--insecure", "--broker",
                             pool.clients_ep, "--run", "rapid", "--stats"] + common + list(extra),
                            stdin=subprocess.PIPE, stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True)


with fflib.Pool(broker_args=["--lost-after", "1500"]) as pool:
    pool.start_broker()
    live = [pool.start_worker(slots=1, name=f"r{i}") for i in range(3)]
    pool.wait_workers(3)
    db_path = os.path.join(pool.store, "fitfarm.db")
    stats = {"worker kills": 0, "broker kills": 0, "client kills": 0}
    finished = threading.Event()
    errors = []
    total = N * REPS

    def killer():
        marks = [total * (k + 1) // (BROKER_KILLS + 1) for k in range(BROKER_KILLS)]
        serial = 3
        next_worker_kill = time.time() + rnd.uniform(0.3, 1.0)
        try:
            # The broker's kills follow the run's progress, polled every
            # 50 ms, not the workers' clock: a run of two seconds still
            # passes every mark before it ends.
            while not finished.wait(0.05):
                if time.time() >= next_worker_kill:
                    i = rnd.randrange(len(live))
                    pool.kill(live[i], signal.SIGKILL)
                    stats["worker kills"] += 1
                    live[i] = pool.start_worker(slots=1, name=f"r{serial}")
                    serial += 1
                    next_worker_kill = time.time() + rnd.uniform(0.3, 1.0)
                if marks and fflib.done_in_store(db_path) >= marks[0] // REPS:
                    marks.pop(0)
                    # At once, not waiting for the old process to be gone:
                    # it may still hold its store lock and ports while dying.
                    old = pool.broker
                    os.kill(old.pid, signal.SIGKILL)
                    stats["broker kills"] += 1
                    pool.start_broker()
                    old.wait(timeout=30)
        except Exception as exc:  # reported as a failure below
            errors.append(repr(exc))

    t = threading.Thread(target=killer)
    t0 = time.time()
    t.start()

    # The first client is killed once a third of the results are printed.
    first = client(pool)
    feeder = threading.Thread(target=lambda: (first.stdin.write(text), first.stdin.close()))
    feeder.start()
    printed = 0
    for line in first.stdout:
        printed += 1
        if printed >= total // 3:
            break
    os.kill(first.pid, signal.SIGKILL)
    first.wait(timeout=30)
    stats["client kills"] += 1
    feeder.join(timeout=30)

    second = client(pool)
    out_text, err = second.communicate(text, timeout=900)
    seconds = time.time() - t0
    finished.set()
    t.join()
    out = [json.loads(l) for l in out_text.splitlines() if l.strip()]

    log = open(os.path.join(pool.tmp, "broker.log"), errors="replace").read()
    requeued = sum(int(line.split("re-queued ")[1].split()[0]) for line in log.splitlines()
                   if "re-queued " in line)
    lock_waits = log.count("waiting up to")
    dups = 0
    for line in err.splitlines():
        if "duplicates dropped" in line:
            dups = int(line.split("duplicates dropped ")[1].split(",")[0])

    check.ok(not errors, f"killer ran cleanly: {errors}")
    check.ok(stats["broker kills"] == BROKER_KILLS,
             f"the broker was killed {BROKER_KILLS} times, not {stats['broker kills']}")
    check.ok(printed >= total // 3, f"the first client printed {printed} lines before its kill")
    check.ok(second.returncode == 0, f"the resumed client exited 0, not {second.returncode}: "
             f"{err[-2000:]}")
    check.ok(len(out) == total, f"{len(out)} output lines for {total} requests")
    check.ok([(r["line"], r["replicate"]) for r in out] ==
             [(i + 1, k) for i in range(N) for k in range(REPS)],
             "one line per input line and replicate, in order")
    check.ok(all(r["status"] == "ok" for r in out), "every line ok")
    # Fitness 0 of spin is the genome's doubles added left to right: Python's
    # float addition is the same IEEE 754 binary64 addition.
    check.ok(all(r["fitness"][0] == sum(gs[r["line"] - 1], 0.0) for r in out),
             "fitness 0 equals the IEEE 754 left-to-right sum of each genome")

    rc2, ref, err2 = fflib.run_eval(["--slots", "2", "--run", "rapid-ref"] + common, text,
                                    timeout=900)
    check.ok(rc2 == 0 and len(ref) == total, f"reference run: exit {rc2}, {err2[-500:]}")
    same = sum(1 for a, b in zip(out, ref) if a["fitness"] == b["fitness"] and a["seed"] == b["seed"])
    differing = total - same
    check.ok(differing == 0, f"{same} of {total} lines bit-identical to the fault-free run")

    print(f"evaluations: {total} ({N} genomes x {REPS} replicates)")
    print(f"worker kills: {stats['worker kills']}")
    print(f"broker kills (restarted at once): {stats['broker kills']}")
    print(f"client kills (resumed with the same run id): {stats['client kills']}")
    print(f"broker starts that waited for the store lock: {lock_waits}")
    print(f"jobs re-queued from dropped workers: {requeued}")
    print(f"duplicates dropped by the client: {dups}")
    print(f"lost: {total - len(out)}, differing: {differing}")
    print(f"seconds: {seconds:.1f}")
check.done(pool)
