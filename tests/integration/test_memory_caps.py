"""The broker's memory stays bounded under the two floods one admitted key
could send (CURVE pool, real broker and worker; the floods come from
hostile_peer), with the default caps:

A. 100,000 SUBMITs, each a new run of one genome, never acknowledged: the key
   gets --max-runs-per-key (20,000) runs, every other SUBMIT is refused with
   "too many runs" and the numbers (logged once, then counted); another key
   still runs its own work; the
   broker's peak RSS (VmHWM, proc(5)) stays under RUNS_BOUND_MB.
B. 1,500 genomes of 1 MiB into one run while the worker is busy: the run gets
   what fits --max-queued-bytes-per-run (256 MiB of genomes plus records),
   the rest is refused with "queue full" and the numbers; peak RSS stays under
   BYTES_BOUND_MB.
   (The RSS bounds are checked in a plain build only: under ASan RSS measures
   the sanitizer's shadow memory.)
C. After a restart, runs with nothing unacknowledged are not loaded: the
   broker starts with only those that still owe something (its log says how
   many runs it loaded), and an unloaded run comes back from the store on its
   next SUBMIT with its recorded seed.
The bounds are ours (README, "Memory bounds"), set from the caps: A, 20,000
runs each holding one evaluation and one unacknowledged result (about 2 KB
together) plus the broker's start-up size (7 MiB) and SQLite's page cache,
with room to spare: 120 MiB (measured 47 MiB on our 2-core machine); B, the
256 MiB bytes cap plus 64 messages in flight on one connection
(BROKER_CLIENT_RCVHWM) plus the copy a SUBMIT is decoded into plus the store's
write log of the turn (each accepted genome once more until its turn commits,
its arena up to twice that while it grows): 700 MiB (measured 500-590 MiB;
330 MiB before the write log; before the caps the same flood took 1,547 MiB).
"""
import os
import re
import subprocess
import time

import fflib

FITFARM = fflib.exe("fitfarm")
PEER = os.path.join(fflib.BUILD, "tests", "integration", "hostile_peer")
check = fflib.Check("test_memory_caps")
RUNS_BOUND_MB = 120
BYTES_BOUND_MB = 700
try:
    # Under ASan the shadow memory and the quarantine make RSS say nothing
    # about our bounds: the floods and refusals are still checked, the RSS
    # bounds only in a plain build.
    SANITIZED = "FITFARM_SANITIZE:BOOL=ON" in open(os.path.join(fflib.BUILD, "CMakeCache.txt")).read()
except OSError:
    SANITIZED = False


def vm(pid, field):
    for line in open(f"/proc/{pid}/status"):
        if line.startswith(field + ":"):
            return int(line.split()[1]) // 1024  # kB -> MiB
    return -1


def listened(out):
    m = re.search(r"listened results=(\d+) refused=(\d+) accepted=(\d+) distinct=(\d+)", out)
    return tuple(int(x) for x in m.groups()) if m else (-1, -1, -1, -1)


def peer(pool, secret, *attacks, timeout=900):
    return subprocess.run([PEER, "client", pool.clients_ep, pool.key(secret), pool.key("broker.public")]
                          + list(attacks), capture_output=True, text=True, timeout=timeout)


