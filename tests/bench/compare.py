#!/usr/bin/python3
"""compare.py: fitfarm's overhead against two baselines, in one invocation on
one machine, with the store on and durable (synchronous=FULL).

Each figure is the median of --repeats runs (default 3):
  wire      bench_wire: a bare ZeroMQ client -> broker -> 2 workers pipeline,
            256 credits per worker, one message per job and 64 jobs per
            message, no store, no keys, no child process; and its round trip;
  python    multiprocessing.Pool(2).map of the same sphere function over the
            same genomes, default chunks (pool started before the clock);
  library   bench_throughput --store DIR: libfitfarm -> fitfarm-broker (store
            in a fresh folder) -> 2 workers of 1 slot over TCP loopback, fresh
            genomes; round trip with 1 worker; answers from the cache; 2 slots
            of 5 ms evaluations (the spin plugin);
  cli       fitfarm eval (JSON Lines in and out) against a real fitfarm-broker
            and 2 fitfarm-worker processes, fresh genomes;
  fsync     the median time of write(4 KiB) + fsync in the store's folder.
Then the ratios the performance targets are stated in (README, "Performance").

Run from the source tree after a Release build:
    /usr/bin/python3 tests/bench/compare.py [--build build] [--count 100000]
        [--repeats 3] [--scaling]
--scaling adds the library figure for 10,000, 100,000 and 1,000,000
evaluations with the broker's peak memory and the store's size at each.
Processes started here are ended by PID."""
import argparse
import json
import multiprocessing
import os
import re
import shutil
import signal
import statistics
import subprocess
import sys
import tempfile
import time

HERE = os.path.dirname(os.path.abspath(__file__))
SOURCE = os.path.normpath(os.path.join(HERE, "..", ".."))
DIM = 8


def genome(i, base):
    return [base + i * 1e-3 + d for d in range(DIM)]


def sphere(x):
    """Sum of squares (De Jong 1975), the function every side evaluates."""
    return sum(v * v for v in x)


def figures(text):
    """'name: value unit' lines -> {name: float}."""
    out = {}
    for line in text.splitlines():
        m = re.match(r"^([a-z0-9_]+): (-?[0-9.]+) ", line)
        if m:
            out[m.group(1)] = float(m.group(2))
    return out


def run(cmd, timeout=1800):
    r = subprocess.run(cmd, capture_output=True, text=True, timeout=timeout)
    if r.returncode != 0:
        sys.exit(f"compare: {' '.join(cmd)} failed ({r.returncode}):\n{r.stderr[-2000:]}")
    return figures(r.stdout)


def wire(build, count):
    exe = os.path.join(build, "tests", "bench", "bench_wire")
    f = run([exe, "thr", "2", "256", "1", str(count)])
    f.update(run([exe, "thr", "2", "256", "64", str(count)]))
    f.update(run([exe, "rtt", "500"]))
    return {"wire_per_job": f["wire_2workers_batch1"], "wire_batched": f["wire_2workers_batch64"],
            "wire_rtt_us": f["wire_rtt_median"]}


def python_pool(count):
    tasks = [genome(i, 0.0) for i in range(count)]
    expect = [sphere(x) for x in tasks]
    with multiprocessing.Pool(2) as pool:
        pool.map(sphere, tasks[:1000])  # warm-up: the pool's processes exist
        t0 = time.perf_counter()
        got = pool.map(sphere, tasks)
        el = time.perf_counter() - t0
    if got != expect:
        sys.exit("compare: the Python pool gave wrong results")
    return {"python_pool": count / el}


def library(build, count, tmp):
    store = tempfile.mkdtemp(dir=tmp, prefix="store-")
    exe = os.path.join(build, "tests", "bench", "bench_throughput")
    f = run([exe, "--count", str(count), "--rtt-samples", "300", "--store", store,
             "--no-embedded", "--no-generations", "--busy", "400"])
    shutil.rmtree(store, ignore_errors=True)
    return {"library": f["tcp_2workers_throughput"], "library_rtt_us": f["tcp_1worker_rtt_median"],
            "cached": f["tcp_cached_throughput"], "busy_5ms": f["tcp_2slots_5ms_busy"]}


def wait_file(path, proc, what, seconds=20):
    deadline = time.time() + seconds
    while time.time() < deadline:
        if proc.poll() is not None:
            sys.exit(f"compare: {what} exited with {proc.returncode}")
        if os.path.exists(path):
            return open(path).read()
        time.sleep(0.02)
    sys.exit(f"compare: {what} did not start")


