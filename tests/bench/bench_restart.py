#!/usr/bin/python3
"""bench_restart.py: how long a broker takes to be ready again on a large
store, and which part of that grows with the store.

Builds a store the way a long search leaves it:
  1. a real fitfarm-broker and 2 fitfarm-worker processes evaluate --seed
     sphere genomes (8 doubles) sent by `fitfarm eval`, so every table and
     index holds rows our own code wrote;
  2. a broker with no worker then accepts --pending more genomes, which stay
     queued (the work a restart must load);
  3. the store is padded with sqlite3 to --evaluations finished evaluations:
     copies of a finished row with a random 32-byte key and a random 64-byte
     genome, each with an acknowledged request row, the shape and size of a
     real one (the broker never reads them at start; only the integrity
     check does).
Then it starts fitfarm-broker on the store --repeats times and prints, for
each start, the time from exec to the endpoints file (ready to take
clients), the time of the broker's check of the whole file, which runs on
while it serves (from its log line), the time the same PRAGMA quick_check
takes alone on that file, the pending evaluations it queued again, and the
store's size; the medians last. Run from the source tree after a Release build:
    /usr/bin/python3 tests/bench/bench_restart.py [--build build]
        [--evaluations 1000000] [--seed 20000] [--pending 1000] [--repeats 3]
        [--dir DIR]
Processes started here are ended by PID. Needs about 600 bytes of disk per
evaluation (6 GB for 10,000,000)."""
import argparse
import os
import re
import shutil
import sqlite3
import statistics
import subprocess
import sys
import tempfile
import time

from benchproc import genomes_jsonl, stop


def wait_file(path, proc, what, seconds=600):
    deadline = time.time() + seconds
    while time.time() < deadline:
        if proc.poll() is not None:
            sys.exit(f"bench_restart: {what} exited with {proc.returncode}")
        if os.path.exists(path):
            return open(path).read()
        time.sleep(0.002)
    sys.exit(f"bench_restart: {what} did not start")


class Broker:
    """fitfarm-broker on the store in work/store; ready when its endpoints
    file appears."""

    def __init__(self, build, work, log_name):
        self.epfile = os.path.join(work, "endpoints")
        if os.path.exists(self.epfile):
            os.unlink(self.epfile)
        self.log_path = os.path.join(work, log_name)
        t0 = time.perf_counter()
        self.proc = subprocess.Popen(
            [os.path.join(build, "broker", "fitfarm-broker"), "--insecure",
             "--clients", "tcp://127.0.0.1:*", "--workers", "tcp://127.0.0.1:*",
             "--store", os.path.join(work, "store"), "--endpoints-file", self.epfile],
            stdout=subprocess.DEVNULL, stderr=open(self.log_path, "wb"))
        text = wait_file(self.epfile, self.proc, "fitfarm-broker")
        self.ready_s = time.perf_counter() - t0
        self.eps = dict(l.split(" ", 1) for l in text.split("\n") if l)

    def log(self):
        return open(self.log_path, errors="replace").read()


