#!/usr/bin/env python3
"""One broker per store, and a restart right after a crash.

- A second broker on a store in use waits (--lock-wait), then exits non-zero
  with a line naming the holder's PID and host, as recorded in the lock file.
- A broker started while a dying predecessor still holds the lock (here: a
  process that holds the flock for 1.5 s, as a killed broker still ending
  would) logs once that it waits, then starts when the lock is released.
- A broker restarted at once after a SIGKILL of the previous one starts.
Run with /usr/bin/python3 (Debian's)."""
import fcntl
import os
import signal
import socket
import subprocess
import sys
import time

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import fflib  # noqa: E402

check = fflib.Check("test_store_lock")
with fflib.Pool() as pool:
    a = pool.start_broker()
    lock = os.path.join(pool.store, "fitfarm.lock")
    record = open(lock).read()
    check.ok(f"pid {a.pid}\n" in record and f"host {socket.gethostname()}\n" in record,
             f"the lock file names the holder: {record!r}")

    # A second broker on the same store: waits 1 s, then refuses, naming A.
    t0 = time.time()
    second = subprocess.run([fflib.exe("fitfarm-broker"), "--clients", "tcp://127.0.0.1:*",
                             "--workers", "tcp://127.0.0.1:*", "--insecure", "--store", pool.store,
                             "--lock-wait", "1"], capture_output=True, text=True, timeout=30)
    took = time.time() - t0
    check.ok(second.returncode != 0, f"the second broker exits non-zero: {second.returncode}")
    check.ok(f"PID {a.pid} on host {socket.gethostname()}" in second.stderr,
             f"its error names the holder: {second.stderr[-600:]}")
    check.ok(0.9 <= took < 10, f"it waited about its --lock-wait (1 s): {took:.2f} s")

    # SIGKILL and restart at once, with no delay: the new broker starts.
    pool.kill(a)
    t0 = time.time()
    b = pool.start_broker()
    check.ok(b.poll() is None, f"restarted at once after SIGKILL: running after {time.time() - t0:.2f} s")
    pool.kill(b)

    # A holder that lets go after 1.5 s (a predecessor still ending): wait, then start.
    holder = subprocess.Popen([sys.executable, "-c",
                               "import fcntl, sys, time\n"
                               "f = open(sys.argv[1], 'r+')\n"
                               "fcntl.flock(f, fcntl.LOCK_EX)\n"
                               "f.seek(0); f.truncate(); f.write('pid %d\\nhost %s\\n' % (0 + __import__('os').getpid(), 'elsewhere')); f.flush()\n"
                               "print('held', flush=True)\n"
                               "time.sleep(1.5)\n", lock], stdout=subprocess.PIPE, text=True)
    check.ok(holder.stdout.readline().strip() == "held", "a helper holds the lock")
    t0 = time.time()
    c = pool.start_broker()
    waited = time.time() - t0
    holder.wait(timeout=30)
    check.ok(c.poll() is None and 1.0 <= waited < 10,
             f"started after the holder let go: {waited:.2f} s")
    log = open(os.path.join(pool.tmp, "broker.log"), errors="replace").read()
    check.ok(log.count(f"is locked by broker PID {holder.pid} on elsewhere") == 1,
             "logged once who held the lock and that it waits")
    check.ok(f"pid {c.pid}\n" in open(lock).read(), "the lock file now names the new broker")
check.done(pool)
