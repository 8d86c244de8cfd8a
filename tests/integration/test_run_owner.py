"""Run ownership with two real client keys on a CURVE pool (real broker,
worker and CLI; the raw SUBMIT and ACK frames come from hostile_peer).

1. The owner streams run "victim" (seed 12345) with `fitfarm eval`. While it
   runs, a second admitted key ("intruder") sends: a SUBMIT with a wrong seed
   (the probe), a SUBMIT with the right seed and 0 items (the attach attack),
   one with an item, an ACK of every tag and a status request. Every SUBMIT is
   refused with code 9 and the same sentence, which names neither the seed nor
   the mode nor any count; the intruder gets no result; status does not list
   the run; the owner's stream completes (every line, every seed equal to
   the seed derivation recomputed with Python's hashlib, refs.seed).
2. ACKs from another key have no effect: a raw owner submits 40 requests to
   "held" and never acknowledges; the intruder ACKs tags 1..40; the store still
   has 0 acknowledged requests of the run, and the owner's new connection
   (a documented reconnect: a 0-item SUBMIT) gets all 40 results again.
3. Sharing: `fitfarm share held intruder.public` and SIGHUP let the intruder
   attach and receive the 40 results; removing the line and SIGHUP cuts its
   connection off (logged) and its next SUBMIT is refused again.
4. A store from before ownership (runs.owner missing) is migrated: the
   column is added, the broker starts, and the first key to use an old run
   claims it (logged); another key is then refused.
"""
import json
import os
import re
import signal
import sqlite3
import subprocess
import time

import fflib
import refs

FITFARM = fflib.exe("fitfarm")
PEER = os.path.join(fflib.BUILD, "tests", "integration", "hostile_peer")
check = fflib.Check("test_run_owner")
SPIN = '{"ms":40}'


def peer(pool, secret, *attacks, timeout=120):
    r = subprocess.run([PEER, "client", pool.clients_ep, pool.key(secret), pool.key("broker.public")]
                       + list(attacks), capture_output=True, text=True, timeout=timeout)
    return r.returncode, r.stdout, r.stderr


def refusals(out):
    return re.findall(r"^got REFUSED code=(\d+) text=(.*)$", out, re.M)


def listened(out):
    m = re.search(r"listened results=(\d+) refused=(\d+) accepted=(\d+)", out)
    return tuple(int(x) for x in m.groups()) if m else (-1, -1, -1)


def wait_log(pool, text, timeout=15):
    deadline = time.time() + timeout
    path = os.path.join(pool.tmp, "broker.log")
    while time.time() < deadline:
        if text in open(path, errors="replace").read():
            return True
        time.sleep(0.1)
    return False


def acked(pool, run_id):
    db = sqlite3.connect(f"file:{pool.store}/fitfarm.db?mode=ro", uri=True, timeout=5)
    # Acknowledged: every request of the run not in requests_owed (schema 4).
    n = db.execute("SELECT (SELECT count(*) FROM requests WHERE run_id = ?1)"
                   " - (SELECT count(*) FROM requests_owed WHERE run_id = ?1)", (run_id,)).fetchone()[0]
    db.close()
    return n


