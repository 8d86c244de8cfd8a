"""A damaged store is never half-loaded. A broker holds 20,000 pending
evaluations (accepted, no worker to run them) and stops cleanly; one 4 KiB
page in the middle of fitfarm.db is then overwritten with random bytes.
The broker restarted on it must refuse to start (exit status non-zero, no
endpoints file) with a message that names the file and says how to recover,
instead of starting with "0 pending evaluations queued again" as if the
damage were the last row. The recovery the message gives (keep a copy,
sqlite3 .recover, integrity_check, move in place) is then followed, with
the sqlite3 shell, and a broker starts on the result.
Run with /usr/bin/python3 (Debian's)."""
import os
import shutil
import signal
import sqlite3
import subprocess
import sys
import time

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import fflib  # noqa: E402

N = 20000
check = fflib.Check("test_store_corrupt")
with fflib.Pool() as pool:
    pool.start_broker()
    w = pool.start_worker(slots=1, name="w0")
    pool.wait_workers(1)
    pool.kill(w)  # the catalog keeps spin (the store lists it); nobody runs the jobs
    inp = os.path.join(pool.tmp, "in.jsonl")
    open(inp, "w").write(fflib.jsonl(fflib.genomes(N, 4, seed=3)))
    cli = subprocess.Popen([fflib.exe("fitfarm"), "eval", "--broker", pool.clients_ep, "--insecure",
                            "--run", "damaged", "--in", inp, "--out", os.path.join(pool.tmp, "out"),
                            "--plugin", "spin", "--params", '{"ms": 0}'],
                           stderr=open(os.path.join(pool.tmp, "cli.log"), "wb"))
    db_path = os.path.join(pool.store, "fitfarm.db")

    def pending():
        try:
            db = sqlite3.connect(f"file:{db_path}?mode=ro", uri=True, timeout=1)
            n = db.execute("SELECT count(*) FROM requests").fetchone()[0]
            db.close()
            return n
        except sqlite3.Error:
            return 0

    deadline = time.time() + 120
    while pending() < N and time.time() < deadline:
        time.sleep(0.2)
    check.ok(pending() == N, f"{pending()} of {N} requests accepted and pending")
    pool.kill(cli)
    pool.kill(pool.broker, signal.SIGTERM)
    check.ok(pool.broker.returncode == 0, "clean stop before the damage")
    check.ok(not os.path.exists(db_path + "-wal") or os.path.getsize(db_path + "-wal") == 0,
             "the WAL was checkpointed into fitfarm.db at the clean stop")

    # One page in the middle, overwritten (a torn write or a bad sector).
    victim, pages, page_size = fflib.overwrite_middle_page(db_path, seed=1)
    check.ok(page_size == 4096 and pages > 100, f"page size {page_size}, {pages} pages")
    print(f"overwrote page {victim} of {pages}")

    t0 = time.time()
    r = subprocess.run([fflib.exe("fitfarm-broker"), "--clients", "tcp://127.0.0.1:*",
                        "--workers", "tcp://127.0.0.1:*", "--insecure", "--store", pool.store,
                        "--endpoints-file", os.path.join(pool.tmp, "endpoints2")],
                       capture_output=True, text=True, timeout=120)
    took = time.time() - t0
    check.ok(r.returncode != 0, f"the broker refuses to start on the damaged store: exit {r.returncode}")
    check.ok(not os.path.exists(os.path.join(pool.tmp, "endpoints2")), "it never listened")
    check.ok(f"store {db_path} is damaged" in r.stderr, f"the message names the file: {r.stderr[-1500:]}")
    check.ok(".recover" in r.stderr and "cp -a" in r.stderr and "integrity_check" in r.stderr,
             "the message says how to recover")
    check.ok("pending evaluations queued again" not in r.stderr, "nothing was half-loaded")
    print(f"refused in {took:.2f} s")

    # The recovery the message describes, step by step.
    if shutil.which("sqlite3") is None:
        print("SKIP the recovery steps: no sqlite3 shell on PATH")
    else:
        shutil.copytree(pool.store, pool.store + ".copy")
        rec = db_path + ".recovered"
        dump = subprocess.run(["sqlite3", db_path, ".recover"], capture_output=True, timeout=300)
        if not dump.stdout.rstrip().endswith(b"COMMIT;"):
            # The message's second way, for a shell built without .recover.
            print(f"sqlite3 .recover failed ({dump.stderr.decode(errors='replace').strip()}); "
                  "using .dump as the message says")
            d = subprocess.run(["sqlite3", db_path, ".dump"], capture_output=True, timeout=300)
            dump = subprocess.run(["sed", "s/^ROLLBACK; -- due to errors$/COMMIT;/"],
                                  input=d.stdout, capture_output=True, timeout=300)
        subprocess.run(["sqlite3", rec], input=dump.stdout, capture_output=True, timeout=300)
        ic = subprocess.run(["sqlite3", rec, "PRAGMA integrity_check"], capture_output=True,
                            text=True, timeout=300)
        check.ok(ic.stdout.strip() == "ok", f"the recovered file passes integrity_check: {ic.stdout[:200]}")
        for suffix in ("-wal", "-shm"):
            if os.path.exists(db_path + suffix):
                os.unlink(db_path + suffix)
        os.replace(rec, db_path)
        b = pool.start_broker()
        check.ok(b.poll() is None, "a broker starts on the recovered store")
        log = open(os.path.join(pool.tmp, "broker.log"), errors="replace").read()
        line = [l for l in log.splitlines() if "store loaded:" in l]
        check.ok(line and "pending evaluations queued again" in line[-1], f"it loaded: {line[-1:]}")
        db = sqlite3.connect(f"file:{db_path}?mode=ro", uri=True)
        kept = db.execute("SELECT count(*) FROM requests").fetchone()[0]
        db.close()
        check.ok(0 < kept <= N, f"the rebuilt store kept {kept} of {N} requests (the rest were "
                 "on the damaged page)")
        print(line[-1] if line else "no load line")
check.done(pool)