# A. 100,000 one-genome runs.
with fflib.Pool(secure=True) as pool:
    fflib.make_key("flood", pool.keys)
    fflib.allow("client", pool.key("flood.public"), pool.keys)
    pool.start_broker()
    pool.start_worker(slots=2, name="w0")
    pool.wait_workers(1)
    base = vm(pool.broker.pid, "VmRSS")
    t0 = time.time()
    r = peer(pool, "flood.secret", 'runs=100000,atk,spin,{"ms":0}', "listen=1000")
    took = time.time() - t0
    _, refused, accepted, _ = listened(r.stdout)
    first = re.search(r"^got REFUSED code=(\d+) text=(.*)$", r.stdout, re.M)
    peak = vm(pool.broker.pid, "VmHWM")
    print(f"A: {accepted} runs accepted, {refused} refused in {took:.1f} s; broker RSS {base} MiB at start, "
          f"peak {peak} MiB")
    check.ok(accepted == 20000 and refused == 80000, f"the key gets its 20,000 runs, the rest refused: {accepted} {refused} {r.stderr[-300:]}")
    check.ok(first is not None and first.group(1) == "4" and "too many runs: this client key has 20000 runs" in first.group(2)
             and "--max-runs-per-key" in first.group(2), f"the refusal gives the numbers: {first and first.group(2)}")
    check.ok(SANITIZED or 0 < peak < RUNS_BOUND_MB, f"peak RSS {peak} MiB under the {RUNS_BOUND_MB} MiB bound")
    deadline = time.time() + 20  # the count goes out once the 10 s quiet window ends
    while True:
        log = open(os.path.join(pool.tmp, "broker.log"), errors="replace").read()
        if "more refusals with code 4 to client" in log or time.time() > deadline:
            break
        time.sleep(0.2)
    lines = log.count("refused batch")
    check.ok(1 <= lines <= 10 and "more refusals with code 4 to client" in log,
             f"the 80,000 refusals are counted, not logged one by one: {lines} lines")
    rc, first_out, err = fflib.run_eval(pool.client_args() + ["--plugin", "spin", "--params", '{"ms": 1}'],
                                        fflib.jsonl([[float(i)] for i in range(50)]), timeout=300)
    check.ok(rc == 0 and len(first_out) == 50 and all(o["status"] == "ok" for o in first_out),
             f"another key still gets its work done: {rc} {len(first_out)} {err[-300:]}")

    # C. Restart: the flood's runs owe results (never acknowledged) and are
    # loaded; the other key's finished run is not, and comes back on use.
    status = pool.status()
    other = [x["run"] for x in (status or {}).get("runs", [])]
    pool.kill(pool.broker, sig=15)
    pool.start_broker()
    time.sleep(1.0)
    log = open(os.path.join(pool.tmp, "broker.log"), errors="replace").read()
    loads = re.findall(r"store loaded: (\d+) plugins, (\d+) runs", log)
    check.ok(len(loads) == 1 and int(loads[-1][1]) == 20000,
             f"after the restart only the 20,000 runs that owe results are loaded: {loads}")
    check.ok(len(other) == 1, f"status listed the other key's run: {other}")
    if other:
        rc, out, err = fflib.run_eval(pool.client_args() + ["--run", other[0], "--plugin", "spin", "--params", '{"ms": 1}'],
                                      fflib.jsonl([[float(i)] for i in range(50)]), timeout=300)
        same = [(o["id"], o["seed"], o["fitness"]) for o in out] == [(o["id"], o["seed"], o["fitness"]) for o in first_out]
        check.ok(rc == 0 and len(out) == 50 and same,
                 f"the unloaded run comes back from the store and answers bit for bit as before: {rc} {len(out)} {err[-300:]}")

# B. 1,500 genomes of 1 MiB.
with fflib.Pool(secure=True) as pool:
    pool.start_broker()
    pool.start_worker(slots=1, name="w0")
    pool.wait_workers(1)
    t0 = time.time()
    r = peer(pool, "client.secret", 'big=1500,1048576,bigrun,spin,{"ms":60000}', "listen=3000")
    took = time.time() - t0
    _, refused, accepted, _ = listened(r.stdout)
    first = re.search(r"^got REFUSED code=(\d+) text=(.*)$", r.stdout, re.M)
    peak = vm(pool.broker.pid, "VmHWM")
    per = 1048576 + 256
    print(f"B: {accepted} genomes of 1 MiB accepted, {refused} refused in {took:.1f} s; broker peak RSS {peak} MiB")
    check.ok(accepted + refused == 1500 and 200 <= accepted <= (256 << 20) // 1048576,
             f"the run gets what fits 256 MiB, the rest refused: {accepted} {refused} {r.stderr[-300:]}")
    check.ok(first is not None and first.group(1) == "4" and "queue full: this run holds" in first.group(2)
             and "--max-queued-bytes-per-run" in first.group(2), f"the refusal gives the numbers: {first and first.group(2)}")
    check.ok(SANITIZED or 0 < peak < BYTES_BOUND_MB, f"peak RSS {peak} MiB under the {BYTES_BOUND_MB} MiB bound")
    check.done(pool)
