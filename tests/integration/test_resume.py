"""Resumable runs: `fitfarm eval --run ID` is SIGKILLed mid-run and started
again with the same input, run id and seed. The broker keeps evaluating what
it accepted; the second client gets every line, the lines already answered
come from the store, and nothing is evaluated twice: the run's `evaluated`
counter ends at exactly one per input line. The output is complete and
bit-identical to an uninterrupted run. Also: the same run id with other
genomes is refused, naming the request."""
import os
import signal
import subprocess
import time

import fflib

N = 400
check = fflib.Check("test_resume")
gs = fflib.genomes(N, 3, seed=88)
text = fflib.jsonl(gs)
common = ["--plugin", "spin", "--params", '{"ms": 15}', "--seed", "5"]


def run_counters(pool, run_id):
    st = pool.status() or {}
    for r in st.get("runs", []):
        if r.get("run") == run_id:
            return r
    return {}


with fflib.Pool() as pool:
    pool.start_broker()
    pool.start_worker(slots=1, name="r0")
    pool.start_worker(slots=1, name="r1")
    pool.wait_workers(2)
    db_path = os.path.join(pool.store, "fitfarm.db")
    inp = os.path.join(pool.tmp, "in.jsonl")
    open(inp, "w").write(text)
    first_out = os.path.join(pool.tmp, "first.jsonl")
    args = [fflib.exe("fitfarm"), "eval", "--broker", pool.clients_ep, "--run", "resume-1",
            "--in", inp, "--insecure"] + common
    p = subprocess.Popen(args + ["--out", first_out], stderr=subprocess.DEVNULL)
    deadline = time.time() + 120
    while fflib.done_in_store(db_path) < N // 4 and time.time() < deadline and p.poll() is None:
        time.sleep(0.05)
    os.kill(p.pid, signal.SIGKILL)
    p.wait()
    printed_before = len(open(first_out).read().splitlines())
    done_at_kill = fflib.done_in_store(db_path)
    check.ok(p.returncode == -signal.SIGKILL and 0 < done_at_kill < N,
             f"the client was killed mid-run ({done_at_kill} of {N} evaluated)")

    rc, out, err = fflib.run_eval(["--broker", pool.clients_ep, "--run", "resume-1", "--stats",
                                   "--in", inp, "--insecure"] + common, "", timeout=300)
    check.ok(rc == 0, f"the resumed run finished: exit {rc}, {err[-1000:]}")
    check.ok(len(out) == N and all(r["status"] == "ok" for r in out),
             f"every line ok after the resume: {len(out)} lines")
    counters = run_counters(pool, "resume-1")
    evaluated = counters.get("evaluated")
    check.ok(evaluated == N,
             f"each line evaluated exactly once across both clients: evaluated {evaluated} for {N} lines")
    in_store = fflib.done_in_store(db_path)
    check.ok(in_store == N, f"{in_store} evaluations in the store for {N} lines")
    check.ok(not any(r["cached"] for r in out), "lines are answered as recorded (cached false, as first evaluated)")

    # An undisturbed run of the same input and seed gives the same bits.
    rc2, ref, err2 = fflib.run_eval(["--slots", "2", "--run", "resume-ref"] + common, text)
    check.ok(rc2 == 0, f"reference run: {err2[-500:]}")
    same = sum(1 for a, b in zip(out, ref) if a == b)
    check.ok(same == N, f"{same} of {N} output lines identical to an uninterrupted run")

    # Same run id, other genomes: refused, naming the request.
    other = fflib.jsonl(fflib.genomes(5, 3, seed=99))
    rc3, out3, err3 = fflib.run_eval(["--broker", pool.clients_ep, "--run", "resume-1"] + common, other)
    check.ok(rc3 != 0 and "request 0" in err3 and "another genome" in err3,
             f"a different input under the same run id is refused: exit {rc3}, {err3[-500:]}")

    print(f"lines printed before the kill: {printed_before}")
    print(f"evaluations done when the client was killed: {done_at_kill}")
    print(f"evaluated in total across both clients: {evaluated} (lines: {N}, re-evaluated: {evaluated - N if evaluated else '?'})")
    print(f"resumed client: {[l for l in err.splitlines() if 'stats' in l]}")
check.done(pool)
