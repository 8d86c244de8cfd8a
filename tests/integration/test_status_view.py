"""`fitfarm status`, our own view, against a real broker and workers:
- busy counts evaluations running, never prefetched jobs: with short jobs and
  deep prefetch no worker ever shows more busy than slots (the old table said
  "17 of 2 slots busy");
- runs with work in flight are listed first; --run and --active filter;
- --json carries every field --help documents, and requested = done +
  queued + running;
- --watch refreshes and, from the second refresh on, shows an answer rate and
  the time left for a run in flight."""
import json
import re
import signal
import subprocess
import time

import fflib

check = fflib.Check("test_status_view")
FITFARM = fflib.exe("fitfarm")

with fflib.Pool() as pool:
    pool.start_broker()
    pool.start_worker(slots=2, name="alpha")
    pool.start_worker(slots=1, name="beta")
    pool.wait_workers(2)
    base = ["--insecure", "--broker", pool.clients_ep]
    rc, _, err = fflib.run_eval(["--broker", pool.clients_ep, "--run", "aaa-done", "--plugin",
                                 "sphere"], fflib.jsonl(fflib.genomes(20, 3, seed=1)))
    check.ok(rc == 0, f"a finished run: {err[-200:]}")
    big = subprocess.Popen([FITFARM, "eval"] + base + ["--run", "zzz-big", "--plugin", "spin",
                                                      "--params", '{"ms": 30}'],
                           stdin=subprocess.PIPE, stdout=subprocess.DEVNULL,
                           stderr=subprocess.DEVNULL, text=True)
    big.stdin.write(fflib.jsonl(fflib.genomes(400, 3, seed=2)))
    big.stdin.close()
    time.sleep(1.5)

    def status(*extra):
        r = subprocess.run([FITFARM, "status"] + base + list(extra), capture_output=True,
                           text=True, timeout=30)
        return r.returncode, r.stdout, r.stderr

    over = []
    for _ in range(10):
        rc, out, _ = status("--json")
        st = json.loads(out)
        over += [w for w in st["workers"] if w["busy"] > w["slots"]]
        time.sleep(0.1)
    check.ok(not over, f"busy never exceeds slots: {over[:2]}")

    rc, view, err = status()
    check.ok(rc == 0 and "machines" in view and "runs (2 of 2)" in view,
             f"the view: {err[-200:]}\n{view}")
    runs_part = view.split("runs (")[1]
    check.ok(runs_part.find("zzz-big") < runs_part.find("aaa-done"),
             f"the run in flight is listed first:\n{runs_part}")
    check.ok("3/3" in view or "2/3" in view or "1/3" in view or "0/3" in view,
             f"the host line sums its workers' slots (3):\n{view}")
    rc, only, _ = status("--run", "aaa-done")
    check.ok("aaa-done" in only and "zzz-big" not in only, f"--run filters:\n{only}")
    rc, active, _ = status("--active")
    check.ok("zzz-big" in active and "aaa-done" not in active, f"--active filters:\n{active}")

    r = subprocess.run([FITFARM, "status", "--help"], capture_output=True, text=True)
    documented = set(re.findall(r'"(\w+)"', r.stdout))
    rc, out, _ = status("--json")
    st = json.loads(out)
    fields = set(st) | set(st["workers"][0]) | set(st["runs"][0])
    check.ok(fields <= documented | {"workers", "runs", "warnings"} and
             {"requested", "active", "busy", "queued", "running", "done", "evaluated",
              "cached", "failed", "plugins", "speed", "state", "median_seconds"} <= fields,
             f"--json fields are the documented ones: {sorted(fields - documented)}")
    check.ok(all(x["requested"] == x["done"] + x["queued"] + x["running"] for x in st["runs"]),
             "requested = done + queued + running")

    w = subprocess.Popen([FITFARM, "status"] + base + ["--watch", "1", "--active"],
                         stdout=subprocess.PIPE, text=True)
    time.sleep(2.6)
    w.send_signal(signal.SIGINT)
    out, _ = w.communicate(timeout=20)
    check.ok(w.returncode == 0 and out.count("pool at") >= 2, f"--watch refreshes: {out[:300]}")
    check.ok(re.search(r"zzz-big .*[0-9.]+/s, about .* left", out) is not None,
             f"--watch shows a rate and the time left:\n{out[-600:]}")
    big.wait(timeout=120)
check.done(pool)
