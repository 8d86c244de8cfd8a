#!/usr/bin/env python3
"""bench_python_map.py: what the Python package costs an optimizer.

Measures, median of several repeats:
  - pool start: fitfarm.Pool() (embedded) until it returns ready, and its shutdown;
  - time per generation of pool.map(f, population) for the sphere plugin
    (and the broker's CPU time per fresh generation, where most of it goes),
    populations of 20 and 150 genomes of 10 genes, fresh genomes every
    generation (each one simulated) and the same generation again (answered
    from the cache), against the same population evaluated in-process in
    Python, on the embedded pool and through a broker (+1 worker) on loopback.

Run from the source tree after a build:
  PYTHONPATH=build/client/python FITFARM_BUILD_DIR=build /usr/bin/python3 tests/bench/bench_python_map.py
Options: --repeats N (default 30), --starts N (default 7), --slots N (default 2).
"""
import argparse
import os
import random
import statistics
import sys
import time

HERE = os.path.dirname(os.path.abspath(__file__))
SOURCE = os.path.normpath(os.path.join(HERE, "..", ".."))
os.environ.setdefault("FITFARM_BUILD_DIR", os.path.join(SOURCE, "build"))
sys.path.insert(0, os.path.join(SOURCE, "tests", "integration"))
try:
    import fitfarm
except ImportError:
    sys.path.insert(0, os.path.join(os.environ["FITFARM_BUILD_DIR"], "client", "python"))
    import fitfarm
import fflib  # noqa: E402

DIM = 10


def sphere(x):
    f = 0.0
    for xi in x:
        f += xi * xi
    return f


def median_ms(samples):
    return statistics.median(samples) * 1000.0


def bench_start(n, slots):
    starts, stops = [], []
    for _ in range(n):
        t0 = time.perf_counter()
        p = fitfarm.Pool(slots=slots)
        t1 = time.perf_counter()
        p.shutdown()
        t2 = time.perf_counter()
        starts.append(t1 - t0)
        stops.append(t2 - t1)
    return median_ms(starts), median_ms(stops), min(starts) * 1000, max(starts) * 1000


def broker_cpu_seconds():
    """CPU time (user + system, from /proc/PID/stat) of this process's
    fitfarm-broker children: the embedded pool's, or the one fflib started.
    Clock ticks (1/100 s here), so it is read over many generations."""
    total, me, tick = 0.0, os.getpid(), os.sysconf("SC_CLK_TCK")
    for pid in os.listdir("/proc"):
        if not pid.isdigit():
            continue
        try:
            with open(f"/proc/{pid}/stat") as fh:
                st = fh.read()
        except OSError:
            continue
        comm, rest = st[st.index("(") + 1:st.rindex(")")], st[st.rindex(")") + 2:].split()
        if comm == "fitfarm-broker" and int(rest[1]) == me:
            total += (int(rest[11]) + int(rest[12])) / tick
    return total


def bench_map(pool, pop, repeats, rnd):
    f = pool.function("sphere", objective=0, seed=rnd.getrandbits(32))
    pool.map(f, [[rnd.uniform(-1, 1) for _ in range(DIM)] for _ in range(pop)])  # warm up
    fresh, cached, local = [], [], []
    cpu = 0.0
    for _ in range(repeats):
        xs = [[rnd.uniform(-1, 1) for _ in range(DIM)] for _ in range(pop)]
        c0 = broker_cpu_seconds()
        t0 = time.perf_counter()
        a = pool.map(f, xs)
        t1 = time.perf_counter()
        cpu += broker_cpu_seconds() - c0
        t1b = time.perf_counter()  # the /proc scan is not timed
        b = pool.map(f, xs)
        t2 = time.perf_counter()
        c = [sphere(x) for x in xs]
        t3 = time.perf_counter()
        assert a == b == c
        fresh.append(t1 - t0)
        cached.append(t2 - t1b)
        local.append(t3 - t2)
    return median_ms(fresh), median_ms(cached), median_ms(local), cpu * 1000.0 / repeats