def cli(build, count, tmp):
    """fitfarm eval through a real broker with 2 one-slot workers."""
    work = tempfile.mkdtemp(dir=tmp, prefix="cli-")
    procs = []
    try:
        epfile = os.path.join(work, "endpoints")
        log = open(os.path.join(work, "daemons.log"), "wb")
        b = subprocess.Popen([os.path.join(build, "broker", "fitfarm-broker"), "--insecure",
                              "--clients", "tcp://127.0.0.1:*", "--workers", "tcp://127.0.0.1:*",
                              "--store", os.path.join(work, "store"), "--endpoints-file", epfile],
                             stdout=subprocess.DEVNULL, stderr=log)
        procs.append(b)
        eps = dict(l.split(" ", 1) for l in wait_file(epfile, b, "fitfarm-broker").split("\n") if l)
        for i in range(2):
            ready = os.path.join(work, f"ready{i}")
            w = subprocess.Popen([os.path.join(build, "worker", "fitfarm-worker"), "--insecure",
                                  "--broker", eps["workers"].strip(), "--slots", "1",
                                  "--ready-file", ready, "--name", f"w{i}"],
                                 stdout=subprocess.DEVNULL, stderr=log)
            procs.append(w)
            wait_file(ready, w, "fitfarm-worker")
        time.sleep(1)  # both registered with the broker
        base = 1e7 + time.time()  # fresh genomes: the cache never answers
        text = "".join(json.dumps(genome(i, base)) + "\n" for i in range(count))
        t0 = time.perf_counter()
        r = subprocess.run([os.path.join(build, "client", "fitfarm"), "eval", "--insecure", "--quiet",
                            "--broker", eps["clients"].strip(), "--plugin", "sphere"],
                           input=text, capture_output=True, text=True, timeout=1800)
        el = time.perf_counter() - t0
        lines = r.stdout.splitlines()
        if r.returncode != 0 or len(lines) != count:
            sys.exit(f"compare: fitfarm eval: {r.returncode}, {len(lines)} lines: {r.stderr[-1000:]}")
        last = json.loads(lines[-1])
        if last.get("status") != "ok" or last["fitness"][0] != sphere(genome(count - 1, base)):
            sys.exit(f"compare: fitfarm eval gave a wrong result: {lines[-1]}")
        return {"cli": count / el}
    finally:
        for p in procs:
            if p.poll() is None:
                p.send_signal(signal.SIGTERM)
        for p in procs:
            try:
                p.wait(timeout=10)
            except subprocess.TimeoutExpired:
                p.kill()
                p.wait()
        shutil.rmtree(work, ignore_errors=True)


def fsync_us(tmp, n=200):
    path = os.path.join(tmp, "fsync-probe")
    fd = os.open(path, os.O_WRONLY | os.O_CREAT, 0o600)
    t = []
    try:
        for _ in range(n):
            t0 = time.perf_counter()
            os.write(fd, b"x" * 4096)
            os.fsync(fd)
            t.append((time.perf_counter() - t0) * 1e6)
    finally:
        os.close(fd)
        os.unlink(path)
    return {"fsync_us": statistics.median(t)}


def scaling(build, tmp):
    exe = os.path.join(build, "tests", "bench", "bench_throughput")
    print("\nscaling (library, 2 workers, store on; one run each):")
    print(f"{'evaluations':>12} {'evals/s':>9} {'broker peak':>12} {'store':>10} {'store/eval':>11}")
    for n in (10000, 100000, 1000000):
        store = tempfile.mkdtemp(dir=tmp, prefix="scale-")
        f = run([exe, "--count", str(n), "--store", store, "--no-embedded", "--no-generations",
                 "--no-1worker"], timeout=3600)
        shutil.rmtree(store, ignore_errors=True)
        # The cached pass adds n requests and no evaluations to the store.
        print(f"{n:>12} {f['tcp_2workers_throughput']:>9.0f} {f['broker_peak_rss'] / 1024:>9.1f} MiB"
              f" {f['store_size'] / 2**20:>6.1f} MiB {f['store_size'] / n:>7.0f} B", flush=True)


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--build", default=os.path.join(SOURCE, "build"))
    ap.add_argument("--count", type=int, default=100000)
    ap.add_argument("--repeats", type=int, default=3)
    ap.add_argument("--scaling", action="store_true")
    a = ap.parse_args()
    if a.repeats < 1 or a.count < 1000:
        sys.exit("compare: --repeats >= 1 and --count >= 1000")
    tmp = tempfile.mkdtemp(prefix="fitfarm-compare-")
    try:
        samples = {}
        load0 = open("/proc/loadavg").read().split()[0]
        for rep in range(a.repeats):
            for part in (lambda: wire(a.build, a.count), lambda: python_pool(a.count),
                         lambda: library(a.build, a.count, tmp), lambda: cli(a.build, a.count, tmp),
                         lambda: fsync_us(tmp)):
                for k, v in part().items():
                    samples.setdefault(k, []).append(v)
            print(f"repeat {rep + 1} of {a.repeats} done", file=sys.stderr, flush=True)
        m = {k: statistics.median(v) for k, v in samples.items()}
        units = {"_us": "us", "busy_5ms": "%"}
        print(f"cpus: {os.cpu_count()}; {a.count} trivial evaluations per throughput figure; "
              f"median of {a.repeats}; load average at the start {load0}, at the end "
              f"{open('/proc/loadavg').read().split()[0]} (other jobs take CPU from every figure, "
              f"most of all from the 5 ms one, whose ceiling assumes two idle cores)")
        for k in sorted(m):
            unit = next((u for s, u in units.items() if k.endswith(s) or k == s), "per s")
            print(f"{k}: {m[k]:.1f} {unit}  (runs: {', '.join(f'{x:.0f}' for x in samples[k])})")
        rows = [
            ("library / wire, one message per job", m["library"] / m["wire_per_job"], ">=", 0.7),
            ("library / Python pool", m["library"] / m["python_pool"], ">=", 1.0),
            ("fitfarm eval / library", m["cli"] / m["library"], ">=", 0.8),
            ("round trip / (wire round trip + fsync)",
             m["library_rtt_us"] / (m["wire_rtt_us"] + m["fsync_us"]), "<=", 1.15),
            ("2 slots of 5 ms busy, % of the ceiling", m["busy_5ms"], ">=", 97.0),
            ("answers from the cache per s", m["cached"], ">=", 300000.0),
        ]
        print("\nratio                                        measured  target  met")
        for name, v, op, target in rows:
            met = v >= target if op == ">=" else v <= target
            print(f"{name:<44} {v:>9.3f}  {op}{target:<6g} {'yes' if met else 'no'}")
        if a.scaling:
            scaling(a.build, tmp)
    finally:
        shutil.rmtree(tmp, ignore_errors=True)


if __name__ == "__main__":
    main()
