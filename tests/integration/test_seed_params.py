"""Seed params: granular lists scatter_radius and jitter
(fitfarm_plugin_seed_params); with both given as 0 its results do not depend
on the seed, so the broker keys its requests without the seed. Checked on a
TCP pool with a store:
  - scatter 0, --replicates 3: the three lines of a genome share one key (the
    documented key recomputed without the seed), one result, and the run
    evaluated each genome once;
  - the same input with another --seed is answered wholly from the cache;
  - default scatter: three keys per genome (recomputed with each derived
    seed), each evaluated; scatter 0 with jitter absent is still seeded;
  - after a broker restart with no worker connected, the list comes back
    from the store: a zero-scatter run with a new seed is answered from the
    cache, with nobody to evaluate it."""
import hashlib
import json
import signal
import struct
import subprocess

import fflib
import refs

check = fflib.Check("test_seed_params")

SMALL = {"rows": 2, "columns": 3, "settle_time": 0.02, "transient_time": 0.02,
         "measure_time": 0.02, "frequencies": [60]}
ZERO = dict(SMALL, scatter_radius=0, jitter=0)
GENOMES = [[0.2, 0.8, 0.3, 0.9, 0.1, 0.7], [0.9, 0.9, 0.9, 0.1, 0.1, 0.1]]
TEXT = fflib.jsonl(GENOMES)


def canon(params):
    """Canonical params as documented in proto/params.h (sorted keys, no
    spaces); Python's json module prints these reals (0.02) the same way."""
    return json.dumps(params, sort_keys=True, separators=(",", ":"))


def key_ref(version, params, genome, seed=None):
    """proto/key.h: BLAKE2b-256 of "fitfarm-key-v1", then plugin, version,
    canonical params and genome each as u32 LE length || bytes, then the seed
    (u64 LE) only when the request is seeded."""
    h = hashlib.blake2b(digest_size=32)
    h.update(b"fitfarm-key-v1")
    g = b"".join(struct.pack("<d", x) for x in genome)
    for field in (b"granular", version.encode(), canon(params).encode(), g):
        h.update(struct.pack("<I", len(field)) + field)
    if seed is not None:
        h.update(struct.pack("<Q", seed))
    return h.hexdigest()


def evaluate(pool, run, seed, params, replicates=3, text=TEXT, timeout=300):
    return fflib.run_eval(pool.client_args() + ["--plugin", "granular", "--params", canon(params),
                                                "--run", run, "--seed", str(seed),
                                                "--replicates", str(replicates)],
                          text, timeout=timeout)


def run_counters(pool, run):
    st = pool.status() or {}
    return {r["run"]: r for r in st.get("runs", [])}.get(run, {})


def by_genome(lines):
    out = {}
    for r in lines:
        out.setdefault(r["id"], []).append(r)
    return out


with fflib.Pool() as pool:
    pool.start_broker()
    pool.start_worker(slots=2)
    st = pool.wait_workers(1)
    carried = [p for w in st["workers"] for p in w["plugins"] if p.startswith("granular@")]
    check.ok(len(carried) == 1, f"the worker carries granular: {st['workers']}")
    version = carried[0].split("@", 1)[1] if carried else "?"

    # 1. scatter 0: one key per genome, evaluated once.
    rc, out, err = evaluate(pool, "zero-a", 1, ZERO)
    check.ok(rc == 0 and len(out) == 6, f"zero-a: exit {rc}, {len(out)} lines: {err[-1500:]}")
    check.ok(all(r.get("status") == "ok" for r in out), f"zero-a all ok: {out}")
    groups = by_genome(out)
    keys_a = {}
    for gid, rs in groups.items():
        keys = {r["key"] for r in rs}
        check.ok(len(rs) == 3 and len(keys) == 1, f"genome {gid}: 3 lines, one key: {keys}")
        want = key_ref(version, ZERO, GENOMES[gid])
        check.ok(keys == {want}, f"genome {gid}: key {keys} is the unseeded key {want}")
        check.ok(len({tuple(r["fitness"]) for r in rs}) == 1, f"genome {gid}: one result")
        check.ok(all("seed" in r for r in rs), f"genome {gid}: lines still report a seed")
        keys_a[gid] = keys.pop() if keys else None
    runs = run_counters(pool, "zero-a")
    check.ok(runs.get("evaluated") == 2, f"zero-a evaluated 1 per genome: {runs}")

    # 2. another run seed: all cached, same keys.
    rc, out, err = evaluate(pool, "zero-b", 2, ZERO)
    check.ok(rc == 0 and len(out) == 6, f"zero-b: exit {rc}, {len(out)} lines: {err[-1500:]}")
    check.ok(all(r.get("cached") is True for r in out), f"zero-b wholly cached: {out}")
    check.ok(all(r["key"] == keys_a.get(r["id"]) for r in out), "zero-b has zero-a's keys")
    runs = run_counters(pool, "zero-b")
    check.ok(runs.get("evaluated") == 0 and runs.get("cached") == 6, f"zero-b counters: {runs}")

    # 3. default scatter: three keys per genome, each its own seeded key.
    rc, out, err = evaluate(pool, "scatter", 1, SMALL)
    check.ok(rc == 0 and len(out) == 6, f"scatter: exit {rc}, {len(out)} lines: {err[-1500:]}")
    for gid, rs in by_genome(out).items():
        check.ok(len({r["key"] for r in rs}) == 3, f"scatter genome {gid}: three keys")
        for r in rs:
            seed = refs.seed(1, GENOMES[gid], r["replicate"])
            check.ok(int(r["seed"]) == seed, f"scatter seed {r['seed']} is the derived {seed}")
            check.ok(r["key"] == key_ref(version, SMALL, GENOMES[gid], seed),
                     f"scatter genome {gid} replicate {r['replicate']}: the seeded key")
    runs = run_counters(pool, "scatter")
    check.ok(runs.get("evaluated") == 6, f"scatter evaluated every replicate: {runs}")

    # 4. absent is not zero: jitter left at its default keeps the seed.
    half = dict(SMALL, scatter_radius=0)
    rc, out, err = evaluate(pool, "half", 1, half, replicates=2, text=fflib.jsonl(GENOMES[:1]))
    check.ok(rc == 0 and len(out) == 2 and len({r["key"] for r in out}) == 2,
             f"scatter 0, jitter absent: two keys: {out} {err[-800:]}")

    # 5. restart without workers: the list is reloaded from the store.
    for w in pool.workers:
        pool.kill(w)
        w.wait(timeout=10)
    pool.kill(pool.broker, signal.SIGTERM)
    pool.broker.wait(timeout=20)
    pool.start_broker()
    try:
        rc, out, err = evaluate(pool, "zero-c", 3, ZERO, timeout=60)
        check.ok(rc == 0 and len(out) == 6 and all(r.get("cached") is True for r in out),
                 f"zero-c after restart, no worker: cached: exit {rc} {out} {err[-800:]}")
        check.ok(all(r["key"] == keys_a.get(r["id"]) for r in out), "zero-c has zero-a's keys")
    except subprocess.TimeoutExpired:
        check.ok(False, "zero-c after restart waited for a worker: seed params not reloaded")
check.done(pool)
