"""A batch system stopping a job signals every process of it: Slurm's
proctrack/linuxproc sends SIGTERM to the worker and to each of its
descendants. The worker drains (running evaluations finish, queued jobs go
back), so its slot children must survive that SIGTERM too: before, they
died with it ("evaluation killed by signal 15") and each running job was
counted as a crashed attempt. Here every descendant of a 2-slot worker gets
SIGTERM while two 2-second spin evaluations run; both must finish ok with
no attempt counted, the queued two go back and finish on a second worker.
Run with /usr/bin/python3 (Debian's)."""
import os
import signal
import sqlite3
import subprocess
import sys
import time

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import fflib  # noqa: E402

check = fflib.Check("test_job_term")


def descendants(pid):
    out, todo = [], [pid]
    while todo:
        p = todo.pop()
        try:
            for task in os.listdir(f"/proc/{p}/task"):
                kids = open(f"/proc/{p}/task/{task}/children").read().split()
                out += [int(k) for k in kids]
                todo += [int(k) for k in kids]
        except OSError:
            pass
    return out


with fflib.Pool() as pool:
    pool.start_broker()
    w = pool.start_worker(slots=2, name="job")
    pool.wait_workers(1)
    db = os.path.join(pool.store, "fitfarm.db")
    inp = os.path.join(pool.tmp, "in.jsonl")
    open(inp, "w").write(fflib.jsonl(fflib.genomes(4, 2, seed=5)))
    cli = subprocess.Popen([fflib.exe("fitfarm"), "eval", "--broker", pool.clients_ep, "--insecure",
                            "--quiet", "--run", "term", "--plugin", "spin", "--params", '{"ms": 2000}',
                            "--in", inp, "--out", os.path.join(pool.tmp, "out.jsonl")],
                           stderr=open(os.path.join(pool.tmp, "cli.log"), "wb"))
    pool.procs.append(cli)
    time.sleep(1.0)  # both slots are evaluating
    kids = descendants(w.pid)
    check.ok(len(kids) >= 2, f"the worker has its slot children: {kids}")
    for pid in [w.pid] + kids:  # what Slurm does at scancel
        try:
            os.kill(pid, signal.SIGTERM)
        except ProcessLookupError:
            pass
    w.wait(timeout=30)
    check.ok(w.returncode == 0, f"the worker drained and exited 0: {w.returncode}")
    pool.start_worker(slots=2, name="next")
    rc = cli.wait(timeout=60)
    check.ok(rc == 0, f"every line answered: exit {rc}")
    c = sqlite3.connect(f"file:{db}?mode=ro", uri=True)
    rows = c.execute("SELECT status_name, attempts, worker FROM evaluations").fetchall()
    c.close()
    check.ok(len(rows) == 4 and all(r[0] == "ok" for r in rows), f"four ok results: {rows}")
    check.ok(all(r[1] == 0 for r in rows), f"no attempt counted: {rows}")
    check.ok(sum(1 for r in rows if r[2] == "job") == 2,
             f"the two running when the job was stopped finished on it: {rows}")
    log = open(os.path.join(pool.tmp, "job.log"), errors="replace").read()
    check.ok("signal 15" not in log, "no evaluation was killed by SIGTERM")
    pool.stop_all()
    check.done(pool)
