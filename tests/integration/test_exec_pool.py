"""The exec plugin in a real pool: a broker and a worker started with
--exec cantilever=... and --exec fault=..., evaluated through `fitfarm eval`.

Checks, each against an outside reference or a user-visible status:
  - uniform beams match delta = P L^3 / (3 E I), I = b h^3 / 12 (Gere & Goodno,
    Mechanics of Materials, cantilever table), mass = rho b h L;
  - stepped beams match the unit-load integral of M m / (E I) computed here by
    Simpson's rule per segment, which is exact for the cubic-free integrand
    P (L - x)^2 / (E I) (Simpson's rule integrates polynomials up to degree 3
    exactly; any numerical analysis text, e.g. Burden & Faires);
  - a gene out of range comes back "invalid" with the program's reason;
  - a co-process killed by PID (found through /proc as a child of a worker
    child) mid-evaluation fails that evaluation with a message naming the
    signal, the worker stays up, and the next batch is all "ok";
  - a hanging program is ended by the per-evaluation time-out (the worker's
    --timeout), and its co-process dies with the killed worker child
    (PR_SET_PDEATHSIG);
  - on one machine without a pool: `fitfarm eval --exec` (the embedded pool)
    and `fitfarm sim --exec` give the same closed-form uniform beams, and
    --exec with --broker is refused.
"""
import json
import os
import signal
import subprocess
import sys
import threading
import time

import fflib
from fflib import alive, wait_for

PYTHON = os.environ.get("PYTHON", sys.executable)
CANTILEVER = os.path.join(fflib.SOURCE, "client", "examples", "cantilever.py")
FAULT = os.path.join(fflib.SOURCE, "tests", "unit", "exec_fault.py")

# cantilever.py's defaults (SI units).
L, P, E, B, RHO, HMIN, HMAX = 1.0, 1000.0, 200e9, 0.02, 7850.0, 0.01, 0.05

check = fflib.Check("test_exec_pool")


def close(a, b, rel=1e-12):
    return abs(a - b) <= rel * abs(b)


def stepped_simpson(genes, length=L, load=P, e=E):
    """Unit-load integral of P (L-x)^2 / (E I(x)), Simpson's rule per segment."""
    seg = length / len(genes)
    total = 0.0
    for i, g in enumerate(genes):
        h = HMIN + g * (HMAX - HMIN)
        inertia = B * h ** 3 / 12.0
        a, c = i * seg, (i + 1) * seg
        f = lambda x: load * (length - x) ** 2 / (e * inertia)
        total += (c - a) / 6.0 * (f(a) + 4.0 * f((a + c) / 2.0) + f(c))
    return total


def descendants(pid):
    """Child pids of pid, from /proc/PID/task/*/children (or a ppid scan)."""
    kids = []
    try:
        for tid in os.listdir(f"/proc/{pid}/task"):
            with open(f"/proc/{pid}/task/{tid}/children") as f:
                kids += [int(x) for x in f.read().split()]
        return kids
    except OSError:
        pass
    for d in os.listdir("/proc"):
        if d.isdigit():
            try:
                stat = open(f"/proc/{d}/stat").read()
                if int(stat.rsplit(")", 1)[1].split()[1]) == pid:
                    kids.append(int(d))
            except (OSError, IndexError, ValueError):
                pass
    return kids


def cmdline(pid):
    try:
        return open(f"/proc/{pid}/cmdline", "rb").read().replace(b"\0", b" ").decode(errors="replace")
    except OSError:
        return ""



def coprocesses(worker_pid, script):
    """Co-processes running script: grandchildren of the worker."""
    out = []
    for child in descendants(worker_pid):
        for g in descendants(child):
            if script in cmdline(g):
                out.append(g)
    return out