with fflib.Pool(secure=True) as pool:
    fflib.make_key("intruder", pool.keys)
    fflib.allow("client", pool.key("intruder.public"), pool.keys)
    pool.start_broker()
    pool.start_worker(slots=2, name="w0")
    pool.wait_workers(1)

    # 1. The owner's stream against the intruder's probes.
    gs = [[float(i)] for i in range(400)]
    owner = subprocess.Popen([FITFARM, "eval", "--run", "victim", "--seed", "12345", "--plugin", "spin",
                              "--params", SPIN] + pool.client_args(),
                             stdin=subprocess.PIPE, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    owner.stdin.write(fflib.jsonl(gs))
    owner.stdin.close()
    deadline = time.time() + 30
    while fflib.done_in_store(os.path.join(pool.store, "fitfarm.db")) < 20 and time.time() < deadline:
        time.sleep(0.05)
    rc, out, err = peer(pool, "intruder.secret",
                        f"submit=victim,999,1,0,spin,{SPIN}", "listen=500",
                        f"submit=victim,12345,0,0,spin,{SPIN}", "listen=500",
                        f"submit=victim,12345,0,1,spin,{SPIN}", "listen=500",
                        "ack=victim,0,1000", "status", "listen=3000")
    check.ok(owner.poll() is None, "the intruder's probes ran while the owner's run was streaming")
    refs_got = refusals(out)
    check.ok(rc == 0 and len(refs_got) == 3 and all(c == "9" for c, _ in refs_got),
             f"three refusals with code 9 (not permitted): {rc} {refs_got} {err[-300:]}")
    texts = {t for _, t in refs_got}
    check.ok(len(texts) == 1, f"the wrong-seed probe and the right-seed attach get the same sentence: {texts}")
    text = next(iter(texts), "")
    check.ok("12345" not in text and "seed" not in text and "mode" not in text and not re.search(r"\d", text),
             f"the refusal reveals no seed, mode or count: {text!r}")
    results, _, accepted = listened(out)
    check.ok(results == 0 and accepted == 0, f"the intruder gets no result and nothing accepted: {out[-400:]}")
    st = re.search(r"^got STATUS runs=(.*)$", out, re.M)
    check.ok(st is not None and "victim" not in st.group(1), f"status does not list the owner's run: {st and st.group(0)}")

    stdout = owner.stdout.read()
    stderr = owner.stderr.read()
    owner.wait(timeout=300)
    lines = [l for l in stdout.splitlines() if l.strip()]
    rows = [json.loads(l) for l in lines]
    check.ok(owner.returncode == 0 and len(rows) == 400, f"the owner's stream completes: exit {owner.returncode}, {len(rows)} lines, {stderr[-400:]}")
    bad = [r for r in rows if r.get("status") != "ok" or int(r["seed"]) != refs.seed(12345, gs[r["id"]], 0)
           or r["fitness"][0] != gs[r["id"]][0]]
    check.ok(not bad, f"every result is the owner's own (seed from hashlib, RFC 7693; sum of the genome): {bad[:3]}")
    check.ok(wait_log(pool, "refused batch 77 of run victim from client"), "the broker logs the refused SUBMITs")
    # The same through the CLI with the intruder's key: an error, no results, no seed.
    rc, out, err = fflib.run_eval([pool.client_args()[0], pool.client_args()[1], "--key", pool.key("intruder.secret"),
                                   "--broker-key", pool.key("broker.public"), "--run", "victim", "--seed", "12345",
                                   "--plugin", "spin", "--params", SPIN], fflib.jsonl(gs[:3]), timeout=60)
    check.ok(rc != 0 and not out and "is not available to this client key" in err and "12345" not in err.replace("--seed 12345", ""),
             f"fitfarm eval with another key's run id fails without a result or the seed: {rc} {len(out)} {err[-300:]}")
    check.ok(wait_log(pool, "ignored ACK of 1001 results of run victim"), "the broker logs the ignored ACK")

    # 2. The intruder's ACKs have no effect on requests the owner has not acknowledged.
    rc, out, _ = peer(pool, "client.secret", f"submit=held,7,0,40,spin,{SPIN}", "listen=60000,40")
    check.ok(listened(out)[0] == 40, f"a raw owner gets its 40 results: {out[-300:]}")
    rc, out, _ = peer(pool, "intruder.secret", "ack=held,1,40", "listen=300")
    time.sleep(0.5)
    check.ok(acked(pool, "held") == 0, f"after the intruder's ACK, acknowledged requests of 'held': {acked(pool, 'held')}")
    rc, out, _ = peer(pool, "client.secret", f"submit=held,7,0,0,spin,{SPIN}", "listen=60000,40")
    check.ok(listened(out)[0] == 40, f"the owner's new connection (reconnect) gets all 40 again: {out[-300:]}")
    check.ok(wait_log(pool, "run held taken over by client"), "the reconnect is logged as a takeover")

    # 3. Sharing by the operator, and un-sharing.
    r = subprocess.run([FITFARM, "share", "held", pool.key("intruder.public"), "--keys", pool.keys],
                       capture_output=True, text=True)
    check.ok(r.returncode == 0 and "shared run held" in r.stdout, f"fitfarm share: {r.returncode} {r.stdout} {r.stderr}")
    pool.broker.send_signal(signal.SIGHUP)
    check.ok(wait_log(pool, "runs.share: 1 shares"), "SIGHUP loads the share list")
    rc, out, err = peer(pool, "intruder.secret", f"submit=held,7,0,0,spin,{SPIN}", "status", "listen=60000,40")
    lines = [l for l in open(os.path.join(pool.keys, "runs.share")).read().splitlines() if l.startswith("#")]
    open(os.path.join(pool.keys, "runs.share"), "w").write("\n".join(lines) + "\n")
    pool.broker.send_signal(signal.SIGHUP)
    check.ok(listened(out)[0] == 40 and not refusals(out), f"the shared key attaches and gets the 40 results: {out[-400:]}")
    st = re.search(r"^got STATUS runs=(.*)$", out, re.M)
    check.ok(st is not None and "held," in st.group(1), f"status lists the shared run: {st and st.group(0)}")
    check.ok(wait_log(pool, "run held: cut off client"), "removing the share cuts the connection off")
    rc, out, _ = peer(pool, "intruder.secret", f"submit=held,7,0,0,spin,{SPIN}", "listen=1000")
    check.ok([c for c, _ in refusals(out)] == ["9"] and listened(out)[0] == 0,
             f"after un-sharing the key is refused again: {out[-300:]}")

# 4. A store from before ownership: the column is added and an old run is claimed.
with fflib.Pool(secure=True) as pool:
    fflib.make_key("intruder", pool.keys)
    fflib.allow("client", pool.key("intruder.public"), pool.keys)
    os.makedirs(pool.store, mode=0o700)
    db = sqlite3.connect(os.path.join(pool.store, "fitfarm.db"))
    db.executescript(
        "CREATE TABLE runs(run_id TEXT PRIMARY KEY, seed INTEGER NOT NULL, seed_mode INTEGER NOT NULL,"
        " created REAL NOT NULL, last_activity REAL NOT NULL);"
        "INSERT INTO runs VALUES('old', 5, 0, 0, 0);")
    db.close()
    pool.start_broker()
    pool.start_worker(slots=1, name="w0")
    pool.wait_workers(1)
    db = sqlite3.connect(f"file:{pool.store}/fitfarm.db?mode=ro", uri=True)
    cols = [r[1] for r in db.execute("PRAGMA table_info(runs)")]
    db.close()
    check.ok("owner" in cols, f"the migration adds runs.owner: {cols}")
    rc, out, _ = peer(pool, "client.secret", f"submit=old,5,0,1,spin,{SPIN}", "listen=60000,1")
    check.ok(listened(out)[0] == 1, f"the first key to use an old run gets its result: {out[-300:]}")
    check.ok(wait_log(pool, "run old had no owner recorded"), "the claim is logged")
    rc, out, _ = peer(pool, "intruder.secret", f"submit=old,5,0,0,spin,{SPIN}", "listen=1000")
    check.ok([c for c, _ in refusals(out)] == ["9"], f"another key is refused after the claim: {out[-300:]}")
    check.done(pool)
