"""A store that cannot write, with real processes: a broker built with the
test-only store seam (fitfarm-broker-faults, tests/integration/store_faults.c)
whose SQLite is told PRAGMA max_page_count mid-run, so writes fail with
SQLITE_FULL exactly as on a full disk, without root; then, when the test runs
as root, the shipped broker on a real full filesystem (a small tmpfs).

While the store cannot write, the broker must: roll the turn back and keep
its results in memory; dispatch no new jobs; refuse a new client with a
sentence naming the cause ("store cannot write: database or disk is full at
PATH; N results waiting to be written"), not a time-out; count in `status`
only what the store holds, and say there why; log the failure rate-limited
(one line per 5 s with counts). When space comes back it resumes by itself
and every result reaches the client exactly once, bit-identical to a run
without faults. A SIGTERM while the store cannot write exits non-zero naming
the results not written; a broker restarted on the store evaluates them
again and the waiting client finishes.
Run with /usr/bin/python3 (Debian's)."""
import json
import os
import shutil
import signal
import sqlite3
import subprocess
import sys
import tempfile
import time

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import fflib  # noqa: E402
from fflib import wait_for  # noqa: E402

check = fflib.Check("test_store_full")
PARAMS = ["--plugin", "spin", "--params", '{"ms": 20}', "--seed", "11"]
PARAMS_FAST = ["--plugin", "spin", "--params", '{"ms": 0}', "--seed", "11"]



def log_text(pool):
    return open(os.path.join(pool.tmp, "broker.log"), errors="replace").read()


def failures(log):
    """Outages the broker logged (their first line, not the repeats)."""
    return log.count("cannot write (") - log.count("still cannot write (")


def answered_in_store(db_path, run):
    """Requests of run whose evaluation has a result in the file."""
    try:
        db = sqlite3.connect(f"file:{db_path}?mode=ro", uri=True, timeout=2)
        n = db.execute("SELECT count(*) FROM requests r JOIN evaluations e ON e.key = r.key"
                       " WHERE r.run_id = ? AND e.status IS NOT NULL", (run,)).fetchone()[0]
        db.close()
        return n
    except sqlite3.Error:
        return -1


def run_of(st, run):
    for r in (st or {}).get("runs", []):
        if r.get("run") == run:
            return r
    return None


def start_client(pool, run, inp, out, params=PARAMS):
    return subprocess.Popen([fflib.exe("fitfarm"), "eval", "--broker", pool.clients_ep, "--insecure",
                             "--run", run, "--in", inp, "--out", out] + params,
                            stderr=open(os.path.join(pool.tmp, f"cli-{run}.log"), "wb"))


def read_out(path):
    return [json.loads(l) for l in open(path).read().splitlines() if l.strip()]


def check_results(what, out, gs, ref):
    """Every line once, all ok, bit-identical to the fault-free reference."""
    check.ok(len(out) == len(gs), f"{what}: {len(out)} lines for {len(gs)} genomes")
    check.ok(sorted(r["line"] for r in out) == list(range(1, len(gs) + 1)),
             f"{what}: every input line answered exactly once")
    check.ok(all(r["status"] == "ok" for r in out), f"{what}: all ok")
    same = sum(1 for a, b in zip(out, ref) if a["fitness"] == b["fitness"] and a["seed"] == b["seed"])
    check.ok(same == len(gs), f"{what}: {same} of {len(gs)} bit-identical to a run without faults")
    # spin's first objective is the left-to-right IEEE 754 sum of the genome.
    check.ok(all(r["fitness"][0] == sum(g, 0.0) for r, g in zip(out, gs)),
             f"{what}: fitness 0 is each genome's sum")


def reference(gs, run, params=PARAMS):
    rc, ref, err = fflib.run_eval(["--slots", "2", "--run", run] + params, fflib.jsonl(gs))
    check.ok(rc == 0 and len(ref) == len(gs), f"reference run {run}: {err[-300:]}")
    return ref


