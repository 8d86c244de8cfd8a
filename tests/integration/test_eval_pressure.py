"""`fitfarm eval` under pressure, with real processes:

- more distinct lines than the broker's queue cap (--max-queued-per-run
  5000, 20,000 lines): the CLI waits for the queue to drain and goes on,
  every line answered once and ok, instead of aborting with "queue full";
- 1,000,000 invalid lines: every one answered with its own "invalid" line,
  in order, with a peak RSS that does not grow with the input (compared with
  100,000 lines: the same within 8 MiB);
- --in /dev/urandom: output flows (invalid lines as they are read) and the
  RSS stays flat while the CLI reads random bytes for seconds.
Run with /usr/bin/python3 (Debian's)."""
import json
import os
import resource
import signal
import subprocess
import sys
import time

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import fflib  # noqa: E402

check = fflib.Check("test_eval_pressure")
# Under the sanitizer build ASan keeps freed memory in quarantine (256 MiB by
# default), which would read as growth: measure with no quarantine. The
# variable means nothing to an uninstrumented program.
MEASURE_ENV = dict(os.environ, ASAN_OPTIONS=":".join(
    x for x in (os.environ.get("ASAN_OPTIONS", ""), "quarantine_size_mb=0") if x))


def rss_kb(pid):
    with open(f"/proc/{pid}/status") as f:
        for line in f:
            if line.startswith("VmRSS:"):
                return int(line.split()[1])
    return 0


def hwm_kb(pid):
    """Peak RSS of the process so far (VmHWM, proc(5)); 0 once it is gone."""
    try:
        with open(f"/proc/{pid}/status") as f:
            for line in f:
                if line.startswith("VmHWM:"):
                    return int(line.split()[1])
    except OSError:
        pass
    return 0


def peak_rss_of(args, tmp, name):
    """Runs `fitfarm ARGS`, sampling its VmHWM every 20 ms (the child's own:
    wait4's ru_maxrss would report the Python parent's, inherited across
    exec). Returns (exit, samples in KiB, seconds)."""
    t0 = time.time()
    p = subprocess.Popen([fflib.exe("fitfarm")] + args, stdout=subprocess.DEVNULL,
                         stderr=open(os.path.join(tmp, name + ".err"), "wb"), env=MEASURE_ENV)
    samples = []
    while p.poll() is None:
        v = hwm_kb(p.pid)
        if v:
            samples.append(v)
        time.sleep(0.02)
    return p.returncode, samples, time.time() - t0


with fflib.Pool(broker_args=["--max-queued-per-run", "5000"]) as pool:
    pool.start_broker()
    pool.start_worker(slots=2, name="w0")
    pool.wait_workers(1)
    tmp = pool.tmp
    common = ["--broker", pool.clients_ep, "--insecure", "--plugin", "spin", "--params", '{"ms": 0}']

    # 1. Past the queue cap: wait, never abort.
    gs = fflib.genomes(20000, 4, seed=12)
    inp = os.path.join(tmp, "many.jsonl")
    out = os.path.join(tmp, "many.out")
    open(inp, "w").write(fflib.jsonl(gs))
    r = subprocess.run([fflib.exe("fitfarm"), "eval"] + common + ["--run", "many", "--in", inp,
                                                                  "--out", out],
                       capture_output=True, text=True, timeout=600)
    lines = [json.loads(l) for l in open(out).read().splitlines() if l.strip()]
    check.ok(r.returncode == 0, f"20,000 lines through a queue cap of 5,000: exit {r.returncode} "
             f"{r.stderr[-400:]}")
    check.ok("waiting for the broker's queue to drain" in r.stderr,
             f"the CLI said it waited for the queue: {r.stderr[-300:]}")
    check.ok(r.stderr.count("waiting for the broker's queue") <= 10,
             "the wait is reported rate-limited")
    check.ok([l["line"] for l in lines] == list(range(1, 20001)), "every line once, in order")
    check.ok(all(l["status"] == "ok" for l in lines), "all ok")
    # spin's first objective is the left-to-right IEEE 754 sum of the genome.
    check.ok(all(l["fitness"][0] == sum(g, 0.0) for l, g in zip(lines, gs)), "fitness 0 is the sum")

    # 2. Invalid lines: the peak RSS does not follow the input's length.
    big = os.path.join(tmp, "bad-big.jsonl")
    with open(big, "w") as f:
        f.writelines(f"x{i}\n" for i in range(1000000))
    big_out = os.path.join(tmp, "bad-big.out")
    rc_b, samples, t_b = peak_rss_of(["eval"] + common + ["--run", "bad-b", "--in", big,
                                                          "--out", big_out], tmp, "bad-b")
    n_out = sum(1 for _ in open(big_out))
    last = json.loads(open(big_out).read().splitlines()[-1])
    check.ok(rc_b == 1, f"invalid input exits 1: {rc_b}")
    check.ok(n_out == 1000000 and last["line"] == 1000000 and last["status"] == "invalid",
             f"1,000,000 invalid lines, 1,000,000 answers: {n_out}, last {last}")
    check.ok(len(samples) >= 10, f"sampled its memory {len(samples)} times")
    if len(samples) >= 10:
        quarter, peak = samples[len(samples) // 4], samples[-1]
        # The code before the read-ahead window kept every line: 140 MiB here.
        check.ok(peak < 32 * 1024 and peak - quarter < 4 * 1024,
                 f"peak RSS {peak} KiB, {quarter} KiB a quarter of the way: bounded")
        print(f"1,000,000 invalid lines: peak RSS {peak} KiB ({quarter} KiB at a quarter), "
              f"{t_b:.1f} s")

    # 3. Random bytes: output flows, memory stays flat.
    rnd_out = os.path.join(tmp, "random.out")
    p = subprocess.Popen([fflib.exe("fitfarm"), "eval"] + common + ["--run", "rnd", "--in",
                                                                    "/dev/urandom", "--out", rnd_out],
                         stderr=open(os.path.join(tmp, "rnd.err"), "wb"), env=MEASURE_ENV)
    # Warm-up: the pool connected and output began (on a loaded machine
    # that took over 1.5 s, and the first sample caught the CLI still
    # starting: 8,952 then 17,612 KiB), then a second more.
    deadline = time.time() + 20
    while time.time() < deadline and (not os.path.exists(rnd_out) or os.path.getsize(rnd_out) == 0):
        time.sleep(0.1)
    time.sleep(1.5)
    rss1, size1 = rss_kb(p.pid), os.path.getsize(rnd_out)
    time.sleep(3)
    rss2, size2 = rss_kb(p.pid), os.path.getsize(rnd_out)
    alive = p.poll() is None
    p.send_signal(signal.SIGINT)
    p.wait(timeout=30)
    check.ok(alive, "the CLI kept reading /dev/urandom")
    check.ok(size1 > 0 and size2 > size1, f"output flows: {size1} then {size2} bytes")
    check.ok(rss2 - rss1 < 4 * 1024, f"RSS flat on random bytes: {rss1} then {rss2} KiB")
    with open(rnd_out, errors="replace") as f:
        first = json.loads(f.readline())
    check.ok(first["status"] == "invalid" and first["line"] == 1, f"first answer: {first}")
    print(f"/dev/urandom: RSS {rss1} -> {rss2} KiB, output {size1} -> {size2} bytes in 3 s")
check.done(pool)
