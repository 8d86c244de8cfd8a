"""Many connected workers: FITFARM_MANY_WORKERS (default 100 in CI; the
README quotes a run with 500) real worker processes of one slot each on one
broker. Measures the broker's CPU while the pool is idle (utime + stime from
/proc/PID/stat, proc(5), over 10 s; clock ticks from os.sysconf) and its
resident memory (VmRSS from /proc/PID/status), then runs a batch across them
and checks every result once against the sphere formula (sum of squares,
De Jong 1975). Bounds: idle CPU under 25 % of one core and RSS under 200 MiB
for up to 500 workers (generous: heartbeats cost microseconds each)."""
import os
import time

import fflib

N = int(os.environ.get("FITFARM_MANY_WORKERS", "100"))
check = fflib.Check("test_many_workers")


def cpu_seconds(pid):
    fields = open(f"/proc/{pid}/stat").read().rsplit(")", 1)[1].split()
    return (int(fields[11]) + int(fields[12])) / os.sysconf("SC_CLK_TCK")


def rss_kib(pid):
    for line in open(f"/proc/{pid}/status"):
        if line.startswith("VmRSS:"):
            return int(line.split()[1])
    return 0


with fflib.Pool() as pool:
    pool.start_broker()
    t0 = time.time()
    for i in range(N):
        pool.start_worker(slots=1, name=f"m{i}")
    pool.wait_workers(N, timeout=120)
    joined = time.time() - t0
    time.sleep(3)  # let registration settle
    pid = pool.broker.pid
    c0, w0 = cpu_seconds(pid), time.time()
    time.sleep(10)
    idle = (cpu_seconds(pid) - c0) / (time.time() - w0)
    rss = rss_kib(pid)
    check.ok(idle < 0.25, f"broker idle CPU with {N} workers: {100 * idle:.1f} % of one core")
    check.ok(rss < 200 * 1024, f"broker RSS with {N} workers: {rss / 1024:.1f} MiB")

    gs = fflib.genomes(2000, 4, seed=9)
    rc, out, err = fflib.run_eval(["--broker", pool.clients_ep, "--plugin", "sphere"],
                                  fflib.jsonl(gs), timeout=300)
    check.ok(rc == 0 and len(out) == len(gs), f"a batch across {N} workers: exit {rc} {err[-300:]}")
    check.ok(all(r["fitness"][0] == sum(x * x for x in g) for r, g in zip(out, gs)),
             "every result is the sphere formula's")
    st = pool.status()
    busy_hosts = len(st["workers"]) if st else 0
    check.ok(busy_hosts == N, f"status lists {busy_hosts} workers")
    print(f"workers: {N}, joined in {joined:.1f} s; broker idle CPU {100 * idle:.2f} % of one "
          f"core, RSS {rss / 1024:.1f} MiB")
check.done(pool)
