"""Helpers for fitfarm's integration tests: start real brokers and workers on
loopback, run the CLI, and end every process we started by its PID.

Standard library only. Paths come from the environment that ctest sets:
FITFARM_BUILD_DIR and FITFARM_SOURCE_DIR.
"""
import json
import os
import random
import signal
import sqlite3
import struct
import subprocess
import sys
import tempfile
import time
import zlib

BUILD = os.environ.get("FITFARM_BUILD_DIR", os.path.join(os.path.dirname(__file__), "..", "..", "build"))
SOURCE = os.environ.get("FITFARM_SOURCE_DIR", os.path.join(os.path.dirname(__file__), "..", ".."))


def exe(name):
    """Path of a built program (fitfarm, fitfarm-broker, fitfarm-worker)."""
    for sub in ("client", "broker", "worker", "tests/integration", ""):
        p = os.path.join(BUILD, sub, name)
        if os.path.isfile(p) and os.access(p, os.X_OK):
            return p
    raise FileNotFoundError(f"{name} not found under {BUILD}")


class Pool:
    """A broker and workers as real processes. Use as a context manager: on
    exit every process still running is sent SIGTERM, then SIGKILL, by PID."""

    def __init__(self, tmp=None, broker_args=(), log_prefix="pool", secure=False,
                 broker_exe="fitfarm-broker", broker_env=None):
        """secure=False: plaintext on loopback (every daemon gets --insecure).
        secure=True: CURVE with keys made in tmp/keys by `fitfarm keygen`
        (broker, client, worker) and admitted with `fitfarm allow`."""
        self.tmp = tmp or tempfile.mkdtemp(prefix="fitfarm-it-")
        self.secure = secure
        self.keys = os.path.join(self.tmp, "keys")
        if secure:
            for name in ("broker", "client", "worker"):
                make_key(name, self.keys)
            allow("client", os.path.join(self.keys, "client.public"), self.keys)
            allow("worker", os.path.join(self.keys, "worker.public"), self.keys)
        self.broker_args = list(broker_args)
        self.procs = []
        self.broker = None
        self.workers = []
        self.clients_ep = None
        self.workers_ep = None
        self.log_prefix = log_prefix
        self.store = os.path.join(self.tmp, "store")
        self.broker_exe = broker_exe  # a test build of the broker (fitfarm-broker-faults)
        self.broker_env = broker_env  # extra environment for the broker

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.stop_all()
        return False

    def _log(self, name):
        return open(os.path.join(self.tmp, f"{name}.log"), "ab")

    def start_broker(self, clients="tcp://127.0.0.1:*", workers="tcp://127.0.0.1:*", extra=(),
                     prefix=(), start_timeout=20):
        """prefix: a command the broker runs under (valgrind and its options)."""
        epfile = os.path.join(self.tmp, "endpoints")
        if os.path.exists(epfile):
            os.unlink(epfile)
        # A restarted broker rebinds the ports it had, so workers and clients
        # that ZeroMQ is reconnecting find it again.
        if self.clients_ep and clients == "tcp://127.0.0.1:*":
            clients, workers = self.clients_ep, self.workers_ep
        # Each pool keeps its durable store in its own folder (the daemon's
        # default, ./fitfarm-store, would be shared by tests running at once).
        store = [] if "--store" in self.broker_args + list(extra) else ["--store", self.store]
        args = list(prefix) + [exe(self.broker_exe), "--clients", clients, "--workers", workers,
                "--endpoints-file", epfile] + store + self.broker_args + list(extra)
        if "--key" not in args and "--insecure" not in args:
            args += (["--key", self.key("broker.secret"), "--keys", self.keys] if self.secure
                     else ["--insecure"])
        env = dict(os.environ, **self.broker_env) if self.broker_env else None
        p = subprocess.Popen(args, stdout=subprocess.DEVNULL, stderr=self._log("broker"), env=env)
        self.procs.append(p)
        self.broker = p
        deadline = time.time() + start_timeout
        while time.time() < deadline:
            if p.poll() is not None:
                raise RuntimeError(f"broker exited with {p.returncode}; see {self.tmp}/broker.log")
            if os.path.exists(epfile):
                eps = dict(line.split(" ", 1) for line in open(epfile).read().split("\n") if line)
                self.clients_ep, self.workers_ep = eps["clients"].strip(), eps["workers"].strip()
                self.http_url = eps["http"].strip() if "http" in eps else None  # --http
                return p
            time.sleep(0.02)
        raise RuntimeError("broker did not write its endpoints file")

    def start_worker(self, slots=1, extra=(), name=None, env=None, prefix=()):
        """prefix: a command the worker runs under (valgrind and its options)."""
        name = name or f"w{len(self.workers)}"
        args = list(prefix) + [exe("fitfarm-worker"), "--broker", self.workers_ep, "--slots", str(slots),
                "--name", name] + list(extra)
        if "--key" not in args and "--insecure" not in args:
            args += (["--key", self.key("worker.secret"), "--broker-key", self.key("broker.public")]
                     if self.secure else ["--insecure"])
        p = subprocess.Popen(args, stdout=subprocess.DEVNULL, stderr=self._log(name),
                             env=dict(os.environ, **env) if env else None)
        self.procs.append(p)
        self.workers.append(p)
        return p

    def wait_workers(self, n, timeout=20):
        """Waits until the broker reports n workers."""
        deadline = time.time() + timeout
        while time.time() < deadline:
            st = self.status()
            if st is not None and len(st.get("workers", [])) >= n:
                return st
            time.sleep(0.1)
        raise RuntimeError(f"pool did not reach {n} workers; last status {st}")

    def key(self, name):
        """Path of a key file this pool made (secure mode)."""
        return os.path.join(self.keys, name)

    def client_args(self):
        """--broker and the security flags for `fitfarm eval` / `status`."""
        sec = (["--key", self.key("client.secret"), "--broker-key", self.key("broker.public")]
               if self.secure else ["--insecure"])
        return ["--broker", self.clients_ep] + sec

    def status(self):
        r = subprocess.run([exe("fitfarm"), "status", "--json"] + self.client_args(),
                           capture_output=True, text=True, timeout=30)
        if r.returncode != 0:
            return None
        return json.loads(r.stdout)

    def kill(self, p, sig=signal.SIGKILL):
        if p.poll() is None:
            os.kill(p.pid, sig)
        p.wait(timeout=30)

    def stop_all(self):
        for p in self.procs:
            if p.poll() is None:
                try:
                    os.kill(p.pid, signal.SIGTERM)
                except ProcessLookupError:
                    pass
        deadline = time.time() + 10
        for p in self.procs:
            try:
                p.wait(timeout=max(0.1, deadline - time.time()))
            except subprocess.TimeoutExpired:
                os.kill(p.pid, signal.SIGKILL)
                p.wait()

    def logs(self):
        out = []
        for f in sorted(os.listdir(self.tmp)):
            if f.endswith(".log"):
                out.append(f"--- {f}\n" + open(os.path.join(self.tmp, f), errors="replace").read()[-4000:])
        return "\n".join(out)


