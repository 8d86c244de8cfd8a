"""Every output line reports its own request's evaluation seed, derived as
proto/key.h documents, also when a deterministic plugin answers several
requests with one shared (or cached) evaluation."""
import os
import tempfile

import fflib
import refs

check = fflib.Check("test_request_seeds")


store = os.path.join(tempfile.mkdtemp(prefix="fitfarm-it-"), "store")
gs = fflib.genomes(20, 30, seed=77)
for run, seed, mode, cached in (("rs-1", 7, "genome", False), ("rs-2", 8, "genome", True),
                                ("rs-3", 9, "common", True)):
    rc, out, err = fflib.run_eval(["--plugin", "zdt1", "--slots", "2", "--store", store, "--run", run,
                                   "--seed", str(seed), "--replicates", "3", "--seed-mode", mode],
                                  fflib.jsonl(gs))
    check.ok(rc == 0 and len(out) == 60, f"{run}: exit {rc}, {len(out)} lines: {err[-500:]}")
    bad = [r for r in out if int(r["seed"]) != refs.seed(seed, gs[r["line"] - 1], r["replicate"], mode)]
    check.ok(not bad, f"{run}: {len(bad)} lines report another seed than their own, e.g. {bad[:1]}")
    check.ok(all(r["cached"] == cached for r in out[3:]), f"{run}: cached is {cached} (zdt1 is deterministic)")
    check.ok(len({r["key"] for r in out}) == len(gs), f"{run}: one key per genome across replicates")
check.done()
