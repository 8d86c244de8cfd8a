"""`fitfarm eval`'s progress line: on a terminal (a pseudo-terminal from
Python's pty module, POSIX openpty) stderr carries one line redrawn in place
with results of sent, cached, failed, the rate and the time left; with
--quiet, or when stderr is not a terminal, nothing of it. The results on
stdout are the same either way (spin's first objective is the genome's
IEEE 754 left-to-right sum)."""
import json
import os
import pty
import re
import subprocess

import fflib

check = fflib.Check("test_eval_progress")
gs = fflib.genomes(300, 3, seed=8)
args = [fflib.exe("fitfarm"), "eval", "--slots", "2", "--plugin", "spin", "--params",
        '{"ms": 10}', "--run", "progress"]


def run_on_pty(extra):
    master, slave = pty.openpty()
    p = subprocess.Popen(args + extra, stdin=subprocess.PIPE, stdout=subprocess.PIPE,
                         stderr=slave, text=True)
    os.close(slave)
    out, _ = p.communicate(fflib.jsonl(gs), timeout=300)
    chunks = []
    while True:
        try:
            data = os.read(master, 65536)
        except OSError:  # EIO once the child side is closed
            break
        if not data:
            break
        chunks.append(data)
    os.close(master)
    return p.returncode, out, b"".join(chunks).decode(errors="replace")


rc, out, tty = run_on_pty([])
lines = [json.loads(l) for l in out.splitlines()]
check.ok(rc == 0 and len(lines) == len(gs), f"eval on a terminal: exit {rc}, {len(lines)} lines")
check.ok(all(r["fitness"][0] == sum(g, 0.0) for r, g in zip(lines, gs)), "spin's sums")
frames = [f for f in tty.split("\r") if "fitfarm eval:" in f]
check.ok(len(frames) >= 2, f"the line is redrawn in place ({len(frames)} frames)")
last = frames[-1] if frames else ""
check.ok(re.search(r"300 of 300 results, 0 cached, 0 failed, [0-9.]+/s", last) is not None,
         f"the last frame counts everything: {last!r}")
check.ok(any(re.search(r"[0-9.]+/s, about \d+ s left", f) for f in frames),
         f"a frame shows the rate and the time left: {frames[:3]!r}")

rc, out2, tty2 = run_on_pty(["--quiet"])  # a new embedded pool: evaluated again
check.ok(rc == 0 and out2 == out, "--quiet: the same output, byte for byte")
check.ok("results," not in tty2, f"--quiet: no progress line: {tty2[-200:]!r}")

r = subprocess.run(args + ["--run", "progress-pipe"], input=fflib.jsonl(gs[:20]),
                   capture_output=True, text=True, timeout=120)
check.ok(r.returncode == 0 and "results," not in r.stderr,
         f"stderr not a terminal: no progress line: {r.stderr[-200:]!r}")
check.done()
