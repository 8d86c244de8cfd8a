"""Idle harvesting with real processes: a worker outside its --hours takes
nothing; a worker whose machine is loaded past --max-load (the load read from
a test-only file, FITFARM_TEST_LOADAVG_FILE, instead of /proc/loadavg) pauses,
stops its running evaluations with --on-reclaim requeue and hands them back,
another worker finishes them, and every result arrives once with the same
bits as an undisturbed run; the paused worker stays paused inside the
hysteresis band and resumes below it. Also: children run at the --nice value
(default 10) and each worker reports a calibration score measured in well
under a second."""
import json
import os
import re
import sqlite3
import subprocess
import time

import fflib
from fflib import wait_for

check = fflib.Check("test_harvest")
N = 12
gs = fflib.genomes(N, 3, seed=77)
common = ["--plugin", "spin", "--params", '{"ms": 400}', "--seed", "5"]


def state_of(pool, name):
    st = pool.status() or {}
    for w in st.get("workers", []):
        if w["name"] == name:
            return w
    return None



def write_load(path, value):
    tmp = path + ".tmp"
    with open(tmp, "w") as f:
        f.write(f"{value:.2f} 0.00 0.00 1/100 4242\n")  # the format of proc(5)
    os.replace(tmp, path)


def children_nice(pid):
    """nice values (field 19 of /proc/PID/stat, proc(5)) of pid's children."""
    out = []
    for d in os.listdir("/proc"):
        if not d.isdigit():
            continue
        try:
            text = open(f"/proc/{d}/stat").read()
        except OSError:
            continue
        fields = text[text.rindex(")") + 2:].split()
        if int(fields[1]) == pid:  # field 4, ppid
            out.append(int(fields[16]))  # field 19, nice
    return out


def own_nice(pid):
    text = open(f"/proc/{pid}/stat").read()
    return int(text[text.rindex(")") + 2:].split()[16])


