"""The embedded pool dies with its client: `fitfarm eval` on long spin
evaluations is SIGKILLed mid-run (so it cannot stop anything itself), and
every process it had started (the fitfarm-broker and fitfarm-worker programs
and the worker's evaluation processes) must be gone 10 s later, having
noticed the closed lifeline pipe. The folder it leaves behind is removed by
the next embedded pool's start once the folder is old enough. Also checks
that `fitfarm eval` without --run names the run it chose on stderr."""
import os
import re
import signal
import subprocess
import tempfile
import time

import fflib

check = fflib.Check("test_pool_lifeline")


def stat_of(pid):
    """(ppid, state, start time) of pid from /proc/PID/stat, or None."""
    try:
        with open(f"/proc/{pid}/stat") as f:
            rest = f.read().rsplit(")", 1)[1].split()
        return int(rest[1]), rest[0], int(rest[19])
    except (OSError, IndexError, ValueError):
        return None


def descendants(root):
    """{pid: start time} of every process below root (walking /proc ppids)."""
    table = {}
    for d in os.listdir("/proc"):
        if d.isdigit():
            s = stat_of(int(d))
            if s:
                table[int(d)] = s
    found, frontier = {}, [root]
    while frontier:
        parent = frontier.pop()
        for pid, (ppid, _, start) in table.items():
            if ppid == parent and pid not in found:
                found[pid] = start
                frontier.append(pid)
    return found


def alive(pid, start):
    """Still the same process and not a zombie waiting for its reaper."""
    s = stat_of(pid)
    return s is not None and s[2] == start and s[1] != "Z"


def exe_name(pid):
    try:
        return os.path.basename(os.readlink(f"/proc/{pid}/exe"))
    except OSError:
        return "?"


tmp = tempfile.mkdtemp(prefix="ff-lifeline-")
env = dict(os.environ, TMPDIR=tmp)
log = open(os.path.join(tmp, "stderr.log"), "w+")
# Four 60 s evaluations on two slots: the client is certainly mid-run when killed.
p = subprocess.Popen([fflib.exe("fitfarm"), "eval", "--plugin", "spin", "--params", '{"ms": 60000}',
                      "--slots", "2"],
                     stdin=subprocess.PIPE, stdout=subprocess.DEVNULL, stderr=log, env=env, text=True)
p.stdin.write("[1]\n[2]\n[3]\n[4]\n")
p.stdin.flush()

# Wait until both programs run and the worker's two evaluation processes exist.
deadline = time.time() + 20
tree = {}
while time.time() < deadline:
    tree = descendants(p.pid)
    names = [exe_name(q) for q in tree]
    if names.count("fitfarm-broker") == 1 and names.count("fitfarm-worker") >= 3:
        break
    time.sleep(0.1)
names = {q: exe_name(q) for q in tree}
check.ok(list(names.values()).count("fitfarm-broker") == 1, f"one broker program below the client: {names}")
check.ok(list(names.values()).count("fitfarm-worker") >= 3, f"a worker program and its 2 slots: {names}")
time.sleep(1.0)  # evaluations under way
log.flush()
log.seek(0)
first = log.read()
m = re.search(r"fitfarm: run (\S+) \(resume with --run ([^\s)]+)", first)
check.ok(m is not None and m.group(1) == m.group(2), f"eval names its run on stderr: {first[-500:]!r}")

pool_dirs = [os.path.join(tmp, d) for d in os.listdir(tmp) if d.startswith("fitfarm-pool-")]
check.ok(len(pool_dirs) == 1, f"one pool folder under TMPDIR: {pool_dirs}")

os.kill(p.pid, signal.SIGKILL)
p.wait(timeout=10)
t0 = time.time()
left = dict(tree)
while left and time.time() - t0 < 10:
    left = {q: s for q, s in left.items() if alive(q, s)}
    time.sleep(0.1)
took = time.time() - t0
check.ok(not left, f"still alive 10 s after the client was killed: "
                   f"{ {q: names.get(q) for q in left} }")
print(f"pool gone {took:.2f} s after SIGKILL of its client ({len(tree)} processes)")
for q in left:  # never leave them to the next test
    try:
        os.kill(q, signal.SIGKILL)
    except ProcessLookupError:
        pass

# The killed client's folder stays (nobody was left to remove it) until a
# later pool start sees its lock free and its daemons gone; folders younger
# than 10 s are left alone in case they are still starting.
if pool_dirs:
    check.ok(os.path.isdir(pool_dirs[0]), "the killed client's folder is left behind at first")
    lock = os.path.join(pool_dirs[0], "lock")
    if os.path.exists(lock):
        wait = 11 - (time.time() - os.stat(lock).st_mtime)
        if wait > 0:
            time.sleep(wait)
    r = subprocess.run([fflib.exe("fitfarm"), "eval", "--plugin", "sphere", "--slots", "1"],
                       input="[1, 2]\n", capture_output=True, text=True, env=env, timeout=60)
    check.ok(r.returncode == 0 and '"fitness": [5' in r.stdout, f"a later pool works: {r.stdout} {r.stderr}")
    check.ok(not os.path.exists(pool_dirs[0]), f"the stale folder {pool_dirs[0]} is removed by the next start")
    rest = [d for d in os.listdir(tmp) if d.startswith("fitfarm-pool-")]
    check.ok(rest == [], f"no pool folder after a clean run: {rest}")
log.close()
check.done()
