"""Chaos: `spin` evaluations ({"ms": 2}) from `fitfarm eval --broker` against
a broker with a store and three workers, while a killer SIGKILLs a random
worker every second (and restarts it) and SIGKILLs the broker twice (and
restarts it on the same store). Passes only if the CLI exits 0 with exactly
one ok line per input line, and every fitness is bit-identical to a
fault-free run of the same input and seed. Prints what happened.

Size: 5,000 evaluations; a sanitizer build (slower by several times) runs
1,500 unless FITFARM_CHAOS_N says otherwise."""
import os
import random
import signal
import threading
import time

import fflib


def sanitizer_build():
    try:
        return "FITFARM_SANITIZE:BOOL=ON" in open(os.path.join(fflib.BUILD, "CMakeCache.txt")).read()
    except OSError:
        return False


N = int(os.environ.get("FITFARM_CHAOS_N", "1500" if sanitizer_build() else "5000"))
check = fflib.Check("test_chaos")
gs = fflib.genomes(N, 3, seed=2024)
text = fflib.jsonl(gs)
common = ["--plugin", "spin", "--params", '{"ms": 2}', "--seed", "77"]
rnd = random.Random(5)


with fflib.Pool(broker_args=["--lost-after", "1500"]) as pool:
    pool.start_broker()
    live = [pool.start_worker(slots=1, name=f"c{i}") for i in range(3)]
    pool.wait_workers(3)
    db_path = os.path.join(pool.store, "fitfarm.db")
    stats = {"worker kills": 0, "broker kills": 0}
    finished = threading.Event()
    errors = []

    def killer():
        broker_marks = [N // 3, (2 * N) // 3]
        serial = 3
        try:
            while not finished.wait(1.0):
                i = rnd.randrange(len(live))
                pool.kill(live[i], signal.SIGKILL)
                stats["worker kills"] += 1
                live[i] = pool.start_worker(slots=1, name=f"c{serial}")
                serial += 1
                if broker_marks and fflib.done_in_store(db_path) >= broker_marks[0]:
                    broker_marks.pop(0)
                    pool.kill(pool.broker, signal.SIGKILL)
                    stats["broker kills"] += 1
                    pool.start_broker()
        except Exception as exc:  # reported as a failure below
            errors.append(repr(exc))

    t = threading.Thread(target=killer)
    t0 = time.time()
    t.start()
    rc, out, err = fflib.run_eval(["--broker", pool.clients_ep, "--run", "chaos", "--stats"] + common,
                                  text, timeout=600)
    seconds = time.time() - t0
    finished.set()
    t.join()
    log = open(os.path.join(pool.tmp, "broker.log"), errors="replace").read()
    requeued = sum(int(line.split("re-queued ")[1].split()[0]) for line in log.splitlines()
                   if "re-queued " in line)
    retried = log.count("; retrying")
    dups = 0
    for line in err.splitlines():
        if "duplicates dropped" in line:
            dups = int(line.split("duplicates dropped ")[1].split(",")[0])

    check.ok(not errors, f"killer ran cleanly: {errors}")
    check.ok(stats["broker kills"] == 2, f"the broker was killed twice, not {stats['broker kills']}")
    check.ok(stats["worker kills"] >= 2, f"workers were killed: {stats['worker kills']}")
    check.ok(rc == 0, f"the CLI exited 0, not {rc}: {err[-2000:]}")
    check.ok(len(out) == N, f"{len(out)} output lines for {N} input lines")
    check.ok([r["line"] for r in out] == list(range(1, N + 1)), "one line per input line, in order")
    check.ok(all(r["status"] == "ok" for r in out), "every line ok")

    # Fitness 0 of spin is the sum of the genome's doubles, added left to
    # right: Python's float addition is the same IEEE 754 binary64 addition.
    sums = [sum(g, 0.0) for g in gs]
    check.ok(all(r["fitness"][0] == s for r, s in zip(out, sums)),
             "fitness 0 equals the IEEE 754 left-to-right sum of each genome")

    # The fault-free reference: the same input and seed on an undisturbed pool.
    rc2, ref, err2 = fflib.run_eval(["--slots", "2", "--run", "chaos-ref"] + common, text, timeout=600)
    check.ok(rc2 == 0 and len(ref) == N, f"reference run: exit {rc2}, {err2[-500:]}")
    same = sum(1 for a, b in zip(out, ref) if a["fitness"] == b["fitness"] and a["seed"] == b["seed"])
    check.ok(same == N, f"{same} of {N} lines bit-identical to the fault-free run")

    print(f"evaluations: {N}")
    print(f"worker kills: {stats['worker kills']}")
    print(f"broker kills: {stats['broker kills']}")
    print(f"jobs re-queued from dropped workers: {requeued}")
    print(f"retries after crash or time-out: {retried}")
    print(f"duplicates dropped: {dups}")
    print(f"seconds: {seconds:.1f}")
check.done(pool)
