"""Revocation mid-run with real processes and real keys (CURVE pool, two
workers with their own keys, a raw owner connection from hostile_peer).

1. The owner (key "client") submits 600 requests of 30 ms CPU each to run
   "rv" and listens. Once results flow, its key is deleted from
   clients.allow and the broker gets SIGHUP. From the next turn: the owner's
   connection receives nothing more (no RESULTS message stamped later than
   the reload's log line plus one turn's slack), the run is parked, so the
   pool stops evaluating its queued work (the run's finished count stops
   growing once the jobs already on the workers are done), and the log says
   how many connections were cut, results withheld and jobs parked.
2. Another key's run ("bystander", `fitfarm eval`) still completes on the
   same pool while "rv" is parked.
3. Re-admitting the key and SIGHUP unparks the run; a removed worker key at
   the same reload drops that worker and re-queues its jobs (as before); the
   owner's new connection (the same 600 requests again) gets all 600
   results, every evaluation with the seed the published derivation gives
   (refs.seed, Python's hashlib, RFC 7693).
4. A broker started after the key was removed again parks its runs at start.
"""
import datetime
import os
import re
import signal
import sqlite3
import struct
import subprocess
import time

import fflib
import refs

FITFARM = fflib.exe("fitfarm")
PEER = os.path.join(fflib.BUILD, "tests", "integration", "hostile_peer")
check = fflib.Check("test_revoke")
SPIN = '{"ms":30}'
N = 600


def log_text(pool):
    return open(os.path.join(pool.tmp, "broker.log"), errors="replace").read()


def wait_log(pool, text, timeout=15):
    deadline = time.time() + timeout
    while time.time() < deadline:
        if text in log_text(pool):
            return True
        time.sleep(0.05)
    return False


def log_time(pool, text):
    """Epoch seconds of the first broker log line holding text (its UTC ISO stamp)."""
    for line in log_text(pool).splitlines():
        if text in line:
            stamp = line.split(" ", 1)[0]
            return datetime.datetime.strptime(stamp, "%Y-%m-%dT%H:%M:%S.%fZ").replace(
                tzinfo=datetime.timezone.utc).timestamp()
    return None


def run_done(pool, run_id):
    try:
        db = sqlite3.connect(f"file:{pool.store}/fitfarm.db?mode=ro", uri=True, timeout=2)
        n = db.execute("SELECT count(*) FROM requests r JOIN evaluations e ON r.key = e.key"
                       " WHERE r.run_id = ? AND e.status IS NOT NULL", (run_id,)).fetchone()[0]
        db.close()
        return n
    except sqlite3.Error:
        return -1


def remove_line(path, suffix):
    lines = [l for l in open(path).read().splitlines() if not l.endswith(suffix)]
    open(path, "w").write("\n".join(lines) + "\n")


