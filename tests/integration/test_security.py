"""CURVE pools end to end, and every refusal: a secure pool over TCP computes
ZDT1 right (checked against the published formula, refs.py); an unknown key,
a client key on the workers endpoint, a worker key on the clients endpoint and
a plaintext peer on a CURVE endpoint are refused and logged with the key's
fingerprint; plaintext on a non-local address and CURVE without keys do not
start; keygen refuses to overwrite and writes the secret 0600; SIGHUP applies
an allow-list change (a removed worker is dropped, its jobs re-queued and
finished by another worker); a run over its queue cap gets "queue full".
Fingerprints are checked against Python's hashlib.blake2b (RFC 7693)."""
import os
import signal
import stat
import subprocess
import time

import fflib
import refs

FITFARM = fflib.exe("fitfarm")
check = fflib.Check("test_security")

fingerprint = refs.key_fingerprint


def wait_log(pool, name, text, timeout=15):
    deadline = time.time() + timeout
    path = os.path.join(pool.tmp, f"{name}.log")
    while time.time() < deadline:
        if os.path.exists(path) and text in open(path, errors="replace").read():
            return True
        time.sleep(0.1)
    return False


def eval_cmd(pool, extra, text, timeout=60):
    return subprocess.run([FITFARM, "eval", "--plugin", "zdt1", "--params", '{"n": 30}'] + extra,
                          input=text, capture_output=True, text=True, timeout=timeout)


