"""Slips by users and operators get a clear answer, with real processes and
real CURVE keys:
  - `fitfarm eval --in DIR`, or a folder on stdin, exits 2 naming the folder,
    like other unreadable input;
  - a key on both clients.allow and workers.allow, and an empty clients.allow,
    are each warned about in the broker's log at start;
  - a deleted allow-list at SIGHUP is warned about and the keys loaded before
    stay in force (a worker with that key still gets in), rather than
    silently admitting nobody;
  - a worker whose key is not admitted says so in its own log;
  - a second broker cannot open the same database through a hard link from
    another store folder: it exits non-zero naming the database.
"""
import os
import re
import signal
import subprocess
import tempfile
import time

import fflib

check = fflib.Check("test_operator_slips")


def wait_log(path, pattern, timeout=15):
    deadline = time.time() + timeout
    while time.time() < deadline:
        try:
            m = re.search(pattern, open(path, errors="replace").read())
        except FileNotFoundError:
            m = None
        if m:
            return m
        time.sleep(0.1)
    return None


# 1. A folder as input.
tmp = tempfile.mkdtemp(prefix="fitfarm-slips-")
base = [fflib.exe("fitfarm"), "eval", "--plugin", "sphere", "--broker", "tcp://127.0.0.1:9",
        "--insecure"]
r = subprocess.run(base + ["--in", tmp], capture_output=True, text=True, timeout=30)
check.ok(r.returncode == 2 and "is a folder" in r.stderr and tmp in r.stderr,
         f"--in DIR exits 2 naming it: {r.returncode} {r.stderr!r}")
fd = os.open(tmp, os.O_RDONLY)
r = subprocess.run(base, stdin=fd, capture_output=True, text=True, timeout=30)
os.close(fd)
check.ok(r.returncode == 2 and "standard input" in r.stderr and "is a folder" in r.stderr,
         f"a folder on stdin exits 2: {r.returncode} {r.stderr!r}")

with fflib.Pool(secure=True) as pool:
    # 2. The client's key on workers.allow too.
    fflib.allow("worker", pool.key("client.public"), pool.keys)
    pool.start_broker()
    blog = os.path.join(pool.tmp, "broker.log")
    m = wait_log(blog, r"key (\S+) \(client\) is on both clients\.allow and workers\.allow")
    check.ok(m is not None, "the broker warns about a key on both lists")

    # 3. workers.allow deleted, then SIGHUP: warned, the old list kept.
    os.unlink(os.path.join(pool.keys, "workers.allow"))
    os.kill(pool.broker.pid, signal.SIGHUP)
    m = wait_log(blog, r"workers\.allow is missing; keeping the 2 worker keys loaded before")
    check.ok(m is not None, "SIGHUP with workers.allow deleted: a warning that the old list stays")
    pool.start_worker(slots=1, name="kept")
    try:
        pool.wait_workers(1, timeout=15)
        check.ok(True, "a worker with a key of the kept list gets in")
    except RuntimeError as e:
        check.ok(False, f"a worker with a key of the kept list gets in: {e}")

    # 4. A worker whose key is on no list.
    fflib.make_key("stranger", pool.keys)
    pool.start_worker(slots=1, name="stranger", extra=["--key", pool.key("stranger.secret"),
                                                       "--broker-key", pool.key("broker.public")])
    slog = os.path.join(pool.tmp, "stranger.log")
    m = wait_log(slog, r"the broker refused this worker's key")
    check.ok(m is not None, "the refused worker says so in its own log")
    n = len(re.findall(r"refused this worker's key", open(slog, errors="replace").read()))
    check.ok(n == 1, f"one line for repeated refusals within 30 s, not {n}")

    # 5. The same database through a hard link.
    other = os.path.join(pool.tmp, "other-store")
    os.makedirs(other)
    os.link(os.path.join(pool.store, "fitfarm.db"), os.path.join(other, "fitfarm.db"))
    r = subprocess.run([fflib.exe("fitfarm-broker"), "--clients", "tcp://127.0.0.1:*",
                        "--workers", "tcp://127.0.0.1:*", "--insecure", "--store", other,
                        "--lock-wait", "1"], capture_output=True, text=True, timeout=30)
    check.ok(r.returncode != 0 and "in use by another broker through another path" in r.stderr
             and "2 names" in r.stderr,
             f"a second broker on a hard link of the database refuses: {r.returncode} {r.stderr[-600:]}")
    check.ok(pool.broker.poll() is None, "the first broker runs on")

# 6. An empty clients.allow, at start.
keys = os.path.join(tmp, "keys")
fflib.make_key("broker", keys)
open(os.path.join(keys, "clients.allow"), "w").close()
with fflib.Pool(tmp=os.path.join(tmp, "p2"), broker_args=["--key", os.path.join(keys, "broker.secret"),
                                                           "--keys", keys]) as p2:
    os.makedirs(p2.tmp, exist_ok=True)
    p2.start_broker()
    m = wait_log(os.path.join(p2.tmp, "broker.log"), r"clients\.allow admits no key: no client can connect")
    check.ok(m is not None, "an empty clients.allow is warned about")
check.done(pool)