with fflib.Pool(secure=True) as pool:
    fflib.make_key("worker2", pool.keys)
    fflib.allow("worker", pool.key("worker2.public"), pool.keys)
    fflib.make_key("bystander", pool.keys)
    fflib.allow("client", pool.key("bystander.public"), pool.keys)
    pool.start_broker()
    pool.start_worker(slots=1, name="w0")
    pool.start_worker(slots=1, name="w1", extra=["--key", pool.key("worker2.secret"),
                                                 "--broker-key", pool.key("broker.public")])
    pool.wait_workers(2)

    # 1. Revoke the owner's key mid-run.
    owner = subprocess.Popen([PEER, "client", pool.clients_ep, pool.key("client.secret"), pool.key("broker.public"),
                              f"submit=rv,99,0,{N},spin,{SPIN}", "listen=30000"],
                             stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    deadline = time.time() + 60
    while run_done(pool, "rv") < 60 and time.time() < deadline:
        time.sleep(0.05)
    allow_path = os.path.join(pool.keys, "clients.allow")
    saved_allow = open(allow_path).read()
    remove_line(allow_path, " client")
    pool.broker.send_signal(signal.SIGHUP)
    check.ok(wait_log(pool, "revocation: 1 client connections cut off"), "the reload logs the cut-off")
    t_cut = log_time(pool, "revocation: 1 client connections cut off")
    time.sleep(1.5)  # the jobs already on the workers finish
    done_a = run_done(pool, "rv")

    # 2. Another key's run completes meanwhile.
    gs = [[float(i)] for i in range(100)]
    rc, out, err = fflib.run_eval(pool.client_args()[:2] + ["--key", pool.key("bystander.secret"), "--broker-key",
                                  pool.key("broker.public"), "--run", "bystander", "--plugin", "spin",
                                  "--params", SPIN], fflib.jsonl(gs), timeout=120)
    check.ok(rc == 0 and len(out) == 100 and all(o["status"] == "ok" for o in out),
             f"another key's run completes while rv is parked: {rc} {len(out)} {err[-300:]}")
    time.sleep(1.0)
    done_b = run_done(pool, "rv")
    check.ok(0 < done_a < N and done_b == done_a,
             f"the parked run's queued work is not evaluated: {done_a} then {done_b} of {N} done")
    owner_out, owner_err = owner.communicate(timeout=60)
    stamps = [(int(n), int(at)) for n, at in re.findall(r"^got RESULTS run=rv n=(\d+) at=(\d+)$", owner_out, re.M)]
    got = sum(n for n, _ in stamps)
    late = [at for _, at in stamps if t_cut is not None and at / 1000.0 > t_cut + 0.25]
    check.ok(t_cut is not None and 0 < got < N and not late,
             f"the revoked connection receives nothing after the reload: {got} results, {len(late)} messages later "
             f"than {t_cut}: {late[:3]} {owner_err[-200:]}")
    m = re.search(r"run rv: cut off client \S+ \(key \w+\): .*; (\d+) results it had not acknowledged are withheld", log_text(pool))
    check.ok(m is not None, "the log names the cut-off run and how many results it withholds")
    m = re.search(r"run rv parked: its owner key \w+ was removed from clients.allow; (\d+) queued jobs parked", log_text(pool))
    parked = int(m.group(1)) if m else -1
    check.ok(m is not None and parked > 0 and parked + done_a <= N,
             f"the log says how many queued jobs were parked: {parked} (with {done_a} done of {N})")

    # 3. Re-admit the key: the run is unparked and the owner's new connection
    # resumes it; mid-way, w0's key is removed (dropped, its jobs re-queued).
    open(allow_path, "w").write(saved_allow)
    pool.broker.send_signal(signal.SIGHUP)
    check.ok(wait_log(pool, "run rv unparked"), "re-admitting the key unparks the run")
    resumed = subprocess.Popen([PEER, "client", pool.clients_ep, pool.key("client.secret"), pool.key("broker.public"),
                                f"submit=rv,99,0,{N},spin,{SPIN}", f"listen=150000,{N}"],
                               stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    deadline = time.time() + 60
    while run_done(pool, "rv") < done_b + 30 and time.time() < deadline:
        time.sleep(0.05)
    remove_line(os.path.join(pool.keys, "workers.allow"), " worker")
    pool.broker.send_signal(signal.SIGHUP)
    check.ok(wait_log(pool, "dropped: its key was removed from workers.allow; re-queued"),
             "the removed worker is dropped and its jobs re-queued")
    m = re.search(r"worker w0 \(key \w+\) dropped: its key was removed from workers.allow; re-queued (\d+) jobs", log_text(pool))
    check.ok(m is not None and int(m.group(1)) >= 1, f"w0 held jobs mid-run and they were re-queued: {m and m.group(0)}")
    out, err = resumed.communicate(timeout=300)
    r = subprocess.CompletedProcess([], 0, out, err)
    m = re.search(r"listened results=(\d+) refused=(\d+) accepted=(\d+) distinct=(\d+)", r.stdout)
    check.ok(m is not None and int(m.group(4)) == N and int(m.group(2)) == 0,
             f"the owner's new connection gets all {N} results: {m and m.group(0)} {r.stderr[-300:]}")
    check.ok(run_done(pool, "rv") == N, f"every request of rv is answered: {run_done(pool, 'rv')}")
    db = sqlite3.connect(f"file:{pool.store}/fitfarm.db?mode=ro", uri=True)
    rows = db.execute("SELECT e.genome, e.seed FROM requests r JOIN evaluations e ON r.key = e.key"
                      " WHERE r.run_id = 'rv'").fetchall()
    db.close()
    bad = [g for g, sd in rows if (sd % (1 << 64)) != refs.seed(99, list(struct.unpack("<d", g)), 0)]
    check.ok(len(rows) == N and not bad, f"every evaluation of rv has the published seed derivation: {len(bad)} differ")

    # 4. A key removed while the broker is down: its runs are parked at start.
    remove_line(allow_path, " client")
    pool.kill(pool.broker, sig=signal.SIGTERM)
    pool.start_broker()
    check.ok(wait_log(pool, "revocation: 0 client connections cut off (0 unacknowledged results withheld), 1 runs parked"),
             "a broker started after the key was removed parks its runs")
    check.done(pool)
