"""A broker and two workers over TCP loopback, driven by `fitfarm eval
--broker`: 10,000 ZDT1 genomes and 1,000 DTLZ2 genomes, every fitness compared
with the published formulas computed independently in Python (refs.py; sources
in ../../../shared/CHECKS.md)."""
import fflib
import refs

check = fflib.Check("test_pool_tcp")
with fflib.Pool() as pool:
    pool.start_broker()
    pool.start_worker(slots=1, name="w0")
    pool.start_worker(slots=1, name="w1")
    st = pool.wait_workers(2)
    check.ok(len(st["workers"]) == 2, f"status lists two workers: {st}")

    # ZDT1, n = 30 (Zitzler, Deb, Thiele 2000).
    gs = fflib.genomes(10000, 30, seed=11)
    rc, out, err = fflib.run_eval(["--broker", pool.clients_ep, "--plugin", "zdt1",
                                   "--params", '{"n": 30}', "--seed", "5"], fflib.jsonl(gs))
    check.ok(rc == 0, f"zdt1 eval exit status {rc}: {err[-2000:]}")
    check.ok(len(out) == len(gs), f"zdt1: {len(out)} output lines for {len(gs)} inputs")
    bad = 0
    for i, (g, r) in enumerate(zip(gs, out)):
        if r.get("line") != i + 1 or r.get("id") != i or r.get("status") != "ok" \
                or not refs.close(r["fitness"], refs.zdt(1, g)):
            bad += 1
            if bad < 5:
                check.ok(False, f"zdt1 line {i + 1}: {r} vs {refs.zdt(1, g)}")
    check.ok(bad == 0, f"zdt1: {bad} lines differ from the published formula")
    check.ok(all(len(r.get("key", "")) == 64 for r in out), "every line has a 256-bit key in hex")

    # DTLZ2, M = 3, k = 10, n = 12 (Deb, Thiele, Laumanns, Zitzler 2002).
    gs = fflib.genomes(1000, 12, seed=12)
    rc, out, err = fflib.run_eval(["--broker", pool.clients_ep, "--plugin", "dtlz2",
                                   "--params", '{"m": 3, "k": 10}'], fflib.jsonl(gs, with_id=False))
    check.ok(rc == 0, f"dtlz2 eval exit status {rc}: {err[-2000:]}")
    check.ok(len(out) == len(gs), f"dtlz2: {len(out)} output lines for {len(gs)} inputs")
    bad = sum(1 for g, r in zip(gs, out) if r.get("status") != "ok" or r.get("id") is not None
              or not refs.close(r["fitness"], refs.dtlz2(g, 3)))
    check.ok(bad == 0, f"dtlz2: {bad} lines differ from the published formula")
check.done(pool)
