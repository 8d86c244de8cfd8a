#!/usr/bin/python3
"""bench_memory.py: what one cached result and one queued job cost a
broker in RAM, measured from the outside as the growth of the broker
process's resident set (VmRSS in /proc/PID/status).

  cached  a real fitfarm-broker (durable store in a temporary folder) and 2
          fitfarm-worker processes; `fitfarm eval` sends --rounds rounds of
          --per-round distinct sphere genomes (8 doubles), each round waited
          for, and the broker's VmRSS is read after each. Every result stays
          cached in RAM (the cache's default caps hold a million).
  queued  a second broker with one worker of one slot, busy with an
          evaluation of the `spin` plugin that takes ten minutes, so what the
          rounds send stays queued; each round is one `fitfarm eval` of spin
          genomes left running, and VmRSS is read once `fitfarm status --json`
          shows the round's genomes requested. Those clients are ended by PID.

Each figure is the slope of a least-squares line through (count, VmRSS) of
the rounds after the first --warm ones, in bytes per result or per job.
The warm-up rounds also fill SQLite's page cache, which grows with the
store up to its fixed cap (64 MiB, broker/store.c: about 150,000 sphere
evaluations' pages) and then stays: the slope past it is what the
broker's own tables cost per evaluation, which is what grows without
bound as a search goes on. The
queued figure is printed with the genome's 64 bytes subtracted. glibc
keeps freed memory for reuse, so one round's transient buffers are reused
by the next and the slope is what stays. Run from the source tree after a
Release build:
    /usr/bin/python3 tests/bench/bench_memory.py [--build build]
        [--rounds 8] [--per-round 50000] [--warm 4] [--only cached|queued]
Processes started here are ended by PID."""
import argparse
import json
import os
import statistics
import subprocess
import sys
import tempfile
import time

from benchproc import DIM, genomes_jsonl, stop

GENOME_BYTES = DIM * 8


def rss_bytes(pid):
    with open(f"/proc/{pid}/status") as f:
        for line in f:
            if line.startswith("VmRSS:"):
                return int(line.split()[1]) * 1024
    raise RuntimeError("no VmRSS line")


def start_broker(build, work):
    epfile = os.path.join(work, "endpoints")
    store = os.path.join(work, "store")
    proc = subprocess.Popen(
        [os.path.join(build, "broker", "fitfarm-broker"), "--insecure",
         "--clients", "tcp://127.0.0.1:*", "--workers", "tcp://127.0.0.1:*",
         "--endpoints-file", epfile, "--store", store],
        stdout=subprocess.DEVNULL, stderr=open(os.path.join(work, "broker.log"), "w"))
    deadline = time.time() + 60
    while not os.path.exists(epfile):
        if proc.poll() is not None or time.time() > deadline:
            stop(proc)
            sys.exit("bench_memory: the broker did not start (see broker.log)")
        time.sleep(0.01)
    eps = dict(line.split(" ", 1) for line in open(epfile).read().splitlines() if " " in line)
    return proc, eps["clients"], eps["workers"]


def slope(points):
    """Least-squares slope of (x, y) points."""
    xs = [p[0] for p in points]
    ys = [p[1] for p in points]
    return statistics.linear_regression(xs, ys).slope


def cli(build):
    return os.path.join(build, "client", "fitfarm")


def start_workers(build, workers, n):
    return [subprocess.Popen(
        [os.path.join(build, "worker", "fitfarm-worker"), "--insecure", "--broker", workers,
         "--slots", "1", "--plugin-dir", os.path.join(build, "plugins")],
        stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL) for _ in range(n)]


