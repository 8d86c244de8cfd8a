#!/usr/bin/python3
"""stragglers.py: the makespan of one batch on a pool with one slow machine,
with and without straggler copies (broker/speculate.h).

The pool: a real fitfarm-broker and three fitfarm-worker processes of one
slot each over TCP loopback. Two are "fast"; the third is made SLOWDOWN
times slower with the spin plugin's test knob FITFARM_SPIN_SLOWDOWN (after
its CPU work each evaluation sleeps (SLOWDOWN - 1) x ms: a slower machine
that leaves the CPU to the others, worker/plugins/spin.c). The batch: COUNT
spin evaluations of MS milliseconds, fresh genomes, submitted by one
`fitfarm eval`; makespan is from its start to its last answer.

Ideal makespan for that pool: the work shared in proportion to each
worker's speed, all finishing together:
    ideal = COUNT / (2 / MS + 1 / (SLOWDOWN x MS))
with the nominal times (on a loaded machine the fast workers are slower
than MS, which shows in both figures alike). Each mode runs --repeats
times (default 3); the median is printed with every run's value.

Run after a Release build (processes are ended by PID):
    /usr/bin/python3 tests/bench/stragglers.py [--build build] [--count 400]
        [--ms 20] [--slowdown 5] [--repeats 3]"""
import argparse
import os
import statistics
import sys
import time

HERE = os.path.dirname(os.path.abspath(__file__))
SOURCE = os.path.normpath(os.path.join(HERE, "..", ".."))


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--build", default=os.path.join(SOURCE, "build"))
    ap.add_argument("--count", type=int, default=400)
    ap.add_argument("--ms", type=int, default=20)
    ap.add_argument("--slowdown", type=float, default=5.0)
    ap.add_argument("--repeats", type=int, default=3)
    a = ap.parse_args()
    os.environ["FITFARM_BUILD_DIR"] = os.path.abspath(a.build)
    sys.path.insert(0, os.path.join(SOURCE, "tests", "integration"))
    import fflib

    params = f'{{"ms": {a.ms}}}'

    def makespan(extra, seed):
        with fflib.Pool(broker_args=extra) as pool:
            pool.start_broker()
            for name in ("fast-1", "fast-2"):
                pool.start_worker(slots=1, name=name)
            pool.start_worker(slots=1, name="slow",
                              env={"FITFARM_SPIN_SLOWDOWN": str(a.slowdown)})
            pool.wait_workers(3)
            text = fflib.jsonl(fflib.genomes(a.count, 4, seed=seed))
            t0 = time.monotonic()
            rc, lines, err = fflib.run_eval(["--broker", pool.clients_ep, "--plugin", "spin",
                                             "--params", params, "--quiet"], text)
            took = time.monotonic() - t0
            if rc != 0 or len(lines) != a.count:
                sys.exit(f"stragglers: eval failed ({rc}, {len(lines)} lines): {err}")
            log = open(os.path.join(pool.tmp, "broker.log"), errors="replace").read()
            return took, log.count("a copy goes to"), log.count("finished first")

    ideal = a.count / (2.0 / (a.ms / 1000) + 1.0 / (a.slowdown * a.ms / 1000))
    print(f"pool: 2 workers at {a.ms} ms per evaluation, 1 at {a.slowdown:g}x that; "
          f"{a.count} evaluations; {os.cpu_count()} CPUs; load average "
          f"{os.getloadavg()[0]:.2f}")
    print(f"ideal makespan: {ideal:.3f} s")
    results = {}
    for label, extra in (("without copies", ["--no-speculation"]), ("with copies", [])):
        runs = [makespan(extra, seed=1000 + r) for r in range(a.repeats)]
        times = [t for t, _, _ in runs]
        med = statistics.median(times)
        results[label] = med
        print(f"{label}: makespan {med:.3f} s (runs: "
              f"{', '.join(f'{t:.3f}' for t in times)}), {med / ideal:.2f}x ideal; copies "
              f"started {[c for _, c, _ in runs]}, won {[w for _, _, w in runs]}")
    print(f"ratio with/without copies: "
          f"{results['with copies'] / results['without copies']:.2f}")
    print(f"target: with copies within 1.25x of ideal: "
          f"{'met' if results['with copies'] <= 1.25 * ideal else 'not met'}")
    print(f"load average after: {os.getloadavg()[0]:.2f}")


if __name__ == "__main__":
    main()