def wait_for(cond, timeout=30, step=0.05):
    """Polls cond() until it returns something true or timeout seconds pass;
    returns its last value."""
    deadline = time.time() + timeout
    while time.time() < deadline:
        v = cond()
        if v:
            return v
        time.sleep(step)
    return cond()


def alive(pid):
    """True while pid is a process that has not ended (a zombie has ended)."""
    try:
        with open(f"/proc/{pid}/stat") as f:
            state = f.read().rsplit(")", 1)[1].split()[0]
    except (OSError, IndexError):
        return False
    return state not in ("Z", "X")


def done_in_store(db_path):
    """Evaluations with a result in a broker's store (read-only; 0 while the
    file is missing or locked), for tests that act mid-run."""
    try:
        db = sqlite3.connect(f"file:{db_path}?mode=ro", uri=True, timeout=1)
        n = db.execute("SELECT count(*) FROM evaluations WHERE status IS NOT NULL").fetchone()[0]
        db.close()
        return n
    except sqlite3.Error:
        return 0


def overwrite_middle_page(db_path, seed):
    """Overwrites the middle page of a SQLite file with random bytes (a torn
    write or a bad sector). Returns (page number, pages, page size)."""
    with open(db_path, "rb") as f:
        header = f.read(100)
    page_size = int.from_bytes(header[16:18], "big")  # SQLite file format, header offset 16
    pages = os.path.getsize(db_path) // page_size
    victim = pages // 2
    with open(db_path, "r+b") as f:
        f.seek((victim - 1) * page_size)
        f.write(random.Random(seed).randbytes(page_size))
    return victim, pages, page_size


