"""Transient failures are not served from the cache (a real broker and
worker, the test-only `fault` plugin, tests/plugins/fault.c):

- run "night": a genome that sleeps 1.5 s times out under --timeout 1; an ok
  genome and one the plugin calls invalid are answered too;
- run "day" (another run, same content, --timeout 5): the timed-out genome is
  evaluated again and comes back ok, not cached; the ok and the invalid ones
  are answered from the cache (ok and invalid stay cached for ever);
- a replay of "night" still prints its own time-out, byte for byte;
- run "night" resumed with --timeout 5 (a larger limit than it recorded):
  its time-out is evaluated again and comes back ok; the ok and invalid lines
  are answered as recorded; its replay now prints the new result;
- run "crash" resumed with --retry-failed: a recorded crash (genome 7, the
  plugin's _exit) is evaluated again (and crashes again, counted), while
  without the flag the resume answers the recorded crash.
Run with /usr/bin/python3 (Debian's)."""
import os
import sqlite3
import subprocess

import fflib

check = fflib.Check("test_transient_cache")
plugin_dir = os.path.join(fflib.BUILD, "test-plugins")
# genome [x0, tag]: 6 sleeps params.ms then ok, 0 returns [0], 9 is EINVAL.
text = "[6, 0.25]\n[0, 0.25]\n[9, 0.25]\n"
params = ["--params", '{"ms": 1500}']
with fflib.Pool() as pool:
    pool.start_broker()
    pool.start_worker(slots=1, extra=["--plugin-dir", plugin_dir])
    pool.wait_workers(1)
    base = ["--broker", pool.clients_ep, "--insecure", "--plugin", "fault", "--attempts", "1"] + params

    night_args = base + ["--run", "night", "--timeout", "1"]
    r = subprocess.run([fflib.exe("fitfarm"), "eval"] + night_args, input=text,
                       capture_output=True, text=True, timeout=120)
    night = [__import__("json").loads(l) for l in r.stdout.splitlines()]
    check.ok([x["status"] for x in night] == ["timeout", "ok", "invalid"],
             f"night: timeout, ok, invalid: {[x['status'] for x in night]} {r.stderr[-300:]}")

    rc, day, err = fflib.run_eval(base + ["--run", "day", "--timeout", "5"], text, timeout=120)
    check.ok([x["status"] for x in day] == ["ok", "ok", "invalid"],
             f"day: the timed-out genome is evaluated again and is ok: {[x['status'] for x in day]} {err[-300:]}")
    check.ok([x["cached"] for x in day] == [False, True, True],
             f"day: only the transient failure is not served from the cache: {[x['cached'] for x in day]}")
    check.ok(day[0].get("fitness") == [6.0], f"day: the sleeper returns [x0] = [6]: {day[0].get('fitness')}")
    check.ok(day[0]["key"] == night[0]["key"], "same content, same key: the cache was bypassed, not missed")

    # The run that got the time-out keeps it: its replay prints the same bytes.
    rr = subprocess.run([fflib.exe("fitfarm"), "eval"] + night_args + ["--replay"], input=text,
                        capture_output=True, text=True, timeout=120)
    check.ok(rr.returncode == r.returncode and rr.stdout == r.stdout,
             f"replay of night is byte-identical: {rr.returncode} {rr.stdout[:300]!r} vs {r.stdout[:300]!r}")

    db = sqlite3.connect(f"file:{os.path.join(pool.store, 'fitfarm.db')}?mode=ro", uri=True)
    hist = db.execute("SELECT status_name FROM results WHERE run_id = 'day'").fetchall()
    db.close()
    check.ok(hist == [("ok",)], f"the re-evaluation is in the results history of run day: {hist}")

    # The same run resumed with more time: its recorded time-out is retried.
    rc, again, err = fflib.run_eval(base + ["--run", "night", "--timeout", "5"], text, timeout=120)
    check.ok(rc == 1 and [x["status"] for x in again] == ["ok", "ok", "invalid"] and  # 1: a line not ok
             again[0]["fitness"] == [6.0],
             f"night resumed with --timeout 5: the time-out is evaluated again (exit {rc}): "
             f"{[x['status'] for x in again]} {err[-300:]}")
    rr = subprocess.run([fflib.exe("fitfarm"), "eval"] + base + ["--run", "night", "--timeout",
                                                                 "5", "--replay"],
                        input=text, capture_output=True, text=True, timeout=120)
    replayed = [__import__("json").loads(l) for l in rr.stdout.splitlines()]
    check.ok(rr.returncode == 1 and [x["status"] for x in replayed] == ["ok", "ok", "invalid"],
             f"... and its replay now reads the new result (exit {rr.returncode}): {rr.stderr[-300:]}")

    # A recorded crash: answered as recorded on resume, retried with --retry-failed.
    crash = "[7, 0.5]\n[0, 0.5]\n"
    cargs = base + ["--run", "crash"]
    rc, c1, _ = fflib.run_eval(cargs, crash, timeout=120)
    rc, c2, _ = fflib.run_eval(cargs, crash, timeout=120)
    check.ok([x["status"] for x in c1] == ["crashed", "ok"] and c2 == c1,
             f"a resume answers the recorded crash: {[x['status'] for x in c2]}")
    db = sqlite3.connect(f"file:{os.path.join(pool.store, 'fitfarm.db')}?mode=ro", uri=True)
    before = db.execute("SELECT count(*) FROM simulations WHERE run_id = 'crash'").fetchone()[0]
    db.close()
    rc, c3, err = fflib.run_eval(cargs + ["--retry-failed"], crash, timeout=120)
    db = sqlite3.connect(f"file:{os.path.join(pool.store, 'fitfarm.db')}?mode=ro", uri=True)
    after = db.execute("SELECT count(*) FROM simulations WHERE run_id = 'crash'").fetchone()[0]
    db.close()
    check.ok([x["status"] for x in c3] == ["crashed", "ok"] and after == before + 1,
             f"--retry-failed evaluates the crash again (one more simulation: {before} -> {after}) "
             f"and leaves the ok line: {[x['status'] for x in c3]} {err[-200:]}")
check.done(pool)
