"""Single flight: the same genome 100 times in one batch is evaluated once,
and every request gets the one result."""
import re

import fflib

check = fflib.Check("test_single_flight")
with fflib.Pool() as pool:
    pool.start_broker()
    pool.start_worker(slots=2)
    pool.wait_workers(1)
    g = [0.125, 0.5, 0.75]
    # spin is stochastic: the seed is part of the key, but in genome seed mode
    # equal genomes with equal replicate index get equal seeds, hence one key.
    rc, out, err = fflib.run_eval(["--broker", pool.clients_ep, "--plugin", "spin",
                                   "--params", '{"ms": 50}', "--run", "sf-1", "--seed", "3"],
                                  fflib.jsonl([g] * 100))
    check.ok(rc == 0 and len(out) == 100, f"exit {rc}, {len(out)} lines: {err[-1000:]}")
    check.ok(len({tuple(r["fitness"]) for r in out}) == 1, "every request got the same result")
    check.ok(len({r["key"] for r in out}) == 1 and len({r["seed"] for r in out}) == 1, "one key, one seed")
    st = pool.status()
    runs = {r["run"]: r for r in st.get("runs", [])} if st else {}
    evaluated = runs.get("sf-1", {}).get("evaluated")
    check.ok(evaluated == 1, f"the broker evaluated the genome once: status says {runs.get('sf-1')}")
check.done(pool)
