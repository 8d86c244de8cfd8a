"""`fitfarm sim` with the granular plugin: one in-process evaluation prints a
JSON line; --trace writes JSON Lines whose result line carries the same
fitness bits; a pool evaluation (`fitfarm eval`, embedded pool, real worker
processes) and `fitfarm sim` with the seed the pool reports agree bit for bit;
errors are clear and exit statuses follow the CLI's convention (1 failed,
2 usage)."""
import json
import math
import os
import subprocess
import tempfile

import fflib

check = fflib.Check("test_granular_sim")
FITFARM = fflib.exe("fitfarm")
PARAMS = {"rows": 3, "columns": 6, "settle_time": 0.05, "transient_time": 0.03,
          "measure_time": 0.03, "frequencies": [40, 120], "amplitude": 4e-6}
GENOME = [0.2, 0.8] * 9


def sim(*args):
    r = subprocess.run([FITFARM, "sim", *args], capture_output=True, text=True, timeout=300)
    return r.returncode, r.stdout, r.stderr


tmp = tempfile.mkdtemp(prefix="fitfarm-granular-")
trace = os.path.join(tmp, "trace.jsonl")
rc, out, err = sim("granular", "--genome", json.dumps(GENOME), "--params", json.dumps(PARAMS),
                   "--seed", "11", "--trace", trace)
check.ok(rc == 0, f"sim exit status 0, got {rc}: {err}")
line = json.loads(out) if rc == 0 else {}
fit = line.get("fitness", [])
check.ok(line.get("plugin") == "granular" and line.get("seed") == "11", f"sim line: {out}")
check.ok(len(fit) == 2 and all(math.isfinite(v) for v in fit), f"two finite objectives: {fit}")

records = []
if os.path.exists(trace):
    with open(trace) as f:
        records = [json.loads(l) for l in f]
types = [r.get("type") for r in records]
check.ok(types[:1] == ["header"] and types[-1:] == ["result"], f"header first, result last: {types[:1]} {types[-1:]}")
# 64-bit seeds are JSON strings everywhere: a double (what most JSON readers
# make of a number) holds only 53 bits exactly (IEEE 754, common practice).
check.ok(records and records[0].get("seed") == "11", f"trace header seed is the string \"11\": {records[:1]}")
check.ok(types.count("sample") > 100 and types.count("grains") > 3, "samples and grain snapshots")
result = records[-1] if records else {}
# 17 significant digits round-trip: the trace's fitness is the printed one, bit for bit.
check.ok(result.get("fitness") == fit, f"trace result {result.get('fitness')} == sim {fit}")
grains = [r for r in records if r.get("type") == "grains"]
check.ok(all(len(g["x"]) == 18 and len(g["stiff"]) == 18 for g in grains), "18 grains per snapshot")
check.ok(grains and grains[0]["stiff"] == [0.0, 1.0] * 9, "stiff flags follow the genome (gene >= 0.5)")
# The floor follows y_f = A sin(2 pi f t) once ramped in: sampled 40 times a
# period, its peak is within cos(pi/40) of A (the prescribed amplitude).
for hz in PARAMS["frequencies"]:
    shake = [r for r in records if r.get("type") == "sample" and r.get("frequency") == hz]
    late = shake[len(shake) // 2:]
    peak = max(abs(r["floor_y"]) for r in late) if late else 0.0
    check.ok(math.cos(math.pi / 40) * PARAMS["amplitude"] * 0.999 <= peak <= PARAMS["amplitude"] * 1.000001,
             f"{hz} Hz: floor peak {peak} vs amplitude {PARAMS['amplitude']}")
    check.ok(all(math.isfinite(r["plate_a"]) for r in shake), f"{hz} Hz: plate acceleration finite")

# Same seed twice: the same bits; another seed: another result (scatter > 0).
rc2, out2, _ = sim("granular", "--genome", json.dumps(GENOME), "--params", json.dumps(PARAMS), "--seed", "11")
check.ok(rc2 == 0 and json.loads(out2)["fitness"] == fit, "same seed, same fitness")
rc3, out3, _ = sim("granular", "--genome", json.dumps(GENOME), "--params", json.dumps(PARAMS), "--seed", "12")
check.ok(rc3 == 0 and json.loads(out3)["fitness"] != fit, "another seed, another fitness")

# The pool and sim agree: eval derives a seed, sim with that seed reproduces it.
rc, rows, err = fflib.run_eval(["--plugin", "granular", "--params", json.dumps(PARAMS), "--slots", "1",
                                "--seed", "5"], json.dumps(GENOME) + "\n")
check.ok(rc == 0 and len(rows) == 1 and rows[0].get("status") == "ok", f"pool evaluation: {rc} {rows} {err}")
if rows and rows[0].get("status") == "ok":
    rc4, out4, err4 = sim("granular", "--genome", json.dumps(GENOME), "--params", json.dumps(PARAMS),
                          "--seed", rows[0]["seed"])
    check.ok(rc4 == 0 and json.loads(out4)["fitness"] == rows[0]["fitness"],
             f"sim with the pool's seed gives the pool's bits: {out4} vs {rows[0]['fitness']} {err4}")

# Errors.
rc, out, err = sim("granular", "--genome", "[0.5, 0.5]")
check.ok(rc == 1 and "72" in err, f"wrong genome length names the expected count: {rc} {err}")
rc, out, err = sim("sphere", "--genome", "[1, 2]", "--trace", os.path.join(tmp, "x"))
check.ok(rc == 1 and "trace" in err, f"a plugin without a trace entry point: {rc} {err}")
rc, out, err = sim("granular", "--genome", "[1", "--seed", "1")
check.ok(rc == 2 and "genome" in err, f"bad --genome is a usage error: {rc} {err}")
rc, out, err = sim("granular", "--genome", json.dumps(GENOME), "--params", '{"rows": 3, "colums": 6}')
check.ok(rc == 1 and "colums" in err, f"unknown param named: {rc} {err}")
rc, out, err = sim("nosuch", "--genome", "[1]")
check.ok(rc == 1 and "nosuch" in err, f"unknown plugin: {rc} {err}")
rc, out, err = sim("--genome", "[1]")
check.ok(rc == 2, f"no plugin named is a usage error: {rc} {err}")
check.done()
