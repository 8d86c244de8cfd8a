"""No uninitialised byte goes on the wire, nor decides a branch, in the
broker, the worker (its evaluation children too) or the CLI.

A field left unset in a message struct is stack garbage: the sanitizer build
does not see it (AddressSanitizer checks bounds and lifetimes, not
initialisation), and the garbage passes or fails a decoder's check by luck of
the machine. That happened once: the worker child's DONE outcome carried an
unset wall time, which on one machine read as NaN after a cgroup sweep, so
the parent's decoder refused the answer and the job ran twice.

Valgrind's Memcheck reports a syscall that writes uninitialised bytes
("Syscall param ... points to uninitialised byte(s)") and a branch on an
uninitialised value ("Conditional jump or move depends on uninitialised
value(s)"); --error-exitcode makes either fail its process, and each process
(a forked child too, which stays under Valgrind) writes its own log. A real
broker and a real worker run under it on loopback; `fitfarm eval`, also under
it, sends genomes through every outcome a plugin can produce: ok, NaN
fitness, a failure and an invalid genome with their messages, abort() and
_exit (crashed), with the test-only plugin `fault` (tests/plugins/fault.c).

Skipped (exit 77) where Valgrind is missing, and in the sanitizer build (the
two instrumentations cannot share a process)."""
import glob
import json
import os
import re
import shutil
import signal
import subprocess
import sys

import fflib

check = fflib.Check("test_valgrind_wire")
valgrind = shutil.which("valgrind")
if not valgrind:
    print("skipped: valgrind is not installed (Debian package valgrind)")
    sys.exit(77)
try:
    if "FITFARM_SANITIZE:BOOL=ON" in open(os.path.join(fflib.BUILD, "CMakeCache.txt")).read():
        print("skipped: a sanitizer build (Valgrind cannot run AddressSanitizer's programs)")
        sys.exit(77)
except FileNotFoundError:
    pass

PLUGINS = os.path.join(fflib.BUILD, "test-plugins")
# fault.c's behaviours: 0 ok, 2 abort(), 5 NaN, 7 _exit(3), 8 failure with a
# message, 9 invalid genome with a message. 1 (a write through NULL) is left
# out: Memcheck rightly reports it as an invalid write.
BEHAVIOURS = [0, 2, 5, 7, 8, 9]


def memcheck(logs_dir, who):
    # No leak check: the sanitizer build's LeakSanitizer covers leaks.
    return [valgrind, "--tool=memcheck", "--error-exitcode=99", "--leak-check=no",
            "--track-origins=yes", "--child-silent-after-fork=no",
            f"--log-file={os.path.join(logs_dir, who)}.%p.vg"]


with fflib.Pool() as pool:
    logs = os.path.join(pool.tmp, "valgrind")
    os.makedirs(logs)
    pool.start_broker(prefix=memcheck(logs, "broker"), start_timeout=120)
    worker = pool.start_worker(slots=2, name="vgw", prefix=memcheck(logs, "worker"),
                               extra=["--plugin-dir", PLUGINS, "--with-default-plugins"])
    pool.wait_workers(1, timeout=120)

    lines = "".join(json.dumps({"id": f"f{b}-{i}", "genome": [float(b), float(i)]}) + "\n"
                    for b in BEHAVIOURS for i in range(2))
    cli = memcheck(logs, "cli") + [fflib.exe("fitfarm"), "eval", "--insecure", "--broker",
                                   pool.clients_ep, "--plugin", "fault", "--run", "vg-fault",
                                   "--attempts", "1"]
    r = subprocess.run(cli, input=lines, capture_output=True, text=True, timeout=600)
    out = [json.loads(l) for l in r.stdout.splitlines() if l.strip()]
    by_id = {o["id"]: o for o in out}
    check.ok(r.returncode in (0, 1) and len(out) == 2 * len(BEHAVIOURS),
             f"fitfarm eval under Valgrind answered every genome: exit {r.returncode}, "
             f"{len(out)} lines, {r.stderr[-1500:]}")
    want = {0: "ok", 2: "crashed", 5: None, 7: "crashed", 8: "failed", 9: "invalid"}
    for b, status in want.items():
        got = by_id.get(f"f{b}-0", {}).get("status")
        check.ok(got is not None and (status is None or got == status),
                 f"behaviour {b}: status {got!r}, expected {status or 'any'}")
    rc2, ok_lines, err2 = fflib.run_eval(["--broker", pool.clients_ep, "--plugin", "sphere",
                                          "--run", "vg-sphere"], fflib.jsonl(fflib.genomes(20, 3, 5)))
    check.ok(rc2 == 0 and len(ok_lines) == 20 and all(x["status"] == "ok" for x in ok_lines),
             f"sphere through the Valgrind pool: exit {rc2}, {len(ok_lines)} lines {err2[-500:]}")

    pool.kill(worker, signal.SIGTERM)
    pool.kill(pool.broker, signal.SIGTERM)
    check.ok(worker.returncode != 99 and pool.broker.returncode != 99,
             f"the worker and the broker exited without Memcheck errors: {worker.returncode}, "
             f"{pool.broker.returncode}")

    # Every process's own log, forked children included. A process ended by
    # SIGKILL (the broker's descriptor shedder dies with it; a worker kills
    # the children it no longer needs) writes no summary, so each log is
    # also searched for Memcheck's error headings.
    reports = sorted(glob.glob(os.path.join(logs, "*.vg")))
    seen = {os.path.basename(p).split(".")[0] for p in reports}
    check.ok({"broker", "worker", "cli"} <= seen and len(reports) >= 4,
             f"a Memcheck log from each program and the worker's children: {reports}")
    heading = re.compile(r"^==\d+== (Invalid |Conditional jump|Use of uninitialised|Syscall param|"
                         r"Source and destination overlap|Mismatched free|Argument .* of function)",
                         re.M)
    summaries = 0
    for path in reports:
        text = open(path, errors="replace").read()
        m = re.search(r"ERROR SUMMARY: (\d+) errors", text)
        summaries += m is not None
        bad = heading.search(text) or (m is not None and m.group(1) != "0")
        check.ok(not bad, f"{os.path.basename(path)}: Memcheck found errors\n{text[-4000:]}")
    # The broker, the worker, the CLI and the children that ran evaluations.
    check.ok(summaries >= 5, f"{summaries} processes under Memcheck ended with a summary")
check.done(pool)