def measure_cached(build, rounds, per_round, warm):
    work = tempfile.mkdtemp(prefix="fitfarm-bench-mem-")
    broker, clients, workers = start_broker(build, work)
    wprocs = start_workers(build, workers, 2)
    wait_workers(build, clients, 2)
    points = []
    try:
        for r in range(rounds):
            out = subprocess.run(
                [cli(build), "eval", "--broker", clients, "--insecure", "--plugin", "sphere",
                 "--run", f"mem-cached-{r}"],
                input=genomes_jsonl(per_round, r * 1e6), capture_output=True, text=True,
                timeout=900)
            if out.returncode != 0:
                sys.exit(f"bench_memory: fitfarm eval failed: {out.stderr.strip()}")
            rss = rss_bytes(broker.pid)
            points.append(((r + 1) * per_round, rss))
            print(f"cached_round_{r + 1}: {(r + 1) * per_round} results "
                  f"{rss / 1048576:.1f} MiB", flush=True)
    finally:
        for w in wprocs:
            stop(w)
        stop(broker)
        subprocess.run(["rm", "-rf", work], check=False)
    return slope(points[warm:])


def status(build, clients):
    out = subprocess.run([cli(build), "status", "--broker", clients, "--insecure", "--json"],
                         capture_output=True, text=True, timeout=60)
    return json.loads(out.stdout.splitlines()[0]) if out.returncode == 0 else None


def wait_workers(build, clients, n):
    deadline = time.time() + 60
    while True:
        view = status(build, clients)
        if view and len(view["workers"]) >= n:
            return
        if time.time() > deadline:
            sys.exit("bench_memory: the workers did not register")
        time.sleep(0.1)


def queued_count(build, clients):
    view = status(build, clients)
    return sum(run["queued"] + run["running"] for run in view["runs"]) if view else -1


def measure_queued(build, rounds, per_round, warm):
    work = tempfile.mkdtemp(prefix="fitfarm-bench-mem-")
    broker, clients, workers = start_broker(build, work)
    wprocs = start_workers(build, workers, 1)
    wait_workers(build, clients, 1)
    waiting = []
    points = []
    try:
        for r in range(rounds):
            path = os.path.join(work, f"round{r}.jsonl")
            with open(path, "w") as f:
                f.write(genomes_jsonl(per_round, r * 1e6))
            waiting.append(subprocess.Popen(
                [cli(build), "eval", "--broker", clients, "--insecure", "--plugin", "spin",
                 "--params", '{"ms": 600000}', "--timeout", "7200",
                 "--run", f"mem-queued-{r}", "--in", path],
                stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL))
            want = (r + 1) * per_round
            deadline = time.time() + 300
            while queued_count(build, clients) < want:
                if waiting[-1].poll() is not None or time.time() > deadline:
                    sys.exit("bench_memory: the broker did not queue the round")
                time.sleep(0.2)
            time.sleep(0.3)  # the acceptance's buffers are freed
            rss = rss_bytes(broker.pid)
            points.append((want, rss))
            print(f"queued_round_{r + 1}: {want} jobs {rss / 1048576:.1f} MiB", flush=True)
    finally:
        for p in waiting:
            stop(p)
        for w in wprocs:
            stop(w)
        stop(broker)
        subprocess.run(["rm", "-rf", work], check=False)
    return slope(points[warm:])


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--build", default="build")
    ap.add_argument("--rounds", type=int, default=8)
    ap.add_argument("--per-round", type=int, default=50000)
    ap.add_argument("--warm", type=int, default=4)
    ap.add_argument("--only", choices=["cached", "queued"])
    a = ap.parse_args()
    if a.warm < 0 or a.rounds < a.warm + 2 or a.per_round < 1:
        sys.exit("bench_memory: --rounds must be at least --warm + 2, --per-round at least 1")
    if a.only != "queued":
        cached = measure_cached(a.build, a.rounds, a.per_round, a.warm)
        print(f"broker_bytes_per_cached_result: {cached:.0f} bytes (the fitness: 8 bytes)",
              flush=True)
    if a.only != "cached":
        queued = measure_queued(a.build, a.rounds, a.per_round, a.warm)
        print(f"broker_bytes_per_queued_job_beyond_genome: {queued - GENOME_BYTES:.0f} bytes "
              f"(genome {GENOME_BYTES} bytes)")


if __name__ == "__main__":
    main()