with fflib.Pool(log_prefix="harvest") as pool:
    pool.start_broker()
    load = os.path.join(pool.tmp, "loadavg")
    write_load(load, 0.0)
    os.environ["FITFARM_TEST_LOADAVG_FILE"] = load
    # A window that opened an hour from now and closes two hours from now
    # (local time, as the worker reads it): this worker is outside it.
    now = time.localtime()
    sod = now.tm_hour * 3600 + now.tm_min * 60 + now.tm_sec
    a, b = (sod + 3600) % 86400, (sod + 7200) % 86400
    hours = f"{a // 3600:02d}:{a // 60 % 60:02d}-{b // 3600:02d}:{b // 60 % 60:02d}"
    night = pool.start_worker(slots=2, name="night", extra=["--hours", hours])
    desk = pool.start_worker(slots=2, name="desk",
                             extra=["--max-load", "1", "--on-reclaim", "requeue"])
    st = pool.wait_workers(2)
    w_night = wait_for(lambda: (lambda w: w if w and w["state"].startswith("paused") else None)(
        state_of(pool, "night")), timeout=10)
    check.ok(w_night and "outside --hours" in w_night["state"],
             f"status shows the worker outside its hours as paused: {w_night}")

    # Calibration: reported, bounded, and measured in well under a second.
    for w in (pool.status() or {}).get("workers", []):
        check.ok(0 < w["speed"] < 1e6, f"worker {w['name']} reports speed {w['speed']}")
    times, speeds = [], []
    for name in ("night", "desk"):
        m = re.search(r"calibration: speed ([0-9.]+) .* in ([0-9.]+) ms",
                      open(os.path.join(pool.tmp, f"{name}.log"), errors="replace").read())
        if m:
            speeds.append(float(m.group(1)))
            times.append(float(m.group(2)))
    check.ok(len(times) == 2 and max(times) < 1000, f"calibration took {times} ms (< 1000)")
    check.ok(len(speeds) == 2 and max(speeds) <= 3 * min(speeds),
             f"two workers on one machine score within 3x: {speeds}")
    print(f"calibration: speeds {speeds}, times {times} ms")

    # nice: default 10 over the worker's own value (setpriority(2): capped at 19).
    kids = wait_for(lambda: children_nice(desk.pid), timeout=5)
    want = min(19, own_nice(desk.pid) + 10)
    check.ok(kids and all(n == want for n in kids), f"desk's children at nice {kids}, want {want}")

    out_path = os.path.join(pool.tmp, "out.jsonl")
    inp = os.path.join(pool.tmp, "in.jsonl")
    open(inp, "w").write(fflib.jsonl(gs))
    cli = subprocess.Popen([fflib.exe("fitfarm"), "eval", "--broker", pool.clients_ep, "--run",
                            "harvest", "--insecure", "--in", inp, "--out", out_path] + common,
                           stderr=open(os.path.join(pool.tmp, "eval.log"), "ab"))
    db_path = os.path.join(pool.store, "fitfarm.db")
    # desk works (two at a time), night takes nothing.
    busy = wait_for(lambda: (lambda w: w and w["busy"] == 2)(state_of(pool, "desk")), timeout=20)
    check.ok(busy, "desk runs two evaluations")
    time.sleep(0.2)
    # The owner comes back: load 5 from other processes.
    write_load(load, 5.0 + 2)  # 2 of it are desk's own running evaluations
    t_pause = time.time()
    paused = wait_for(lambda: (lambda w: w if w and w["state"].startswith("paused") else None)(
        state_of(pool, "desk")), timeout=10)
    check.ok(paused and "above --max-load 1" in paused["state"] and paused["busy"] == 0,
             f"desk paused and holds nothing: {paused}")
    desk_log = open(os.path.join(pool.tmp, "desk.log"), errors="replace").read()
    m = re.search(r"paused: .*; handing (\d+) queued and (\d+) stopped jobs back", desk_log)
    check.ok(m and int(m.group(2)) >= 1, f"desk stopped its running evaluations: {m and m.group(0)}")
    # Nothing moves while both are paused.
    done_paused = fflib.done_in_store(db_path)
    time.sleep(2.0)
    check.ok(fflib.done_in_store(db_path) == done_paused,
             "no evaluation finishes while every worker is paused")
    # Inside the hysteresis band (below 1, above 0.75): still paused.
    write_load(load, 0.9)
    time.sleep(2.5)
    w = state_of(pool, "desk")
    check.ok(w and w["state"].startswith("paused"), f"load 0.9 keeps desk paused: {w}")
    # Another machine finishes the handed-back jobs.
    pool.start_worker(slots=2, name="server")
    cli.wait(timeout=180)
    out = [json.loads(l) for l in open(out_path).read().splitlines() if l.strip()]
    check.ok(cli.returncode == 0 and len(out) == N and all(r["status"] == "ok" for r in out),
             f"the batch completed: exit {cli.returncode}, {len(out)} lines")
    check.ok(sorted(r["id"] for r in out) == list(range(N)), "every line exactly once")
    # fitness[0] of spin is the genome's sum, left to right (IEEE 754 double
    # addition, as Python's + does it).
    sums = [0.0] * N
    for i, g in enumerate(gs):
        s = 0.0
        for x in g:
            s += x
        sums[i] = s
    check.ok(all(r["fitness"][0] == sums[r["id"]] for r in out), "fitness[0] is the genome's sum")
    # Below the band: desk resumes.
    write_load(load, 0.5)
    w = wait_for(lambda: (lambda w: w if w and w["state"] == "active" else None)(
        state_of(pool, "desk")), timeout=10)
    check.ok(w is not None, "load 0.5 resumes desk")

    pool.kill(pool.broker, __import__("signal").SIGTERM)  # flush the store
    db = sqlite3.connect(f"file:{db_path}?mode=ro", uri=True)
    rows = db.execute("SELECT worker, finished_at, attempts FROM evaluations").fetchall()
    db.close()
    by_night = [r for r in rows if r[0] == "night"]
    by_desk_paused = [r for r in rows if r[0] == "desk" and r[1] > t_pause + 1.0]
    check.ok(len(rows) == N and all(r[2] == 0 for r in rows),
             f"each line evaluated once, no attempt counted: {len(rows)} rows, "
             f"attempts {[r[2] for r in rows]}")
    check.ok(not by_night, f"the worker outside its hours evaluated nothing: {len(by_night)}")
    check.ok(not by_desk_paused, f"desk evaluated nothing while paused: {len(by_desk_paused)}")
    blog = open(os.path.join(pool.tmp, "broker.log"), errors="replace").read()
    check.ok("worker desk paused" in blog and "worker desk resumed" in blog,
             "the broker logs the pause and the resume")
    print(f"desk evaluated {sum(1 for r in rows if r[0] == 'desk')}, "
          f"server {sum(1 for r in rows if r[0] == 'server')}")

# The same input on an undisturbed embedded pool gives the same bits.
rc, ref, err = fflib.run_eval(["--slots", "2", "--run", "harvest-ref"] + common, fflib.jsonl(gs))
ref_by_id = {r["id"]: r for r in ref}
same = sum(1 for r in out if ref_by_id.get(r["id"], {}).get("fitness") == r["fitness"]
           and ref_by_id[r["id"]]["seed"] == r["seed"])
check.ok(rc == 0 and same == N, f"{same} of {N} results bit-identical to an undisturbed run")
check.done(pool)