def seed_store(build, work, n_seed, n_pending):
    b = Broker(build, work, "seed.log")
    workers = []
    try:
        for i in range(2):
            ready = os.path.join(work, f"ready{i}")
            w = subprocess.Popen([os.path.join(build, "worker", "fitfarm-worker"), "--insecure",
                                  "--broker", b.eps["workers"].strip(), "--slots", "1",
                                  "--ready-file", ready, "--name", f"w{i}"],
                                 stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
            workers.append(w)
            wait_file(ready, w, "fitfarm-worker", 20)
        time.sleep(1)
        r = subprocess.run([os.path.join(build, "client", "fitfarm"), "eval", "--insecure", "--quiet",
                            "--broker", b.eps["clients"].strip(), "--plugin", "sphere",
                            "--run", "seeded"],
                           input=genomes_jsonl(n_seed, 1.0), capture_output=True, text=True,
                           timeout=3600)
        if r.returncode != 0 or len(r.stdout.splitlines()) != n_seed:
            sys.exit(f"bench_restart: fitfarm eval: {r.returncode}: {r.stderr[-1000:]}")
    finally:
        for w in workers:
            stop(w)
        stop(b.proc)
    if n_pending == 0:
        return
    # Pending work: accepted by a broker with no worker to run it.
    b = Broker(build, work, "pending.log")
    cli = subprocess.Popen([os.path.join(build, "client", "fitfarm"), "eval", "--insecure", "--quiet",
                            "--broker", b.eps["clients"].strip(), "--plugin", "sphere",
                            "--run", "pending", "--out", os.path.join(work, "pending.out")],
                           stdin=subprocess.PIPE, stdout=subprocess.DEVNULL,
                           stderr=subprocess.DEVNULL, text=True)
    try:
        cli.stdin.write(genomes_jsonl(n_pending, 1e6))
        cli.stdin.close()
        db = os.path.join(work, "store", "fitfarm.db")
        deadline = time.time() + 120
        while time.time() < deadline:
            con = sqlite3.connect(f"file:{db}?mode=ro", uri=True, timeout=5)
            n = con.execute("SELECT count(*) FROM evaluations WHERE status IS NULL").fetchone()[0]
            con.close()
            if n >= n_pending:
                break
            time.sleep(0.2)
        else:
            sys.exit(f"bench_restart: only {n} of {n_pending} pending evaluations were accepted")
    finally:
        stop(cli)
        stop(b.proc)


def pad_store(work, n_total):
    """Copies of a finished evaluation with random keys and genomes, each
    with an acknowledged request, until n_total finished evaluations."""
    con = sqlite3.connect(os.path.join(work, "store", "fitfarm.db"), timeout=30)
    con.execute("PRAGMA cache_size = -1000000")  # 1 GB: random keys, one pass
    have = con.execute("SELECT count(*) FROM evaluations WHERE status IS NOT NULL").fetchone()[0]
    todo = n_total - have
    if todo <= 0:
        con.close()
        return 0.0
    cols = [r[1] for r in con.execute("PRAGMA table_info(evaluations)")]
    copied = ", ".join("randomblob(32)" if c == "key" else
                       "randomblob(64)" if c == "genome" else
                       "'padding'" if c == "run_id" else "t." + c for c in cols)
    t0 = time.perf_counter()
    con.execute("BEGIN")
    con.execute("INSERT OR IGNORE INTO runs(run_id, seed, seed_mode, created, last_activity)"
                " VALUES ('padding', 1, 0, 0, 0)")
    chunk = 500000
    done = 0
    while done < todo:
        k = min(chunk, todo - done)
        con.execute(
            f"INSERT INTO evaluations({', '.join(cols)})"
            " WITH RECURSIVE n(i) AS (SELECT 1 UNION ALL SELECT i + 1 FROM n WHERE i < ?)"
            f" SELECT {copied} FROM n,"
            " (SELECT * FROM evaluations WHERE status IS NOT NULL LIMIT 1) AS t", (k,))
        done += k
        print(f"  padded {have + done:,} of {n_total:,} finished evaluations", flush=True)
    con.execute("INSERT INTO requests(run_id, tag, batch_tag, replicate, key, cached, acked,"
                " created, fresh) SELECT 'padding', rowid, 0, 0, key, 0, 1, created, 0"
                " FROM evaluations WHERE run_id = 'padding'")
    # Every padding request is acknowledged, as the broker records it (store
    # schema 4): the run's mark is one past its last tag.
    con.execute("UPDATE runs SET acked_below = (SELECT max(tag) + 1 FROM requests"
                " WHERE run_id = 'padding') WHERE run_id = 'padding'")
    con.execute("COMMIT")
    con.execute("PRAGMA wal_checkpoint(TRUNCATE)")
    con.close()
    return time.perf_counter() - t0


def store_bytes(work):
    d = os.path.join(work, "store")
    return sum(os.path.getsize(os.path.join(d, f)) for f in os.listdir(d))


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--build", default="build")
    ap.add_argument("--evaluations", type=int, default=1000000)
    ap.add_argument("--seed", type=int, default=20000)
    ap.add_argument("--pending", type=int, default=1000)
    ap.add_argument("--repeats", type=int, default=3)
    ap.add_argument("--dir", default=None, help="where the store is built (default: a temporary folder)")
    a = ap.parse_args()
    if a.evaluations < a.seed or a.seed < 1 or a.pending < 0 or a.repeats < 1:
        sys.exit("bench_restart: need --evaluations >= --seed >= 1, --pending >= 0, --repeats >= 1")
    work = tempfile.mkdtemp(prefix="fitfarm-restart-", dir=a.dir)
    try:
        t0 = time.perf_counter()
        seed_store(a.build, work, a.seed, a.pending)
        print(f"seeded: {a.seed:,} evaluated through the broker, {a.pending:,} pending "
              f"({time.perf_counter() - t0:.1f} s)")
        pad_s = pad_store(work, a.evaluations)
        size = store_bytes(work)
        print(f"store: {a.evaluations:,} finished evaluations, {size / 1e6:,.0f} MB "
              f"({size / a.evaluations:.0f} bytes each; padding took {pad_s:.1f} s)", flush=True)
        ready, check, alone, queued = [], [], [], []
        for i in range(a.repeats):
            b = Broker(a.build, work, f"restart{i}.log")
            # Ready to serve; the check of the whole file runs on (store_check.h)
            # and logs its verdict when it ends.
            checked = None
            deadline = time.time() + 3600
            while checked is None and time.time() < deadline and b.proc.poll() is None:
                m = re.search(r"checked \(PRAGMA quick_check: ok\) in ([0-9.]+) s", b.log())
                checked = float(m.group(1)) if m else None
                time.sleep(0.05)
            stop(b.proc)
            log = b.log()
            q = re.search(r"([0-9]+) pending evaluations queued again", log)
            if not q or checked is None:
                sys.exit(f"bench_restart: the broker's log lacks the load or check line:\n{log[-2000:]}")
            # The same PRAGMA through Python's sqlite3 (Debian's libsqlite3, as
            # the broker's) on the same file, in the page cache as for the broker.
            con = sqlite3.connect(os.path.join(work, "store", "fitfarm.db"), timeout=30)
            t0 = time.perf_counter()
            verdict = con.execute("PRAGMA quick_check(5)").fetchone()[0]
            alone.append(time.perf_counter() - t0)
            con.close()
            if verdict != "ok":
                sys.exit(f"bench_restart: quick_check: {verdict}")
            ready.append(b.ready_s)
            check.append(checked)
            queued.append(int(q.group(1)))
            print(f"start {i + 1}: ready in {b.ready_s:.2f} s; the broker's check, while serving, "
                  f"{checked:.1f} s; quick_check alone {alone[-1]:.2f} s; {queued[-1]:,} pending "
                  "evaluations queued again")
        if any(q != a.pending for q in queued):
            sys.exit(f"bench_restart: a start queued {queued}, not {a.pending} pending evaluations")
        r, c, al = statistics.median(ready), statistics.median(check), statistics.median(alone)
        print(f"restart_ready: {r:.2f} s  (runs: {', '.join(f'{x:.2f}' for x in ready)})")
        print(f"restart_check_while_serving: {c:.1f} s  (runs: {', '.join(f'{x:.1f}' for x in check)})")
        print(f"quick_check_alone: {al:.2f} s  (runs: {', '.join(f'{x:.2f}' for x in alone)})")
        if al > 0:
            print(f"quick_check_rate: {size / al / 1e6:,.0f} MB/s of store")
        print(f"store_size: {size} bytes")
    finally:
        shutil.rmtree(work, ignore_errors=True)


if __name__ == "__main__":
    main()