def run_eval(args, input_text, timeout=600):
    """Runs `fitfarm eval ARGS` with input_text on stdin. Returns
    (exit status, list of parsed output lines, stderr)."""
    args = list(args)
    # Loopback pools in tests run plaintext unless the caller passed keys.
    if "--broker" in args and "--key" not in args and "--insecure" not in args:
        args.append("--insecure")
    r = subprocess.run([exe("fitfarm"), "eval"] + args, input=input_text,
                       capture_output=True, text=True, timeout=timeout)
    lines = [json.loads(l) for l in r.stdout.splitlines() if l.strip()]
    return r.returncode, lines, r.stderr


def make_key(name, folder):
    """`fitfarm keygen NAME --dir FOLDER`; returns (public path, secret path)."""
    r = subprocess.run([exe("fitfarm"), "keygen", name, "--dir", folder],
                       capture_output=True, text=True, timeout=30)
    if r.returncode != 0:
        raise RuntimeError(f"keygen {name}: {r.stderr}")
    return os.path.join(folder, name + ".public"), os.path.join(folder, name + ".secret")


def allow(role, public, keys):
    """`fitfarm allow ROLE PUBLIC --keys KEYS`."""
    r = subprocess.run([exe("fitfarm"), "allow", role, public, "--keys", keys],
                       capture_output=True, text=True, timeout=30)
    if r.returncode != 0:
        raise RuntimeError(f"allow {role} {public}: {r.stderr}")
    return r


def genomes(n, dim, seed):
    rnd = random.Random(seed)
    return [[rnd.random() for _ in range(dim)] for _ in range(n)]


def jsonl(gs, with_id=True):
    out = []
    for i, g in enumerate(gs):
        body = "[" + ",".join(repr(x) for x in g) + "]"
        out.append(f'{{"id": {i}, "genome": {body}}}' if with_id else body)
    return "\n".join(out) + "\n"


def png_pixels(path):
    """(width, height, rows of pixel tuples) of an 8-bit RGB or RGBA PNG, decoded
    by the PNG specification (W3C/ISO 15948: chunks, IHDR, IDAT, the five row
    filters) with zlib alone, so no drawing library of ours is involved."""
    data = open(path, "rb").read()
    assert data[:8] == b"\x89PNG\r\n\x1a\n", "not a PNG signature"
    pos, idat, w = 8, b"", None
    while pos < len(data):
        n, kind = struct.unpack(">I4s", data[pos:pos + 8])
        body = data[pos + 8:pos + 8 + n]
        if kind == b"IHDR":
            w, h, depth, ctype = struct.unpack(">IIBB", body[:10])
            assert depth == 8 and ctype in (2, 6), f"depth {depth} colour type {ctype}"
            bpp = 3 if ctype == 2 else 4
        elif kind == b"IDAT":
            idat += body
        pos += 12 + n
    raw, stride = zlib.decompress(idat), bpp * w
    rows, prev = [], bytearray(stride)
    for y in range(h):
        f, line = raw[y * (stride + 1)], bytearray(raw[y * (stride + 1) + 1:(y + 1) * (stride + 1)])
        for i in range(stride):
            a = line[i - bpp] if i >= bpp else 0
            b, c = prev[i], prev[i - bpp] if i >= bpp else 0
            if f == 1:
                line[i] = (line[i] + a) & 255
            elif f == 2:
                line[i] = (line[i] + b) & 255
            elif f == 3:
                line[i] = (line[i] + (a + b) // 2) & 255
            elif f == 4:
                pa, pb, pc = abs(b - c), abs(a - c), abs(a + b - 2 * c)
                pr = a if pa <= pb and pa <= pc else b if pb <= pc else c
                line[i] = (line[i] + pr) & 255
        rows.append([tuple(line[i:i + bpp]) for i in range(0, stride, bpp)])
        prev = line
    return w, h, rows


class Check:
    """Collects failures and prints a closing line the way our runners do."""

    def __init__(self, name):
        self.name = name
        self.passed = 0
        self.failed = 0

    def ok(self, cond, what):
        if cond:
            self.passed += 1
        else:
            self.failed += 1
            print(f"FAIL: {what}", file=sys.stderr)
        return cond

    def done(self, pool=None):
        if self.failed and pool is not None:
            print(pool.logs(), file=sys.stderr)
        print(f"{self.name}: {self.passed} passed, {self.failed} failed")
        sys.exit(1 if self.failed else 0)
