"""Papercuts a new user met, each checked the way that user would meet it:

- `fitfarm keygen NAME --dir a/b/c` makes the missing folders (mode 0700),
  and says which folder it could not make, and why, when it cannot;
- a path in the config file may start with "~/" (the user's $HOME, as a
  POSIX shell's tilde expansion, common practice): `fitfarm status` reads
  its keys through such paths from a real CURVE broker;
- a public key given as --key is called a public key, not "read by others";
- `fitfarm-broker --pid-file FILE`: written once the broker listens, the
  README's `kill -HUP "$(cat FILE)"` reloads the allow-lists, a second
  broker naming the same file refuses to start, and the file is gone after a
  clean exit;
- the commands of client/examples/README.md work as written (run through
  bash from the source folder, only the fixed ports 5555/5556 replaced by
  free ones), and give the cantilever's textbook tip deflection
  P*L^3/(3*E*I) for a uniform beam (Gere & Timoshenko, Mechanics of
  Materials; any strength-of-materials text)."""
import json
import os
import re
import signal
import socket
import stat
import subprocess
import tempfile
import time

import fflib

check = fflib.Check("test_papercuts")
ff = fflib.exe("fitfarm")
tmp = tempfile.mkdtemp(prefix="ff-papercuts-")

# keygen: missing parents, 0700 each; a reason when it cannot.
deep = os.path.join(tmp, "home", ".fitfarm", "keys")
r = subprocess.run([ff, "keygen", "me", "--dir", deep], capture_output=True, text=True)
check.ok(r.returncode == 0 and os.path.exists(os.path.join(deep, "me.secret")), f"keygen into new folders: {r.stderr}")
modes = [stat.S_IMODE(os.stat(os.path.join(tmp, *p)).st_mode) for p in
         (["home"], ["home", ".fitfarm"], ["home", ".fitfarm", "keys"])]
check.ok(modes == [0o700] * 3, f"each folder keygen made is 0700: {[oct(m) for m in modes]}")
blocker = os.path.join(tmp, "plainfile")
open(blocker, "w").close()
r = subprocess.run([ff, "keygen", "me", "--dir", os.path.join(blocker, "sub")], capture_output=True, text=True)
check.ok(r.returncode == 1 and "plainfile exists and is not a folder" in r.stderr, f"keygen under a file: {r.stderr}")
r = subprocess.run([ff, "keygen", "me", "--dir", "/proc/self/nope/keys"], capture_output=True, text=True)
check.ok(r.returncode == 1 and "mkdir /proc/self/nope" in r.stderr and ":" in r.stderr.split("mkdir")[1],
         f"keygen where mkdir fails names the folder and the reason: {r.stderr}")

with fflib.Pool(secure=True, tmp=os.path.join(tmp, "pool")) as pool:
    os.makedirs(pool.tmp, exist_ok=True)
    pidfile = os.path.join(tmp, "broker.pid")
    pool.start_broker(extra=["--pid-file", pidfile])
    pid_text = open(pidfile).read() if os.path.exists(pidfile) else ""
    check.ok(pid_text == f"{pool.broker.pid}\n", f"the PID file holds the broker's PID: {pid_text!r}")

    # ~ in the config file: HOME is a folder of ours, keys under it.
    home = os.path.join(tmp, "home")
    for k in ("client.secret", "broker.public"):
        os.replace(pool.key(k), os.path.join(deep, k))
    conf = os.path.join(tmp, "config")
    open(conf, "w").write(f"broker = {pool.clients_ep}\nkey = ~/.fitfarm/keys/client.secret\n"
                          "broker_key = ~/.fitfarm/keys/broker.public\n")
    env = dict(os.environ, HOME=home)
    for v in ("FITFARM_KEY", "FITFARM_BROKER_KEY", "FITFARM_BROKER"):
        env.pop(v, None)
    r = subprocess.run([ff, "status", "--json", "--config", conf], capture_output=True, text=True, env=env, timeout=30)
    check.ok(r.returncode == 0 and "workers" in json.loads(r.stdout or "{}"),
             f"status through ~/ paths in the config file: {r.returncode} {r.stderr}")

    # A public key as --key.
    pub = os.path.join(deep, "me.public")
    r = subprocess.run([ff, "status", "--broker", pool.clients_ep, "--key", pub,
                        "--broker-key", os.path.join(deep, "broker.public")], capture_output=True, text=True, timeout=30)
    check.ok(r.returncode != 0 and "is a public key" in r.stderr and "me.secret" in r.stderr
             and "read by others" not in r.stderr, f"a public key as --key: {r.stderr}")

    # kill -HUP "$(cat FILE)", exactly as the README says.
    r = subprocess.run(["bash", "-c", f'kill -HUP "$(cat {pidfile})"'], capture_output=True, text=True)
    log = os.path.join(pool.tmp, "broker.log")
    check.ok(r.returncode == 0, f"kill -HUP from the PID file: {r.stderr}")
    deadline = time.time() + 10
    while time.time() < deadline and "allow-lists reloaded" not in open(log, errors="replace").read():
        time.sleep(0.1)
    check.ok("allow-lists reloaded" in open(log, errors="replace").read(), "SIGHUP through the PID file reloaded the lists")

    # A second broker naming the same PID file refuses to start.
    r = subprocess.run([fflib.exe("fitfarm-broker"), "--clients", "tcp://127.0.0.1:*", "--workers", "tcp://127.0.0.1:*",
                        "--insecure", "--store", os.path.join(tmp, "store2"), "--pid-file", pidfile],
                       capture_output=True, text=True, timeout=30)
    check.ok(r.returncode != 0 and f"names process {pool.broker.pid}, which is running" in r.stderr,
             f"a second broker on the same PID file: {r.returncode} {r.stderr[-500:]}")
    check.ok(open(pidfile).read() == pid_text, "the refused broker left the PID file alone")
    os.kill(pool.broker.pid, signal.SIGTERM)
    pool.broker.wait(timeout=30)
    check.ok(pool.broker.returncode == 0 and not os.path.exists(pidfile),
             f"clean exit {pool.broker.returncode} removed the PID file: {os.path.exists(pidfile)}")

