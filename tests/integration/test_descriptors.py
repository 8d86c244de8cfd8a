"""A broker out of descriptors backs off instead of spinning, keeps serving
its connected workers, and still answers `fitfarm status`.

The broker runs under a hard RLIMIT_NOFILE of 64 (set in preexec_fn, so it
cannot raise it), with three real workers connected. Then this script holds
120 raw TCP connections to the workers endpoint (libzmq accepts what it can
and keeps each waiting for a ZMTP greeting) and, for the measurement, opens
about 50 more per second (peers that keep retrying, as 400 workers would).
Checks: the broker logs its limit at start; while exhausted its CPU use
(utime + stime from /proc/PID/stat, all its threads; proc(5)) stays under
20 % of one core over 4 s; `fitfarm status` answers and lists the three
workers; an evaluation on them completes; the out-of-descriptors warning is
one line per 10 s at most and names the limit and how to raise it."""
import os
import re
import resource
import socket
import subprocess
import threading
import time

import fflib

check = fflib.Check("test_descriptors")
HARD = 64
TICK = os.sysconf("SC_CLK_TCK")


def cpu_seconds(pid):
    with open(f"/proc/{pid}/stat") as f:
        fields = f.read().rsplit(")", 1)[1].split()
    # fields[0] is field 3 (state); utime and stime are fields 14 and 15.
    return (int(fields[11]) + int(fields[12])) / TICK


def limit():
    resource.setrlimit(resource.RLIMIT_NOFILE, (HARD, HARD))


with fflib.Pool(broker_args=["--lost-after", "5000"]) as pool:
    epfile = os.path.join(pool.tmp, "endpoints")
    log_path = os.path.join(pool.tmp, "broker.log")
    broker = subprocess.Popen([fflib.exe("fitfarm-broker"), "--clients", "tcp://127.0.0.1:*",
                               "--workers", "tcp://127.0.0.1:*", "--endpoints-file", epfile,
                               "--store", pool.store, "--insecure", "--lost-after", "5000"],
                              stdout=subprocess.DEVNULL, stderr=open(log_path, "ab"),
                              preexec_fn=limit)
    pool.procs.append(broker)
    pool.broker = broker
    deadline = time.time() + 20
    while not os.path.exists(epfile) and time.time() < deadline:
        time.sleep(0.02)
    eps = dict(l.split(" ", 1) for l in open(epfile).read().split("\n") if l)
    pool.clients_ep, pool.workers_ep = eps["clients"].strip(), eps["workers"].strip()
    text = open(log_path).read()
    check.ok(f"descriptor limit {HARD} (already the hard limit" in text,
             f"the broker logs its descriptor limit: {text[-800:]}")
    for i in range(3):
        pool.start_worker(slots=1, name=f"w{i}")
    pool.wait_workers(3)

    host, port = pool.workers_ep[len("tcp://"):].rsplit(":", 1)
    held = []
    for _ in range(120):
        s = socket.socket()
        s.setblocking(False)
        s.connect_ex((host, int(port)))
        held.append(s)
    stop = threading.Event()

    def pester():
        """New connection attempts, each dropped after half a second."""
        recent = []
        while not stop.is_set():
            s = socket.socket()
            s.setblocking(False)
            s.connect_ex((host, int(port)))
            recent.append((time.time(), s))
            while recent and time.time() - recent[0][0] > 0.5:
                recent.pop(0)[1].close()
            time.sleep(0.02)
        for _, s in recent:
            s.close()

    t = threading.Thread(target=pester)
    t.start()
    try:
        time.sleep(1.0)
        c0, t0 = cpu_seconds(broker.pid), time.time()
        time.sleep(4.0)
        c1, t1 = cpu_seconds(broker.pid), time.time()
        share = (c1 - c0) / (t1 - t0)
        check.ok(share < 0.20, f"the broker used {share:.1%} of a core while out of descriptors (< 20 %)")
        print(f"broker CPU while out of descriptors: {share:.1%} of one core")

        st = pool.status()
        check.ok(st is not None and len(st.get("workers", [])) == 3,
                 f"status answers while out of descriptors and lists 3 workers: {st and len(st.get('workers', []))}")
        gs = fflib.genomes(20, 3, seed=5)
        rc, out, err = fflib.run_eval(["--broker", pool.clients_ep, "--plugin", "sphere", "--run", "fd"],
                                      fflib.jsonl(gs), timeout=120)
        want = [sum(x * x for x in g) for g in gs]  # sphere: the sum of squares
        got = [r["fitness"][0] for r in out]
        check.ok(rc == 0 and len(got) == 20 and all(abs(a - b) <= 1e-12 * (1 + b) for a, b in zip(got, want)),
                 f"an evaluation on the connected workers completes: exit {rc}, {len(out)} lines, {err[-400:]}")
    finally:
        stop.set()
        t.join()
    text = open(log_path, errors="replace").read()
    lines = re.findall(r"out of descriptors: .*", text)
    check.ok(1 <= len(lines) <= 2, f"one or two warning lines in about 8 s (one per 10 s), not {len(lines)}")
    check.ok(lines and f"The limit is {HARD} descriptors" in lines[0] and "LimitNOFILE=" in lines[0],
             f"the warning names the limit and how to raise it: {lines[:1]}")
    for s in held:
        s.close()
check.done(pool)