# ---- 1. SQLite's page limit: fail, hold, refuse, recover ------------------
N = 1500
gs = fflib.genomes(N, 4, seed=5)
gs_term = fflib.genomes(600, 4, seed=6)
ref = reference(gs, "ref-full")
ref_term = reference(gs_term, "ref-term")

tmp = tempfile.mkdtemp(prefix="fitfarm-it-")
pages = os.path.join(tmp, "pages")
open(pages, "w").write("off")
with fflib.Pool(tmp=tmp, broker_exe="fitfarm-broker-faults",
                broker_env={"FITFARM_TEST_STORE_PAGES": pages}) as pool:
    pool.start_broker()
    pool.start_worker(slots=2, name="w0")
    pool.start_worker(slots=2, name="w1")
    pool.wait_workers(2)
    db_path = os.path.join(pool.store, "fitfarm.db")
    inp = os.path.join(tmp, "full.jsonl")
    out_path = os.path.join(tmp, "full.out")
    open(inp, "w").write(fflib.jsonl(gs))
    cli = start_client(pool, "full", inp, out_path)

    wait_for(lambda: answered_in_store(db_path, "full") >= 300, 60)
    open(pages, "w").write("+1")  # the "disk" takes one page more, then is full
    failed = wait_for(lambda: failures(log_text(pool)) == 1, 30)
    check.ok(failed, "the broker logged that the store cannot write")
    t_fail = time.time()

    # What a new client is told: the cause, at once, not a time-out.
    t0 = time.time()
    rc2, lines2, err2 = fflib.run_eval(["--broker", pool.clients_ep, "--run", "newcomer"] + PARAMS,
                                       fflib.jsonl(fflib.genomes(5, 4, seed=99)), timeout=120)
    took = time.time() - t0
    check.ok(rc2 != 0 and not lines2, f"a new batch is refused: exit {rc2}, {len(lines2)} lines")
    check.ok(f"store cannot write: database or disk is full at {db_path}; " in err2
             and "results waiting to be written" in err2,
             f"the refusal names the cause and the store: {err2[-600:]}")
    check.ok("in time" not in err2 and took < 20, f"not a time-out: {took:.1f} s")

    # While it lasts: status says why and counts only what the file holds;
    # no new jobs go out (queued stays, nothing running once the jobs that
    # were out have come back).
    time.sleep(2)
    samples = []
    for _ in range(4):
        st = pool.status()
        samples.append((run_of(st, "full"), answered_in_store(db_path, "full"), st))
        time.sleep(1.5)
    check.ok(all(s[0] is not None for s in samples), "status lists the run while failing")
    if all(s[0] is not None for s in samples):
        warn = [w for w in samples[-1][2].get("warnings", []) if "store cannot write" in w]
        check.ok(len(warn) == 1 and "database or disk is full" in warn[0] and db_path in warn[0],
                 f"status warns that the store cannot write: {samples[-1][2].get('warnings')}")
        check.ok(all(s[0]["done"] == s[1] for s in samples),
                 f"status counts as done only what the store holds: "
                 f"{[(s[0]['done'], s[1]) for s in samples]}")
        check.ok(all(s[0]["running"] == 0 for s in samples), f"nothing running: "
                 f"{[s[0]['running'] for s in samples]}")
        check.ok(len({s[0]["queued"] for s in samples}) == 1 and samples[0][0]["queued"] > 0,
                 f"nothing dispatched: queued stays {[s[0]['queued'] for s in samples]}")
    check.ok(cli.poll() is None, "the first client waits (its work is accepted and kept)")
    time.sleep(max(0.0, 13 - (time.time() - t_fail)))
    span = time.time() - t_fail
    log = log_text(pool)
    first = failures(log)
    again = log.count("still cannot write (")
    # store.c: one line at the failure, then at most one per 5 s (STORE_REPORT_MS).
    check.ok(first == 1 and 1 <= again <= int(span / 5) + 1,
             f"rate-limited: {first} failure line, {again} repeats in {span:.1f} s")
    check.ok("no transaction is active" not in log, "the broker knew the transaction's state")
    check.ok(log.count("refused batch") <= int(span / 5) + 1, "refusals logged rate-limited")

    # Space comes back: the broker resumes by itself.
    open(pages, "w").write("off")
    check.ok(wait_for(lambda: "writable again" in log_text(pool), 20), "the store is writable again")
    cli.wait(timeout=300)
    check.ok(cli.returncode == 0, f"the first client finished: exit {cli.returncode} "
             f"{open(os.path.join(tmp, 'cli-full.log'), errors='replace').read()[-400:]}")
    check_results("after the outage", read_out(out_path), gs, ref)
    check.ok(answered_in_store(db_path, "full") == N, "every request of the run has its result stored")
    st = pool.status()
    check.ok(st and not [w for w in st.get("warnings", []) if "store" in w], "status: no store warning")

    # ---- 1b. A batch taken in the very turn the store fails -------------
    # Its ACCEPTED waits for a commit that does not come; the client is told
    # the cause at once instead of waiting out its own time-out, and once
    # space is back the run's requests (kept in the write log) are answered
    # when it is resumed.
    caught = fflib.jsonl(fflib.genomes(5, 4, seed=123))
    # The fault seam applies the limit when a write transaction begins; the
    # first client's last acknowledgements may still wait in an open one
    # (BROKER_STORE_LAZY_MS, 100 ms, broker/store.h), which the caught
    # batch would join. Let them commit first.
    time.sleep(0.5)
    open(pages, "w").write("+0")  # full from the next write on
    t0 = time.time()
    rc3, lines3, err3 = fflib.run_eval(["--broker", pool.clients_ep, "--run", "caught"] + PARAMS,
                                       caught, timeout=120)
    took3 = time.time() - t0
    check.ok(rc3 != 0 and not lines3 and "store cannot write" in err3 and took3 < 20,
             f"a batch caught in the failing turn is told why in {took3:.1f} s: {err3[-300:]}")
    open(pages, "w").write("off")
    check.ok(wait_for(lambda: log_text(pool).count("writable again") >= 2, 20),
             "writable again after the caught batch")
    rc4, lines4, err4 = fflib.run_eval(["--broker", pool.clients_ep, "--run", "caught"] + PARAMS,
                                       caught, timeout=120)
    check.ok(rc4 == 0 and len(lines4) == 5 and all(x["status"] == "ok" for x in lines4),
             f"... and resuming the run answers it: exit {rc4} {err4[-300:]}")

    # ---- 2. SIGTERM while the store cannot write -------------------------
    inp2 = os.path.join(tmp, "term.jsonl")
    out2 = os.path.join(tmp, "term.out")
    open(inp2, "w").write(fflib.jsonl(gs_term))
    cli2 = start_client(pool, "term", inp2, out2)
    wait_for(lambda: answered_in_store(db_path, "term") >= 100, 60)
    open(pages, "w").write("+1")
    check.ok(wait_for(lambda: failures(log_text(pool)) == 3, 30), "failing again")
    time.sleep(1)
    old = pool.broker
    pool.kill(old, signal.SIGTERM)
    log = log_text(pool)
    check.ok(old.returncode not in (0, None), f"SIGTERM while failing exits non-zero: {old.returncode}")
    check.ok("results not written" in log and "evaluated again" in log,
             "the stop says how many results were not written and what becomes of them")
    stored_at_term = answered_in_store(db_path, "term")
    check.ok(0 < stored_at_term < len(gs_term), f"stopped mid-run: {stored_at_term} stored")
    open(pages, "w").write("off")
    pool.start_broker()
    cli2.wait(timeout=300)
    check.ok(cli2.returncode == 0, f"the client of the stopped broker finished: exit {cli2.returncode}")
    check_results("after SIGTERM and restart", read_out(out2), gs_term, ref_term)
    pool.kill(pool.broker, signal.SIGTERM)
    check.ok(pool.broker.returncode == 0, "a healthy SIGTERM exits 0")
    print(f"outage: {span:.1f} s, {again} repeat lines; stored at SIGTERM {stored_at_term}")
