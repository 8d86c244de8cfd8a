"""Every output line reports its own request's evaluation seed, derived as
proto/key.h documents, also when a deterministic plugin answers several
requests with one shared (or cached) evaluation."""
import hashlib
import os
import struct
import tempfile

import fflib

check = fflib.Check("test_request_seeds")


def seed_ref(run_seed, genome, rep, common=False):
    """proto/key.h: keyed BLAKE2b-256 (RFC 7693; Python's hashlib), key =
    run_seed u64 LE || "ffseedv1"; message 0x00 || BLAKE2b-256(genome bytes)
    || rep u32 LE (genome mode) or 0x01 || rep u32 LE (common mode); the seed
    is the first 8 bytes, little-endian."""
    key = struct.pack("<Q", run_seed) + b"ffseedv1"
    if common:
        msg = b"\x01" + struct.pack("<I", rep)
    else:
        gbytes = struct.pack(f"<{len(genome)}d", *genome)
        msg = b"\x00" + hashlib.blake2b(gbytes, digest_size=32).digest() + struct.pack("<I", rep)
    return struct.unpack("<Q", hashlib.blake2b(msg, key=key, digest_size=32).digest()[:8])[0]


store = os.path.join(tempfile.mkdtemp(prefix="fitfarm-it-"), "store")
gs = fflib.genomes(20, 30, seed=77)
for run, seed, mode, cached in (("rs-1", 7, "genome", False), ("rs-2", 8, "genome", True),
                                ("rs-3", 9, "common", True)):
    rc, out, err = fflib.run_eval(["--plugin", "zdt1", "--slots", "2", "--store", store, "--run", run,
                                   "--seed", str(seed), "--replicates", "3", "--seed-mode", mode],
                                  fflib.jsonl(gs))
    check.ok(rc == 0 and len(out) == 60, f"{run}: exit {rc}, {len(out)} lines: {err[-500:]}")
    bad = [r for r in out if int(r["seed"]) != seed_ref(seed, gs[r["line"] - 1], r["replicate"], mode == "common")]
    check.ok(not bad, f"{run}: {len(bad)} lines report another seed than their own, e.g. {bad[:1]}")
    check.ok(all(r["cached"] == cached for r in out[3:]), f"{run}: cached is {cached} (zdt1 is deterministic)")
    check.ok(len({r["key"] for r in out}) == len(gs), f"{run}: one key per genome across replicates")
check.done()
