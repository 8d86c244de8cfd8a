"""fitfarm-nsga2 on the embedded pool against the literature.

Bars (ours, from the analytic fronts of Zitzler, Deb, Thiele, "Comparison of
Multiobjective Evolutionary Algorithms: Empirical Results", Evolutionary
Computation 8(2), 2000; the settings are those of Deb, Pratap, Agarwal,
Meyarivan, IEEE TEC 6(2), 2002: population 100, 250 generations, SBX p_c 0.9
eta_c 20, polynomial mutation p_m 1/n eta_m 20): with reference (1, 1) the
final front's hypervolume is at least 0.65 on ZDT1 (maximum 2/3) and 0.32 on
ZDT2 (maximum 1/3), computed here by our own sweep in Python from the front
file, and never above the maximum. The front's fitness values are checked
against the ZDT formulas for their genomes (refs.zdt).

Reproducibility: `--replay` on the same store gives the same files byte for
byte and adds no evaluation to the store (its results table, read with
sqlite3); the same seed and run id on a fresh store give the same front; a
different seed gives another."""
import filecmp
import json
import os
import sqlite3
import subprocess
import tempfile
import time

import fflib
import refs

check = fflib.Check("test_nsga2_zdt")
tmp = tempfile.mkdtemp(prefix="ff-nsga2-")
NSGA2 = os.path.join(fflib.BUILD, "client", "nsga2", "fitfarm-nsga2")


def nsga2(args, timeout=300):
    t0 = time.monotonic()
    r = subprocess.run([NSGA2] + args, capture_output=True, text=True, timeout=timeout)
    return r, time.monotonic() - t0


def hv2(points, ref):
    """Two-objective hypervolume by the textbook sweep (minimisation)."""
    pts = sorted(p for p in points if p[0] < ref[0] and p[1] < ref[1])
    area, best = 0.0, ref[1]
    for x, y in pts:
        if y < best:
            area += (ref[0] - x) * (best - y)
            best = y
    return area


def generations(out):
    lines = open(os.path.join(out, "generations.csv")).read().splitlines()
    head = lines[0].split(",")
    return [dict(zip(head, map(float, l.split(",")))) for l in lines[1:]]


def results_in_store(store):
    db = sqlite3.connect(f"file:{store}/fitfarm.db?mode=ro", uri=True)
    n = db.execute("SELECT count(*) FROM simulations").fetchone()[0]
    db.close()
    return n


def front(out):
    return [json.loads(l) for l in open(os.path.join(out, "front.jsonl"))]