def bench_c_floor(pool, pop, repeats, rnd):
    """The same generation through libfitfarm's own blocking fitfarm_evaluate
    (one C call; batch built beforehand): what the library and the pool cost
    without any Python in the loop."""
    import ctypes
    from fitfarm import _lib as L
    ev = L.lib.fitfarm_evaluate
    ev.restype = ctypes.c_int
    ev.argtypes = [ctypes.c_void_p] * 4 + [ctypes.c_int]
    run = pool.run(seed=rnd.getrandbits(32))
    out = []
    for _ in range(repeats + 1):
        bh = ctypes.c_void_p()
        L.batch_new(b"sphere", None, 1, ctypes.byref(bh))
        for _ in range(pop):
            L.batch_add_f64(bh, (ctypes.c_double * DIM)(*[rnd.uniform(-1, 1) for _ in range(DIM)]), DIM)
        with pool._lock:
            t0 = time.perf_counter()
            rc = ev(run._h, bh, None, None, -1)
            out.append(time.perf_counter() - t0)
        L.batch_destroy(ctypes.byref(bh))
        assert rc == 0, rc
    run.close()
    return median_ms(out[1:])


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--repeats", type=int, default=30)
    ap.add_argument("--starts", type=int, default=7)
    ap.add_argument("--slots", type=int, default=2)
    a = ap.parse_args()
    rnd = random.Random(1)
    print(f"fitfarm {fitfarm.library_version()} ({fitfarm.library_path}); "
          f"{os.cpu_count()} CPUs; slots {a.slots}; sphere, {DIM} genes; "
          f"median of {a.repeats} generations")
    s_med, stop_med, s_min, s_max = bench_start(a.starts, a.slots)
    print(f"embedded pool start (Pool() until ready): median {s_med:.1f} ms "
          f"(min {s_min:.1f}, max {s_max:.1f}, {a.starts} starts; target < 150 ms); "
          f"shutdown median {stop_med:.1f} ms")
    rows = []
    with fitfarm.Pool(slots=a.slots) as pool:
        for pop in (20, 150):
            rows.append(("embedded", pop) + bench_map(pool, pop, a.repeats, rnd)
                        + (bench_c_floor(pool, pop, a.repeats, rnd),))
    with fflib.Pool() as procs:
        procs.start_broker()
        procs.start_worker(slots=a.slots)
        procs.wait_workers(1)
        with fitfarm.Pool(broker=procs.clients_ep, insecure=True) as pool:
            for pop in (20, 150):
                rows.append(("broker+1 worker", pop) + bench_map(pool, pop, a.repeats, rnd)
                            + (bench_c_floor(pool, pop, a.repeats, rnd),))
    print()
    print(f"{'pool':<16} {'pop':>4} {'map fresh ms':>13} {'map cached ms':>14} "
          f"{'in-process ms':>14} {'fresh/in-proc':>14} {'overhead ms':>12} {'C evaluate ms':>14} "
          f"{'Python share ms':>16} {'broker CPU ms':>14}")
    for name, pop, fr, ca, lo, bc, c in rows:
        print(f"{name:<16} {pop:>4} {fr:>13.3f} {ca:>14.3f} {lo:>14.3f} {fr / lo:>14.1f} "
              f"{fr - lo:>12.3f} {c:>14.3f} {fr - c:>16.3f} {bc:>14.2f}")
    print("\noverhead = map fresh - in-process (target for 150 trivial genomes, embedded: < 2 ms);"
          "\nC evaluate = the same fresh generation through fitfarm_evaluate alone (no Python in"
          " the loop);\nPython share = map fresh - C evaluate;"
          "\nbroker CPU = the broker's CPU time per fresh generation (mean, /proc clock ticks)")


if __name__ == "__main__":
    main()