# A stale PID file (its process is gone) does not stop a start.
open(pidfile, "w").write("999999999\n")
p = subprocess.Popen([fflib.exe("fitfarm-broker"), "--clients", "tcp://127.0.0.1:*", "--workers", "tcp://127.0.0.1:*",
                      "--insecure", "--store", os.path.join(tmp, "store3"), "--pid-file", pidfile],
                     stderr=subprocess.PIPE, text=True)
deadline = time.time() + 20
while time.time() < deadline and open(pidfile).read() != f"{p.pid}\n" and p.poll() is None:
    time.sleep(0.05)
check.ok(open(pidfile).read() == f"{p.pid}\n", "a stale PID file is replaced")
if p.poll() is None:
    os.kill(p.pid, signal.SIGTERM)
p.communicate(timeout=30)

# client/examples/README.md, verbatim but for the ports.
text = open(os.path.join(fflib.SOURCE, "client", "examples", "README.md")).read()
block = re.search(r"```sh\n(.*?)```", text, re.S).group(1)


def free_port():
    s = socket.socket()
    s.bind(("127.0.0.1", 0))
    port = s.getsockname()[1]
    s.close()
    return port


block = block.replace("5555", str(free_port())).replace("5556", str(free_port()))
progs = os.pathsep.join(os.path.dirname(fflib.exe(n)) for n in ("fitfarm", "fitfarm-broker", "fitfarm-worker"))
run_dir = tempfile.mkdtemp(prefix="ff-example-")  # the broker's default store lands here
script = ("set -e\ncd " + fflib.SOURCE + "\nexport PWD\nrm -f worker.ready\n" + block.replace("&\n", "& echo $! >> " + run_dir + "/pids\n")
          .replace("fitfarm-broker ", f"cd {run_dir}; fitfarm-broker ", 1))
script = script.replace(f"cd {run_dir}; fitfarm-broker ", f"(cd {run_dir} && exec fitfarm-broker ", 1)
script = re.sub(r"(\(cd [^\n]*?) & echo", r"\1) & echo", script, count=1)
env = dict(os.environ, PATH=progs + os.pathsep + os.environ.get("PATH", "/usr/bin:/bin"))
try:
    # Files, not pipes: the commands started with & keep theirs open.
    with open(os.path.join(run_dir, "stdout"), "w") as o, open(os.path.join(run_dir, "stderr"), "w") as e:
        r = subprocess.run(["bash", "-c", script], stdout=o, stderr=e, env=env, timeout=120)
    r.stdout = open(os.path.join(run_dir, "stdout")).read()
    r.stderr = open(os.path.join(run_dir, "stderr")).read()
finally:
    pids = [int(x) for x in open(os.path.join(run_dir, "pids")).read().split()] \
        if os.path.exists(os.path.join(run_dir, "pids")) else []
    for pid in reversed(pids):
        try:
            os.kill(pid, signal.SIGTERM)
        except ProcessLookupError:
            pass
if os.path.exists(os.path.join(fflib.SOURCE, "worker.ready")):
    os.unlink(os.path.join(fflib.SOURCE, "worker.ready"))
lines = [json.loads(l) for l in r.stdout.splitlines() if l.strip()]
check.ok(r.returncode == 0 and len(lines) == 2 and all(l.get("status") == "ok" for l in lines),
         f"the examples README's commands: exit {r.returncode}, {r.stdout} {r.stderr[-1500:]}")
if len(lines) == 2 and lines[0].get("status") == "ok":
    # Genome [0.5, 0.5, 0.5] is a uniform beam (every segment at mid height):
    # delta = P L^3 / (3 E I), I = b h^3 / 12. The plugin's defaults are read
    # from its own introduction of the parameters in cantilever.py.
    src = open(os.path.join(fflib.SOURCE, "client", "examples", "cantilever.py")).read()

    def default(name):
        return float(re.search(rf'"{name}":\s*([0-9.eE+-]+)', src).group(1))

    E, b, hmin, hmax = default("youngs_modulus"), default("width"), default("h_min"), default("h_max")
    h = hmin + 0.5 * (hmax - hmin)
    delta = 500 * 2 ** 3 / (3 * E * b * h ** 3 / 12)
    got = lines[0]["fitness"][0]
    check.ok(abs(got - delta) <= 1e-9 * delta, f"uniform beam tip deflection {got} vs P L^3/(3EI) = {delta}")
check.done()
