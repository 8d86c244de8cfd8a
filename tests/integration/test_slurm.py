"""deploy/slurm/fitfarm-workers.sbatch on a real single-node Slurm: Debian's
munged, slurmctld and slurmd, started here on loopback (no systemd;
proctrack/linuxproc, task/none, controller and node at 127.0.0.1, every
state, spool and log file in a temporary folder) and stopped by PID at the
end. A real broker with CURVE keys; workers start only through sbatch.

A search of 24 genomes with the stochastic `spin` plugin runs through the
first job (fitfarm-workers.sbatch); that job is cancelled with scancel
mid-run; a second job, submitted by fitfarm-slurm-submit as the job-array
pattern (fitfarm-workers-array.sbatch), finishes the search. Every line must come back once, ok, with fitness bits identical
to the same genomes and seed evaluated on the embedded pool (no Slurm, no
broker of ours): seeds depend on content only, never on which worker or
attempt (DESIGN.md, "Keys, seeds, determinism").

Skips (exit 77, which ctest reports as skipped) when not root or when the
Slurm or munge programs are missing; deploy/install-deps.sh installs them.
If this host's name does not resolve, it is added to /etc/hosts (slurmd
looks its own name up)."""
import json
import os
import shutil
import signal
import socket
import subprocess
import sys
import tempfile
import time

import fflib

PROGRAMS = {"munged": "/usr/sbin/munged", "mungekey": "/usr/sbin/mungekey",
            "slurmctld": "/usr/sbin/slurmctld", "slurmd": "/usr/sbin/slurmd"}
for name in ("sbatch", "scancel", "squeue", "sinfo", "srun", "scontrol"):
    PROGRAMS[name] = shutil.which(name) or f"/usr/bin/{name}"


def skip(why):
    print(f"test_slurm: skipped: {why}")
    sys.exit(77)


if os.geteuid() != 0:
    skip("needs root (slurmd runs jobs as their user and must be root to do so)")
missing = [p for p in PROGRAMS.values() if not os.access(p, os.X_OK)]
if missing:
    skip(f"missing {', '.join(missing)} (Debian packages slurmctld slurmd slurm-client munge; "
         "deploy/install-deps.sh installs them)")

check = fflib.Check("test_slurm")
N = 24
MS = 300
SEED = 7
PARAMS = json.dumps({"ms": MS})
gs = fflib.genomes(N, 2, seed=11)

# munged refuses a socket folder that others cannot traverse.
tmp = tempfile.mkdtemp(prefix="ff-slurm-")
os.chmod(tmp, 0o755)
for d in ("munge", "state", "spool", "log", "out"):
    os.makedirs(os.path.join(tmp, d), mode=0o755)
daemons = []  # (name, Popen): stopped by PID, last started first


def start(name, args, env=None):
    log = open(os.path.join(tmp, "log", f"{name}.out"), "ab")
    p = subprocess.Popen(args, stdout=log, stderr=subprocess.STDOUT, env=env)
    daemons.append((name, p))
    return p


def free_port():
    s = socket.socket()
    s.bind(("127.0.0.1", 0))
    port = s.getsockname()[1]
    s.close()
    return port


def stop_daemons():
    for name, p in reversed(daemons):
        if p.poll() is None:
            os.kill(p.pid, signal.SIGTERM)
            try:
                p.wait(timeout=15)
            except subprocess.TimeoutExpired:
                os.kill(p.pid, signal.SIGKILL)
                p.wait()


def wait_for(what, cond, timeout=30):
    deadline = time.time() + timeout
    while time.time() < deadline:
        if cond():
            return True
        time.sleep(0.1)
    check.ok(False, f"timed out waiting for {what}")
    return False


host = socket.gethostname().split(".")[0]
try:
    socket.gethostbyname(host)
except OSError:
    with open("/etc/hosts", "a") as f:
        f.write(f"127.0.0.1 {host}  # added by fitfarm's test_slurm: slurmd resolves its own name\n")

sock = os.path.join(tmp, "munge", "socket")
key = os.path.join(tmp, "munge", "munge.key")
subprocess.run([PROGRAMS["mungekey"], "--create", f"--keyfile={key}"], check=True)
start("munged", [PROGRAMS["munged"], "--foreground", f"--key-file={key}", f"--socket={sock}",
                 f"--pid-file={tmp}/munge/pid", f"--log-file={tmp}/log/munged.log",
                 f"--seed-file={tmp}/munge/seed"])