with fflib.Pool(secure=True) as pool:
    keys = pool.keys
    # keygen: refuses to overwrite, secret is 0600, fingerprint is BLAKE2b of the key.
    r = subprocess.run([FITFARM, "keygen", "client", "--dir", keys], capture_output=True, text=True)
    check.ok(r.returncode == 1 and "refusing to overwrite" in r.stderr, f"keygen overwrite: {r.returncode} {r.stderr}")
    mode = stat.S_IMODE(os.stat(pool.key("client.secret")).st_mode)
    check.ok(mode == 0o600, f"secret key mode {oct(mode)}")
    fp_client = fingerprint(pool.key("client.public"))
    fp_worker = fingerprint(pool.key("worker.public"))

    pool.start_broker()
    pool.start_worker(slots=2, name="w0")
    st = pool.wait_workers(1)
    check.ok(len(st["workers"]) == 1, "a keyed worker registers")
    check.ok(wait_log(pool, "broker", f"admitted worker key {fp_worker}"), "broker logs the admitted worker's fingerprint")

    # 1. End to end with keys: ZDT1 n=30 against the published formula.
    gs = fflib.genomes(300, 30, seed=21)
    rc, out, err = fflib.run_eval(pool.client_args() + ["--plugin", "zdt1", "--params", '{"n": 30}'], fflib.jsonl(gs))
    check.ok(rc == 0 and len(out) == len(gs), f"secure eval: exit {rc}, {len(out)} lines, {err[-500:]}")
    bad = sum(1 for g, o in zip(gs, out) if o.get("status") != "ok" or not refs.close(o["fitness"], refs.zdt(1, g)))
    check.ok(bad == 0, f"secure eval: {bad} results differ from ZDT1 (Zitzler, Deb, Thiele 2000)")

    # 2. Refusals. A stranger's key:
    fflib.make_key("stranger", os.path.join(pool.tmp, "other"))
    stranger = os.path.join(pool.tmp, "other", "stranger")
    fp_stranger = fingerprint(stranger + ".public")
    one = fflib.jsonl([[0.5] * 30])
    r = eval_cmd(pool, ["--broker", pool.clients_ep, "--key", stranger + ".secret",
                        "--broker-key", pool.key("broker.public")], one, timeout=30)
    check.ok(r.returncode != 0 and not r.stdout.strip(), f"unknown client key gets nothing: {r.returncode} {r.stdout!r}")
    check.ok(wait_log(pool, "broker", f"with key {fp_stranger}: not on the client allow-list"),
             "unknown key refused and logged with its fingerprint")
    # A worker key on the clients endpoint:
    r = eval_cmd(pool, ["--broker", pool.clients_ep, "--key", pool.key("worker.secret"),
                        "--broker-key", pool.key("broker.public")], one, timeout=30)
    check.ok(r.returncode != 0 and not r.stdout.strip(), "worker key on the clients endpoint gets nothing")
    check.ok(wait_log(pool, "broker", f"with key {fp_worker}: a worker key (worker) on the clients endpoint"),
             "worker key on the clients endpoint refused and logged")
    # A client key on the workers endpoint: the worker never registers.
    wbad = pool.start_worker(slots=1, name="wbad", extra=["--key", pool.key("client.secret"),
                                                          "--broker-key", pool.key("broker.public")])
    check.ok(wait_log(pool, "broker", f"with key {fp_client}: a client key (client) on the workers endpoint"),
             "client key on the workers endpoint refused and logged")
    st = pool.status()
    check.ok(st is not None and [w["name"] for w in st["workers"]] == ["w0"], f"only w0 is registered: {st}")
    pool.kill(wbad, signal.SIGTERM)
    # Plaintext to a CURVE endpoint:
    r = eval_cmd(pool, ["--broker", pool.clients_ep, "--insecure"], one, timeout=30)
    check.ok(r.returncode != 0 and not r.stdout.strip(), "plaintext client to a CURVE endpoint gets nothing")
    # ZeroMQ reports a mechanism mismatch as a protocol error or, when the peer
    # hangs up first, without detail: either is a refusal line for the endpoint.
    check.ok(wait_log(pool, "broker", "refused a connection on the clients endpoint: "),
             "plaintext peer refused and logged")
    # A wrong broker key (the client's own public key as the server key): no connection.
    r = eval_cmd(pool, ["--broker", pool.clients_ep, "--key", pool.key("client.secret"),
                        "--broker-key", pool.key("client.public")], one, timeout=30)
    check.ok(r.returncode != 0 and not r.stdout.strip(), "a wrong --broker-key gets nothing")
    # Client without keys to TCP: refused before connecting, with the way out.
    r = eval_cmd(pool, ["--broker", pool.clients_ep], one, timeout=30)
    check.ok(r.returncode != 0 and "fitfarm keygen" in r.stderr, f"no keys: explained: {r.stderr}")
    # A secret key readable by others is refused.
    loose = os.path.join(pool.tmp, "other", "stranger.secret")
    os.chmod(loose, 0o644)
    r = eval_cmd(pool, ["--broker", pool.clients_ep, "--key", loose, "--broker-key", pool.key("broker.public")], one)
    check.ok(r.returncode != 0 and "chmod 600" in r.stderr, f"world-readable secret refused: {r.stderr}")
    # A secret file given as --broker-key is refused with a sentence.
    r = eval_cmd(pool, ["--broker", pool.clients_ep, "--key", pool.key("client.secret"),
                        "--broker-key", pool.key("broker.secret")], one)
    check.ok(r.returncode != 0 and "SECRET key file" in r.stderr, f"secret as broker key: {r.stderr}")

    # 3. Key from the environment and the config file (precedence: flag > env > file).
    cfg = os.path.join(pool.tmp, "client.conf")
    with open(cfg, "w") as f:
        f.write(f"# test config\nbroker = {pool.clients_ep}\nkey = {stranger}.secret\n"
                f"broker_key = {pool.key('broker.public')}\n")
    env = dict(os.environ, FITFARM_KEY=pool.key("client.secret"))
    r = subprocess.run([FITFARM, "eval", "--plugin", "zdt1", "--params", '{"n": 30}', "--config", cfg],
                       input=one, capture_output=True, text=True, timeout=60, env=env)
    check.ok(r.returncode == 0 and '"status": "ok"' in r.stdout,
             f"FITFARM_KEY beats the config file's key (broker and broker_key from the file): {r.stderr[-400:]}")
    with open(cfg, "a") as f:
        f.write("bogus = 1\n")
    r = subprocess.run([FITFARM, "status", "--config", cfg], capture_output=True, text=True, timeout=30)
    check.ok(r.returncode == 2 and "line 5: unknown setting 'bogus'" in r.stderr, f"bad config named: {r.stderr}")

    # 4. SIGHUP: w0's key removed, a second worker admitted; w0's held jobs are re-queued
    # and finished by w1 (every result right).
    fflib.make_key("worker2", keys)
    fflib.allow("worker", pool.key("worker2.public"), keys)
    pool.broker.send_signal(signal.SIGHUP)
    check.ok(wait_log(pool, "broker", "allow-lists reloaded: 1 client keys, 2 worker keys"), "SIGHUP reloads")
    slow = subprocess.Popen([FITFARM, "eval", "--plugin", "spin", "--params", '{"ms": 300}'] + pool.client_args(),
                            stdin=subprocess.PIPE, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    slow_in = "".join(f"[{i}]\n" for i in range(8))
    time.sleep(0.1)
    slow.stdin.write(slow_in)
    slow.stdin.close()
    time.sleep(0.8)  # w0 holds jobs now
    lines = [l for l in open(os.path.join(keys, "workers.allow")).read().splitlines()
             if not l.endswith(" worker")]
    open(os.path.join(keys, "workers.allow"), "w").write("\n".join(lines) + "\n")
    pool.broker.send_signal(signal.SIGHUP)
    check.ok(wait_log(pool, "broker", "(key " + fp_worker + ") dropped: its key was removed from workers.allow; re-queued"),
             "the removed worker is dropped and its jobs re-queued")
    pool.start_worker(slots=2, name="w1", extra=["--key", pool.key("worker2.secret"),
                                                 "--broker-key", pool.key("broker.public")])
    out = slow.stdout.read()
    err = slow.stderr.read()
    slow.wait(timeout=120)
    got = [l for l in out.splitlines() if l.strip()]
    check.ok(slow.returncode == 0 and len(got) == 8 and all('"status": "ok"' in l for l in got),
             f"every job of the removed worker finished elsewhere: {slow.returncode} {len(got)} {err[-400:]}")
    st = pool.status()
    check.ok(st is not None and [w["name"] for w in st["workers"]] == ["w1"], f"w0 stays out: {st}")

    secure_logs = pool.logs()

with fflib.Pool(secure=False) as pool:
    # Plaintext on a non-local address does not start, and says why and how.
    r = subprocess.run([fflib.exe("fitfarm-broker"), "--clients", "tcp://0.0.0.0:0", "--workers",
                        "tcp://127.0.0.1:*", "--insecure", "--store", os.path.join(pool.tmp, "s1")],
                       capture_output=True, text=True, timeout=30)
    check.ok(r.returncode != 0 and "only on ipc://" in r.stderr and "fitfarm keygen broker" in r.stderr,
             f"plaintext on 0.0.0.0 refused: {r.returncode} {r.stderr[-600:]}")
    # CURVE without keys does not start.
    r = subprocess.run([fflib.exe("fitfarm-broker"), "--clients", "tcp://127.0.0.1:*", "--workers",
                        "tcp://127.0.0.1:*", "--store", os.path.join(pool.tmp, "s2")],
                       capture_output=True, text=True, timeout=30, env=dict(os.environ, HOME=pool.tmp))
    check.ok(r.returncode != 0 and "--keys DIR" in r.stderr, f"no keys refused: {r.stderr[-600:]}")
    # A worker may not go plaintext to a non-local broker.
    r = subprocess.run([fflib.exe("fitfarm-worker"), "--broker", "tcp://192.0.2.1:5556", "--insecure", "--slots", "1"],
                       capture_output=True, text=True, timeout=30)
    check.ok(r.returncode != 0 and "refusing to connect without encryption" in r.stderr, f"worker plaintext remote: {r.stderr[-400:]}")

    # Queue cap (plaintext loopback pool is enough to test the cap).
    pool.broker_args = ["--max-queued-per-run", "10"]
    pool.start_broker()
    pool.start_worker(slots=1)
    pool.wait_workers(1)
    rc, out, err = fflib.run_eval(["--broker", pool.clients_ep, "--plugin", "sphere"],
                                  "".join(f"[{i}]\n" for i in range(50)), timeout=60)
    check.ok(rc != 0 and "queue full" in err and "--max-queued-per-run" in err, f"queue full reported: {rc} {err[-600:]}")
    rc, out, err = fflib.run_eval(["--broker", pool.clients_ep, "--plugin", "sphere"], "[3]\n[4]\n")
    check.ok(rc == 0 and [o["fitness"] for o in out] == [[9], [16]], f"under the cap all is well: {rc} {out}")
check.done(pool)