with fflib.Pool() as pool:
    pool.start_broker()
    # --timeout: the worker's own per-evaluation limit (the hang below).
    worker = pool.start_worker(slots=2, extra=[
        "--timeout", "4",
        "--exec", f"cantilever={PYTHON} {CANTILEVER}",
        "--exec", f"fault={PYTHON} {FAULT}"])
    st = pool.wait_workers(1)
    plugins = st["workers"][0]["plugins"]
    check.ok("cantilever@1.0" in plugins and "fault@1" in plugins,
             f"the worker reports both exec plugins: {plugins}")
    ep = ["--broker", pool.clients_ep]

    # 1. Uniform beams against the closed form, stepped ones against Simpson.
    uniform = []
    for i, g in enumerate(fflib.genomes(12, 1, seed=5)):
        uniform.append([g[0]] * (1 + i % 5))
    stepped = fflib.genomes(12, 4, seed=6) + [[1.0, 0.0], [0.0, 1.0]]
    rc, out, err = fflib.run_eval(ep + ["--plugin", "cantilever", "--run", "exec-1"],
                                  fflib.jsonl(uniform + stepped), timeout=120)
    check.ok(rc == 0 and len(out) == len(uniform) + len(stepped), f"batch ok: exit {rc}, {err[-800:]}")
    for r in out:
        genes = (uniform + stepped)[r["id"]]
        if r["status"] != "ok":
            check.ok(False, f"line {r}")
            continue
        delta, mass = r["fitness"]
        h_mean = sum(HMIN + g * (HMAX - HMIN) for g in genes) / len(genes)
        check.ok(close(mass, RHO * B * h_mean * L, 1e-12), f"mass of {genes}: {mass}")
        if r["id"] < len(uniform):
            h = HMIN + genes[0] * (HMAX - HMIN)
            want = P * L ** 3 / (3 * E * B * h ** 3 / 12.0)
            check.ok(close(delta, want), f"uniform {genes}: {delta} vs P L^3/(3EI) = {want}")
        else:
            want = stepped_simpson(genes)
            check.ok(close(delta, want, 1e-11), f"stepped {genes}: {delta} vs Simpson {want}")

    # Params reach the program: L = 2 m, P = 300 N, E = 70 GPa.
    rc, out, err = fflib.run_eval(ep + ["--plugin", "cantilever", "--run", "exec-2", "--params",
                                        '{"length": 2, "load": 300, "youngs_modulus": 70e9}'],
                                  fflib.jsonl([[0.3, 0.9, 0.1]]), timeout=60)
    check.ok(rc == 0 and close(out[0]["fitness"][0], stepped_simpson([0.3, 0.9, 0.1], 2.0, 300.0, 70e9), 1e-11),
             f"params: {out} {err[-500:]}")

    # 2. A gene out of range: invalid, with the program's reason.
    rc, out, err = fflib.run_eval(ep + ["--plugin", "cantilever", "--run", "exec-3"],
                                  fflib.jsonl([[0.5, 1.5]]), timeout=60)
    check.ok(rc == 1 and out and out[0]["status"] == "invalid" and "outside [0, 1]" in out[0].get("error", ""),
             f"out-of-range gene refused: {out}")

    # 3. Kill a co-process by PID while it evaluates.
    result = {}

    def slow_batch():
        result["eval"] = fflib.run_eval(ep + ["--plugin", "fault", "--run", "exec-4"],
                                        fflib.jsonl([[12, 3.0]]), timeout=120)

    t = threading.Thread(target=slow_batch)
    t.start()
    # The evaluation is running once a fault co-process exists; give it time
    # to have read the request.
    victims = wait_for(lambda: coprocesses(worker.pid, "exec_fault.py"), 20)
    check.ok(len(victims) == 1, f"one fault co-process under the worker's children: {victims}")
    time.sleep(1.0)
    for v in victims:
        os.kill(v, signal.SIGKILL)
    t.join()
    rc, out, err = result["eval"]
    check.ok(out and out[0]["status"] == "failed", f"the killed evaluation failed: {out} {err[-500:]}")
    msg = out[0].get("error", "") if out else ""
    check.ok("ended its output before answering" in msg and "signal 9" in msg,
             f"the message names what happened: {msg!r}")
    check.ok(worker.poll() is None, "the worker survived")
    for v in victims:
        check.ok(wait_for(lambda: not alive(v), 5), f"killed co-process {v} reaped")

    # The pool goes on: both plugins answer, the fault program restarted.
    rc, out, err = fflib.run_eval(ep + ["--plugin", "fault", "--run", "exec-5"],
                                  fflib.jsonl([[0, 0.25], [0, 0.5], [0, 0.75]]), timeout=60)
    check.ok(rc == 0 and [r["fitness"][0] for r in out] == [0.25, 0.5, 0.75],
             f"fault plugin works again: {out} {err[-500:]}")
    check.ok(all(int(r["fitness"][1]) not in victims for r in out), "answered by a new co-process")
    rc, out, err = fflib.run_eval(ep + ["--plugin", "cantilever", "--run", "exec-6"],
                                  fflib.jsonl([[0.5, 0.5]]), timeout=60)
    h = HMIN + 0.5 * (HMAX - HMIN)
    check.ok(rc == 0 and close(out[0]["fitness"][0], P * L ** 3 / (3 * E * B * h ** 3 / 12.0)),
             f"cantilever after the kill: {out}")

    # 4. A hanging program: the time-out kills the worker child, and its
    #    co-process dies with it.
    result.clear()

    def hang_batch():
        result["eval"] = fflib.run_eval(ep + ["--plugin", "fault", "--run", "exec-7", "--timeout", "2"],
                                        fflib.jsonl([[3]]), timeout=120)

    before = set(coprocesses(worker.pid, "exec_fault.py"))
    t = threading.Thread(target=hang_batch)
    t.start()
    time.sleep(1.0)
    hung = set(coprocesses(worker.pid, "exec_fault.py"))
    t.join()
    rc, out, err = result["eval"]
    check.ok(out and out[0]["status"] == "timeout", f"the hang timed out: {out} {err[-500:]}")
    check.ok(len(hung) >= 1, f"fault co-processes while hanging: {hung}")
    gone = wait_for(lambda: [p for p in hung if not alive(p)], 10)
    check.ok(len(gone) >= 1, f"the hanging co-process died with its child: {hung}, dead {gone}")
    check.ok(worker.poll() is None, "the worker survived the time-out")
    rc, out, err = fflib.run_eval(ep + ["--plugin", "fault", "--run", "exec-8"],
                                  fflib.jsonl([[0, 0.125]]), timeout=60)
    check.ok(rc == 0 and out[0]["fitness"][0] == 0.125, f"fault plugin after the time-out: {out}")