conf = os.path.join(tmp, "slurm.conf")
cpus = os.cpu_count() or 1
with open(conf, "w") as f:
    f.write(f"""ClusterName=fitfarmtest
SlurmctldHost={host}(127.0.0.1)
SlurmUser=root
SlurmdUser=root
SlurmctldPort={free_port()}
SlurmdPort={free_port()}
AuthType=auth/munge
AuthInfo=socket={sock}
CredType=cred/munge
StateSaveLocation={tmp}/state
SlurmdSpoolDir={tmp}/spool
SlurmctldPidFile={tmp}/slurmctld.pid
SlurmdPidFile={tmp}/slurmd.pid
SlurmctldLogFile={tmp}/log/slurmctld.log
SlurmdLogFile={tmp}/log/slurmd.log
ProctrackType=proctrack/linuxproc
TaskPlugin=task/none
SwitchType=switch/none
MpiDefault=none
JobAcctGatherType=jobacct_gather/none
AccountingStorageType=accounting_storage/none
JobCompType=jobcomp/none
SchedulerType=sched/builtin
SelectType=select/cons_tres
SelectTypeParameters=CR_CPU
ReturnToService=2
KillWait=10
NodeName={host} NodeAddr=127.0.0.1 CPUs={cpus} State=UNKNOWN
PartitionName=fitfarm Nodes={host} Default=YES MaxTime=INFINITE State=UP
""")
env = dict(os.environ, SLURM_CONF=conf)


def slurm(name, *args, timeout=30):
    return subprocess.run([PROGRAMS[name]] + list(args), capture_output=True, text=True,
                          env=env, timeout=timeout)


def job_gone(job):
    r = slurm("squeue", "-h", "-j", job, "-o", "%T")
    return r.returncode != 0 or not r.stdout.strip()


