"""The embedded local pool (no --broker): the same published-formula checks
as test_pool_tcp, and nothing left running afterwards."""
import os
import subprocess

import fflib
import refs

check = fflib.Check("test_embedded")


def children_of(pid):
    """PIDs whose parent is pid (from /proc)."""
    out = []
    for d in os.listdir("/proc"):
        if d.isdigit():
            try:
                with open(f"/proc/{d}/stat") as f:
                    if int(f.read().rsplit(")", 1)[1].split()[1]) == pid:
                        out.append(int(d))
            except (OSError, IndexError, ValueError):
                pass
    return out


gs = fflib.genomes(10000, 30, seed=21)
rc, out, err = fflib.run_eval(["--plugin", "zdt1", "--slots", "2"], fflib.jsonl(gs))
check.ok(rc == 0, f"zdt1 exit status {rc}: {err[-2000:]}")
check.ok(len(out) == len(gs), f"{len(out)} lines for {len(gs)}")
bad = sum(1 for g, r in zip(gs, out) if r.get("status") != "ok" or not refs.close(r["fitness"], refs.zdt(1, g)))
check.ok(bad == 0, f"zdt1 on the embedded pool: {bad} lines differ from the published formula")

gs = fflib.genomes(1000, 12, seed=22)
rc, out, err = fflib.run_eval(["--plugin", "dtlz2", "--params", '{"k":10,"m":3}'], fflib.jsonl(gs))
check.ok(rc == 0, f"dtlz2 exit status {rc}: {err[-2000:]}")
bad = sum(1 for g, r in zip(gs, out) if r.get("status") != "ok" or not refs.close(r["fitness"], refs.dtlz2(g, 3)))
check.ok(bad == 0 and len(out) == 1000, f"dtlz2 on the embedded pool: {bad} bad of {len(out)}")

# ZDT2 and ZDT3 too, fewer lines.
for v in (2, 3):
    gs = fflib.genomes(300, 30, seed=30 + v)
    rc, out, err = fflib.run_eval(["--plugin", f"zdt{v}"], fflib.jsonl(gs))
    bad = sum(1 for g, r in zip(gs, out) if r.get("status") != "ok" or not refs.close(r["fitness"], refs.zdt(v, g)))
    check.ok(rc == 0 and bad == 0 and len(out) == 300, f"zdt{v}: rc {rc}, {bad} bad: {err[-500:]}")

# Nothing left running: start the CLI ourselves, watch its children, and see
# them gone once it has exited.
p = subprocess.Popen([fflib.exe("fitfarm"), "eval", "--plugin", "sphere", "--slots", "2"],
                     stdin=subprocess.PIPE, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
p.stdin.write("[1, 2, 3]\n")
p.stdin.flush()
import time
time.sleep(1.5)
kids = children_of(p.pid)
grandkids = [g for k in kids for g in children_of(k)]
check.ok(len(kids) >= 2, f"the embedded pool runs as child processes: {kids}")
out, err = p.communicate("[0, 0]\n", timeout=60)
check.ok(p.returncode == 0, f"sphere exit {p.returncode}: {err}")
lines = out.splitlines()
check.ok(len(lines) == 2 and '"fitness": [14]' in lines[0].replace("14.0", "14"), f"sphere output {lines}")
time.sleep(0.5)
alive = [q for q in kids + grandkids if os.path.exists(f"/proc/{q}") and
         open(f"/proc/{q}/stat").read().rsplit(")", 1)[1].split()[0] != "Z"]
check.ok(not alive, f"processes left running after exit: {alive}")
check.done()