for variant, bar, best in ((1, 0.65, 2.0 / 3.0), (2, 0.32, 1.0 / 3.0)):
    store = os.path.join(tmp, f"store{variant}")
    out = os.path.join(tmp, f"zdt{variant}")
    args = ["--plugin", f"zdt{variant}", "--params", '{"n": 30}', "--genes", "30",
            "--population", "100", "--generations", "250", "--seed", "2002",
            "--ref", "1,1", "--slots", "2", "--store", store]
    r, secs = nsga2(args + ["--out", out])
    check.ok(r.returncode == 0, f"zdt{variant}: exit {r.returncode}: {r.stderr[-2000:]}")
    print(f"zdt{variant}: 250 generations of 100 in {secs:.1f} s")
    check.ok(secs < 60, f"zdt{variant}: the search took {secs:.1f} s (CI budget: under a minute)")
    if r.returncode != 0:
        continue
    f = front(out)
    got = hv2([p["fitness"] for p in f], (1.0, 1.0))
    print(f"zdt{variant}: hypervolume {got:.6f} (bar {bar}, maximum {best:.6f}), {len(f)} points")
    check.ok(bar <= got <= best, f"zdt{variant}: hypervolume {got} not in [{bar}, {best}]")
    bad = [p for p in f if not refs.close(p["fitness"], refs.zdt(variant, p["genome"]))]
    check.ok(not bad and len(f) > 0, f"zdt{variant}: {len(bad)} front points differ from the ZDT formula")
    gens = generations(out)
    check.ok(len(gens) == 251, f"zdt{variant}: {len(gens)} generation rows, not 251")
    check.ok(gens[0]["evaluations"] == 100 and gens[0]["cached"] == 0, f"generation 0: {gens[0]}")
    # The 100 parents of every later generation were evaluated before.
    check.ok(all(g["cached"] >= 100 and g["evaluations"] + g["cached"] == 200 for g in gens[1:]),
             f"zdt{variant}: a generation paid for a parent again")
    last = float(r.stdout.splitlines()[-3].rsplit(" ", 1)[1])
    check.ok(abs(last - got) < 1e-6, f"zdt{variant}: printed hypervolume {last}, sweep {got}")

    if variant == 1:
        # Replay from the same store: same bytes, nothing simulated.
        before = results_in_store(store)
        again = os.path.join(tmp, "zdt1-replay")
        r, secs = nsga2(args + ["--out", again, "--replay"])
        check.ok(r.returncode == 0, f"replay: exit {r.returncode}: {r.stderr[-2000:]}")
        check.ok(results_in_store(store) == before, "replay added evaluations to the store")
        for name in ("front.jsonl", "front.csv", "population.jsonl"):
            check.ok(filecmp.cmp(os.path.join(out, name), os.path.join(again, name), shallow=False),
                     f"replay: {name} differs")
        rg = generations(again)
        check.ok(all(g["evaluations"] == 0 for g in rg), "replay: a generation reports evaluations")
        print(f"zdt1 replay: {secs:.1f} s, {results_in_store(store) - before} new results")

# Same seed and run id on a fresh store: the same front, bit for bit; another
# seed: another front. Short searches keep CI time down.
short = ["--plugin", "zdt1", "--genes", "30", "--population", "40", "--generations", "30",
         "--slots", "2", "--run", "det"]
outs = []
for i, seed in enumerate(("5", "5", "6")):
    o = os.path.join(tmp, f"det{i}")
    r, _ = nsga2(short + ["--seed", seed, "--out", o, "--store", os.path.join(tmp, f"det-store{i}")])
    check.ok(r.returncode == 0, f"short search {i}: {r.stderr[-1000:]}")
    outs.append(open(os.path.join(o, "front.jsonl"), "rb").read() if r.returncode == 0 else b"")
check.ok(outs[0] == outs[1] and outs[0], "same seed and run id on a fresh store: fronts differ")
check.ok(outs[0] != outs[2], "different seeds gave the same front")

# Usage errors name the option.
r, _ = nsga2(["--plugin", "zdt1", "--genes", "30", "--population", "7"])
check.ok(r.returncode == 2 and "--population" in r.stderr, f"odd population: {r.returncode} {r.stderr}")
r, _ = nsga2(["--plugin", "zdt1", "--bounds", "0:1"])
check.ok(r.returncode == 2 and "--genes" in r.stderr, f"no genes: {r.returncode} {r.stderr}")
r, _ = nsga2(["--plugin", "zdt1", "--genes", "30", "--replay"])
check.ok(r.returncode == 2 and "--store" in r.stderr, f"replay without store: {r.stderr}")
r, _ = nsga2(["--plugin", "zdt1", "--genes", "30", "--ref", "1,1,1", "--generations", "1",
              "--population", "4", "--slots", "1", "--out", os.path.join(tmp, "badref")])
check.ok(r.returncode == 1 and "--ref has 3 values" in r.stderr, f"ref size: {r.returncode} {r.stderr}")
r, _ = nsga2(["--plugin", "zdt1", "--genes", "10", "--params", '{"n": 30}', "--generations", "1",
              "--population", "4", "--slots", "1", "--out", os.path.join(tmp, "badgenes")])
check.ok(r.returncode == 1 and "invalid:" in r.stderr and "no genome" in r.stderr,
         f"wrong genome length: {r.returncode} {r.stderr}")
check.done()
