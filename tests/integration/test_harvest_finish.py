"""--on-reclaim finish with real processes: a worker whose --hours window
closes while it runs an evaluation lets that evaluation finish and reports it
(after the window closed), hands back the jobs it held but had not started,
and takes nothing more; another worker finishes the batch, each line once."""
import json
import os
import re
import signal
import sqlite3
import subprocess
import time

import fflib

check = fflib.Check("test_harvest_finish")
N = 4
gs = fflib.genomes(N, 2, seed=78)
common = ["--plugin", "spin", "--params", '{"ms": 2500}', "--seed", "6"]


def hhmmss(s):
    s %= 86400
    return f"{s // 3600:02d}:{s // 60 % 60:02d}:{s % 60:02d}"


with fflib.Pool(log_prefix="harvest-finish") as pool:
    pool.start_broker()
    now = time.localtime()
    sod = now.tm_hour * 3600 + now.tm_min * 60 + now.tm_sec
    t_end = time.mktime(now) + 6  # wall time the window closes
    lunch = pool.start_worker(slots=1, name="lunch",
                              extra=["--hours", f"{hhmmss(sod - 60)}-{hhmmss(sod + 6)}"])
    pool.wait_workers(1)
    out_path = os.path.join(pool.tmp, "out.jsonl")
    inp = os.path.join(pool.tmp, "in.jsonl")
    open(inp, "w").write(fflib.jsonl(gs))
    cli = subprocess.Popen([fflib.exe("fitfarm"), "eval", "--broker", pool.clients_ep, "--run",
                            "finish", "--insecure", "--in", inp, "--out", out_path] + common,
                           stderr=subprocess.DEVNULL)
    log_path = os.path.join(pool.tmp, "lunch.log")
    deadline = time.time() + 30
    while time.time() < deadline and "paused: outside --hours" not in open(log_path).read():
        time.sleep(0.1)
    log = open(log_path, errors="replace").read()
    m = re.search(r"paused: outside --hours [^;]*; handing (\d+) queued and (\d+) stopped jobs "
                  r"back to the broker, (\d+) running evaluations finish", log)
    check.ok(m and m.group(2) == "0" and int(m.group(3)) == 1,
             f"the window closed with one evaluation running, which finishes: {m and m.group(0)}")
    pool.start_worker(slots=2, name="evening")
    cli.wait(timeout=120)
    out = [json.loads(l) for l in open(out_path).read().splitlines() if l.strip()]
    check.ok(cli.returncode == 0 and sorted(r["id"] for r in out) == list(range(N))
             and all(r["status"] == "ok" for r in out),
             f"the batch completed, each line once: exit {cli.returncode}, {len(out)} lines")
    pool.kill(pool.broker, signal.SIGTERM)  # flush the store
    db = sqlite3.connect(f"file:{os.path.join(pool.store, 'fitfarm.db')}?mode=ro", uri=True)
    rows = db.execute("SELECT worker, finished_at, attempts FROM evaluations").fetchall()
    db.close()
    # Finished after the close, so it was running then (the rules are checked
    # once a second, so one that ended in that second may count too).
    late = [r for r in rows if r[0] == "lunch" and r[1] > t_end]
    check.ok(1 <= len(late) <= 2, f"lunch reported the evaluation it finished after its window: {late}")
    check.ok(len(rows) == N and all(r[2] == 0 for r in rows),
             f"each line evaluated once, no attempt counted: {rows}")
    print(f"lunch {sum(1 for r in rows if r[0] == 'lunch')}, "
          f"evening {sum(1 for r in rows if r[0] == 'evening')}")
check.done(pool)
