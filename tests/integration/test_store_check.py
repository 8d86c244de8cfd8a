"""The check of the whole store runs while the broker serves, and damage it
finds stops the broker. A store holds 20,000 finished, acknowledged
evaluations (nothing pending, so the start reads almost none of its pages)
and the broker stops cleanly.
1. Restarted on the sound file, the broker is ready and logs, while
   serving, that PRAGMA quick_check found the file ok; a client's batch is
   answered from the cache meanwhile.
2. One 4 KiB page in the middle of fitfarm.db is overwritten with random
   bytes (a page the start does not read: test_store_corrupt covers damage
   to pending work, which refuses the start). The broker starts, then its
   check finds the damage: it stops by itself with a non-zero exit status
   and the report that names the file and says how to recover.
Run with /usr/bin/python3 (Debian's)."""
import json
import os
import signal
import subprocess
import sys
import time

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import fflib  # noqa: E402

N = 20000
check = fflib.Check("test_store_check")
with fflib.Pool() as pool:
    pool.start_broker()
    pool.start_worker(slots=2, name="w0")
    pool.wait_workers(1)
    genomes = fflib.genomes(N, 4, seed=5)
    r = subprocess.run([fflib.exe("fitfarm"), "eval", "--quiet", "--run", "done", "--plugin", "sphere"]
                       + pool.client_args(), input=fflib.jsonl(genomes), capture_output=True,
                       text=True, timeout=300)
    check.ok(r.returncode == 0 and len(r.stdout.splitlines()) == N,
             f"{len(r.stdout.splitlines())} of {N} evaluated: {r.stderr[-500:]}")
    pool.stop_all()
    pool.procs.clear()
    pool.workers.clear()
    db_path = os.path.join(pool.store, "fitfarm.db")

    # 1. The sound file: checked while serving.
    log_path = os.path.join(pool.tmp, "broker.log")
    open(log_path, "w").close()
    pool.start_broker()
    few = fflib.jsonl(genomes[:50])
    r = subprocess.run([fflib.exe("fitfarm"), "eval", "--quiet", "--run", "again", "--plugin", "sphere"]
                       + pool.client_args(), input=few, capture_output=True, text=True, timeout=60)
    lines = [json.loads(l) for l in r.stdout.splitlines()]
    check.ok(r.returncode == 0 and len(lines) == 50 and all(x.get("cached") for x in lines),
             f"a client is answered from the cache: {r.returncode}, {len(lines)} lines, "
             f"{lines[:1]} {r.stderr[-300:]}")
    deadline = time.time() + 60
    seen = ""
    while time.time() < deadline and "checked (PRAGMA quick_check: ok)" not in seen:
        time.sleep(0.05)
        seen = open(log_path, errors="replace").read()
    check.ok("checked (PRAGMA quick_check: ok)" in seen and "while serving" in seen,
             "the broker logs the check of the sound file, made while serving")
    pool.kill(pool.broker, signal.SIGTERM)
    check.ok(pool.broker.returncode == 0, "clean stop before the damage")
    check.ok(not os.path.exists(db_path + "-wal") or os.path.getsize(db_path + "-wal") == 0,
             "the WAL was checkpointed into fitfarm.db at the clean stop")

    # 2. One page in the middle, overwritten (a torn write or a bad sector).
    victim, pages, page_size = fflib.overwrite_middle_page(db_path, seed=2)
    check.ok(page_size == 4096 and pages > 100, f"page size {page_size}, {pages} pages")
    print(f"overwrote page {victim} of {pages}")

    epfile = os.path.join(pool.tmp, "endpoints2")
    t0 = time.time()
    b = subprocess.Popen([fflib.exe("fitfarm-broker"), "--clients", "tcp://127.0.0.1:*",
                          "--workers", "tcp://127.0.0.1:*", "--insecure", "--store", pool.store,
                          "--endpoints-file", epfile],
                         stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True)
    try:
        err = b.communicate(timeout=120)[1]
    except subprocess.TimeoutExpired:
        os.kill(b.pid, signal.SIGKILL)
        err = b.communicate()[1]
    took = time.time() - t0
    check.ok("pending evaluations queued again" in err, "the start loaded (it read no damaged page)")
    check.ok(os.path.exists(epfile), "it listened (its endpoints file was written) before the check ended")
    check.ok(b.returncode != 0, f"the broker stopped by itself with a non-zero status: {b.returncode}")
    check.ok(f"store {db_path} is damaged" in err and "PRAGMA quick_check" in err,
             f"the report names the file and the check: {err[-1500:]}")
    check.ok(".recover" in err and "cp -a" in err, "the report says how to recover")
    check.ok("stopping: the store's check found it damaged" in err, "it says why it stopped")
    print(f"stopped {took:.2f} s after its start")
check.done(pool)