pool = fflib.Pool(secure=True)
try:
    if not wait_for("munged's socket", lambda: os.path.exists(sock)):
        raise SystemExit
    start("slurmctld", [PROGRAMS["slurmctld"], "-D", "-i"], env)
    start("slurmd", [PROGRAMS["slurmd"], "-D"], env)
    if not wait_for("the node to be idle",
                    lambda: slurm("sinfo", "-h", "-o", "%T").stdout.strip() == "idle", 60):
        raise SystemExit

    # The reference: the same genomes and seed on the embedded pool.
    rc, ref, err = fflib.run_eval(["--plugin", "spin", "--params", PARAMS, "--seed", str(SEED),
                                   "--slots", "2"], fflib.jsonl(gs))
    check.ok(rc == 0 and len(ref) == N, f"embedded reference run: exit {rc}, {len(ref)} lines: {err[-500:]}")

    pool.start_broker()
    script = os.path.join(fflib.SOURCE, "deploy", "slurm", "fitfarm-workers.sbatch")
    job_env = dict(env, FITFARM_WORKER_PROGRAM=fflib.exe("fitfarm-worker"))

    def submit(tag, *args):
        r = subprocess.run([PROGRAMS["sbatch"], "--parsable", "--nodes=1", f"--cpus-per-task={cpus}",
                            "-o", os.path.join(tmp, "out", f"{tag}-%j.out"), script] + list(args),
                           capture_output=True, text=True, env=job_env, timeout=30)
        return r.returncode, r.stdout.strip().split(";")[0], r.stderr

    # A missing key fails the job with a message that names it.
    rc, job0, err = submit("nokey", pool.workers_ep, os.path.join(tmp, "absent.secret"),
                           pool.key("broker.public"))
    check.ok(rc == 0, f"sbatch of the no-key job: {err}")
    wait_for("the no-key job to end", lambda: job_gone(job0))
    out0 = "".join(open(os.path.join(tmp, "out", f)).read() for f in os.listdir(os.path.join(tmp, "out"))
                   if f.startswith("nokey-"))
    check.ok("worker secret key" in out0 and "absent.secret" in out0 and "fitfarm keygen" in out0,
             f"a missing key is named in the job's output: {out0!r}")

    rc, job1, err = submit("first", pool.workers_ep, pool.key("worker.secret"), pool.key("broker.public"))
    check.ok(rc == 0 and job1.isdigit(), f"sbatch: {rc} {job1} {err}")
    pool.wait_workers(1, timeout=60)
    st = pool.status() or {}
    slots = [w.get("slots") for w in st.get("workers", [])]
    check.ok(slots == [cpus], f"the worker took its slots from the allocation: {slots}, allocated {cpus}")

    inp = os.path.join(pool.tmp, "in.jsonl")
    out_path = os.path.join(pool.tmp, "out.jsonl")
    open(inp, "w").write(fflib.jsonl(gs))
    cli = subprocess.Popen([fflib.exe("fitfarm"), "eval", "--run", "slurm", "--seed", str(SEED),
                            "--plugin", "spin", "--params", PARAMS, "--in", inp, "--out", out_path]
                           + pool.client_args(), stderr=open(os.path.join(pool.tmp, "cli.log"), "wb"))
    db = os.path.join(pool.store, "fitfarm.db")
    wait_for("a few results", lambda: fflib.done_in_store(db) >= 4, 60)
    t_cancel = time.time()
    r = slurm("scancel", job1)
    check.ok(r.returncode == 0, f"scancel {job1}: {r.stderr}")
    wait_for("the cancelled job to end", lambda: job_gone(job1), 60)
    print(f"job {job1} cancelled after {fflib.done_in_store(db)} of {N} results, "
          f"gone {time.time() - t_cancel:.1f} s later")
    check.ok(fflib.done_in_store(db) < N, "the job was cancelled mid-run")
    check.ok(cli.poll() is None, "the search waits for workers while none is left")

    # The second job: the submit helper, with the job-array pattern of
    # opportunistic workers (one element). It first refuses an endpoint
    # where nothing listens.
    helper = os.path.join(fflib.SOURCE, "deploy", "slurm", "fitfarm-slurm-submit")
    common = ["--key", pool.key("worker.secret"), "--broker-key", pool.key("broker.public"),
              "--program", fflib.exe("fitfarm-worker")]
    r = subprocess.run([helper, "--broker", f"tcp://127.0.0.1:{free_port()}"] + common,
                       capture_output=True, text=True, env=env, timeout=30)
    check.ok(r.returncode == 2 and "nothing listens" in r.stderr, f"submit to a dead endpoint: {r.returncode} {r.stderr}")
    r = subprocess.run([helper, "--broker", pool.workers_ep, "--array", "1", "--cpus", str(cpus)] + common
                       + ["--", "-o", os.path.join(tmp, "out", "second-%A_%a.out")],
                       capture_output=True, text=True, env=env, timeout=30)
    job2 = r.stdout.strip().split(";")[0].split("_")[0]
    check.ok(r.returncode == 0 and job2.isdigit(), f"fitfarm-slurm-submit --array 1: {r.returncode} {r.stdout} {r.stderr}")
    cli.wait(timeout=120)
    check.ok(cli.returncode == 0, f"the search finished, exit {cli.returncode}")
    out = [json.loads(l) for l in open(out_path).read().splitlines() if l.strip()]
    ids = sorted(o.get("id") for o in out)
    check.ok(ids == list(range(N)), f"every line delivered once: {ids}")
    by_id = {o["id"]: o for o in out}
    # json.loads reads the 17 significant digits fitfarm prints back into
    # the same double (IEEE 754 round trip, common practice): == is bitwise.
    same = sum(1 for r in ref if by_id.get(r["id"], {}).get("fitness") == r["fitness"]
               and by_id[r["id"]].get("status") == "ok")
    check.ok(same == N, f"{same} of {N} results bit-identical to the embedded pool's")
    st = pool.status() or {}
    names = [w.get("name") for w in st.get("workers", [])]
    check.ok(any(n and f"job{job2}_0" in n for n in names), f"the array element's worker served the pool: {names}")
    slurm("scancel", job2)
    wait_for("the second job to end", lambda: job_gone(job2), 60)
finally:
    for name, p in daemons:
        if name == "slurmctld" and p.poll() is None:
            slurm("scancel", "--user=root")
    pool.stop_all()
    stop_daemons()
if check.failed:
    for f in sorted(os.listdir(os.path.join(tmp, "out"))) + ["log/slurmctld.log", "log/slurmd.log"]:
        path = os.path.join(tmp, "out", f) if not f.startswith("log/") else os.path.join(tmp, f)
        try:
            print(f"--- {path}\n" + open(path, errors="replace").read()[-3000:], file=sys.stderr)
        except OSError:
            pass
check.done(pool)