if check.failed:
    check.done(pool)


# ---- 3. A real full filesystem (root only: mount a small tmpfs) ----------
def fill(path):
    """Writes path until the filesystem says ENOSPC; returns bytes written."""
    n = 0
    with open(path, "wb", buffering=0) as f:
        for chunk in (1 << 16, 4096, 512, 1):
            try:
                while True:
                    n += f.write(b"\0" * chunk)
            except OSError:
                pass
    return n


def tmpfs_part():
    if os.geteuid() != 0:
        print("SKIP part 3 (real full filesystem): needs root to mount a tmpfs; "
              "parts 1 and 2 (SQLite's page limit) ran")
        return None
    mnt = tempfile.mkdtemp(prefix="fitfarm-tmpfs-")
    r = subprocess.run(["mount", "-t", "tmpfs", "-o", "size=64m", "tmpfs", mnt],
                       capture_output=True, text=True)
    if r.returncode != 0:
        print(f"SKIP part 3 (real full filesystem): mount -t tmpfs failed: {r.stderr.strip()}")
        os.rmdir(mnt)
        return None
    # Enough requests that their first commit outgrows the WAL space SQLite
    # can recycle: the write must reach the full filesystem.
    gs3 = fflib.genomes(20000, 4, seed=8)
    ref3 = reference(gs3, "ref-tmpfs", params=PARAMS_FAST)
    try:
        store = os.path.join(mnt, "store")
        with fflib.Pool(broker_args=["--store", store]) as pool:  # the shipped broker
            pool.start_broker()
            pool.start_worker(slots=2, name="t0")
            pool.wait_workers(1)
            filled = fill(os.path.join(mnt, "filler"))
            inp = os.path.join(pool.tmp, "tmpfs.jsonl")
            out_path = os.path.join(pool.tmp, "tmpfs.out")
            open(inp, "w").write(fflib.jsonl(gs3))
            cli = start_client(pool, "tmpfs", inp, out_path, params=PARAMS_FAST)
            check.ok(wait_for(lambda: failures(log_text(pool)) == 1, 30),
                     f"tmpfs: the broker logged that the full filesystem ({filled} bytes filled) "
                     "cannot take its writes")
            db_path = os.path.join(store, "fitfarm.db")
            rc, lines, err = fflib.run_eval(["--broker", pool.clients_ep, "--run", "late"] + PARAMS,
                                            fflib.jsonl(fflib.genomes(3, 4, seed=98)), timeout=120)
            check.ok(rc != 0 and f"store cannot write: database or disk is full at {db_path}" in err,
                     f"tmpfs: a new client is told the store is full: {err[-500:]}")
            st = pool.status()
            check.ok(st and any("database or disk is full" in w for w in st.get("warnings", [])),
                     f"tmpfs: status says so: {st and st.get('warnings')}")
            time.sleep(3)
            check.ok("writable again" not in log_text(pool), "tmpfs: still failing while the disk is full")
            os.unlink(os.path.join(mnt, "filler"))  # space comes back
            check.ok(wait_for(lambda: "writable again" in log_text(pool), 20),
                     "tmpfs: writable again, by itself")
            cli.wait(timeout=300)
            cli_err = open(os.path.join(pool.tmp, "cli-tmpfs.log"), errors="replace").read()
            if cli.returncode != 0:
                # Chunks it sent while the store was full were refused, with the cause.
                check.ok("store cannot write: database or disk is full" in cli_err,
                         f"tmpfs: the first client was told why: {cli_err[-400:]}")
                cli = start_client(pool, "tmpfs", inp, out_path, params=PARAMS_FAST)  # resume
                cli.wait(timeout=300)
            check.ok(cli.returncode == 0, f"tmpfs: the client finished: exit {cli.returncode}")
            check_results("tmpfs", read_out(out_path), gs3, ref3)
            pool.kill(pool.broker, signal.SIGTERM)
            check.ok(pool.broker.returncode == 0, "tmpfs: SIGTERM after recovery exits 0")
            return pool
    finally:
        for _ in range(50):
            if subprocess.run(["umount", mnt], capture_output=True).returncode == 0:
                break
            time.sleep(0.1)
        shutil.rmtree(mnt, ignore_errors=True)


pool3 = tmpfs_part()
check.done(pool3 or pool)