# No pool at all: the embedded pool's worker takes --exec, and so does sim.
CMD = f"cantilever={PYTHON} {CANTILEVER}"
beams = [[0.0], [0.5, 0.5], [1.0, 1.0, 1.0]]
rc, out, err = fflib.run_eval(["--plugin", "cantilever", "--exec", CMD, "--slots", "1"],
                              fflib.jsonl(beams), timeout=120)
check.ok(rc == 0 and len(out) == len(beams), f"embedded --exec: exit {rc}, {err[-800:]}")
for r in out:
    h = HMIN + beams[r["id"]][0] * (HMAX - HMIN)
    want = P * L ** 3 / (3 * E * B * h ** 3 / 12.0)  # Gere & Goodno, cantilever table
    check.ok(r["status"] == "ok" and close(r["fitness"][0], want),
             f"embedded --exec uniform {beams[r['id']]}: {r} vs P L^3/(3EI) = {want}")
sim = subprocess.run([fflib.exe("fitfarm"), "sim", "--exec", CMD, "--genome", "[0.5, 0.5]"],
                     capture_output=True, text=True, timeout=60)
h = HMIN + 0.5 * (HMAX - HMIN)
want = P * L ** 3 / (3 * E * B * h ** 3 / 12.0)
simf = json.loads(sim.stdout)["fitness"] if sim.returncode == 0 else [None]
check.ok(sim.returncode == 0 and close(simf[0], want), f"sim --exec: {sim.stdout} {sim.stderr} vs {want}")
rc, out, err = fflib.run_eval(["--plugin", "cantilever", "--exec", CMD, "--broker", "tcp://127.0.0.1:9"],
                              "", timeout=30)
check.ok(rc == 2 and "--exec is for the embedded pool" in err, f"--exec with --broker: {rc} {err}")
check.done(pool)
