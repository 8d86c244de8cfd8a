"""`fitfarm front` on real results against brute force in Python.

Inputs are real: `fitfarm eval` output (zdt1, dtlz2 with 3 and 4
objectives, replicates with --aggregate), `fitfarm export --format csv`, and
fitfarm-nsga2's front.csv and population.jsonl. The reference is the
definition: a point is on the front when no other ok point dominates it
(pairwise, minimisation); the hypervolume is computed by cell decomposition
with numpy (tests/unit/ref_hypervolume.py, hv_cells: exact in any
dimension). Exact methods must agree to 1e-12 relative; the 4-objective
Monte Carlo estimate must lie within 4 of its stated standard errors. The
default reference point must follow the documented rule: the front's worst
value plus 10% of its range, per objective.

Pictures (--png, --svg): the PNG is decoded here with zlib by the PNG
specification (W3C/ISO 15948: chunks, IHDR, IDAT, the five row filters) and
must have the documented layout's size and carry the front's, the knee's and
the hypervolume curve's colours; the SVG must be an SVG of the same size."""
import json
import os
import subprocess
import sys
import tempfile

import fflib

sys.path.insert(0, os.path.join(fflib.SOURCE, "tests", "unit"))
from ref_hypervolume import hv_cells  # noqa: E402

check = fflib.Check("test_front")
tmp = tempfile.mkdtemp(prefix="ff-front-")


def front_cmd(args):
    r = subprocess.run([fflib.exe("fitfarm"), "front"] + args, capture_output=True, text=True,
                       timeout=300)
    return r


def front_json(path, *extra):
    r = front_cmd([path, "--json"] + list(extra))
    if not check.ok(r.returncode == 0, f"front {path}: exit {r.returncode}: {r.stderr}"):
        return None
    return json.loads(r.stdout)


def brute_front(points):
    def dom(a, b):
        return all(x <= y for x, y in zip(a, b)) and any(x < y for x, y in zip(a, b))
    uniq = sorted(set(tuple(p) for p in points))
    return sorted(p for p in uniq if not any(dom(q, p) for q in uniq))


def write(name, text):
    path = os.path.join(tmp, name)
    with open(path, "w") as f:
        f.write(text)
    return path


def close(a, b, rel=1e-12):
    return abs(a - b) <= rel * max(1.0, abs(b))


def compare(label, path, points, ref=None, extra=()):
    args = list(extra) + (["--ref", ",".join(repr(x) for x in ref)] if ref else [])
    got = front_json(path, *args)
    if got is None:
        return None
    want = brute_front(points)
    mine = sorted(tuple(p["fitness"]) for p in got["front"])
    check.ok(mine == want, f"{label}: front of {len(mine)} points, brute force {len(want)}")
    m = len(want[0])
    if ref is None:
        ref = [max(p[j] for p in want) + 0.1 * (max(p[j] for p in want) - min(p[j] for p in want))
               for j in range(m)]
        check.ok(all(close(a, b) for a, b in zip(got["reference"], ref)),
                 f"{label}: default reference {got['reference']}, rule gives {ref}")
    hv = hv_cells([list(p) for p in want], ref)
    if m <= 3:
        check.ok(got["method"] == "exact" and close(got["hypervolume"], hv),
                 f"{label}: hypervolume {got['hypervolume']}, numpy {hv}")
    else:
        se = got["std_error"]
        check.ok(got["method"] == "monte_carlo" and se > 0 and abs(got["hypervolume"] - hv) <= 4 * se,
                 f"{label}: estimate {got['hypervolume']} +- {se}, numpy {hv}")
    print(f"{label}: {got['ok']} ok, {len(mine)} on the front, hypervolume {got['hypervolume']:.6g}"
          f" (numpy {hv:.6g})")
    return got


# zdt1 through fitfarm eval, a kept store for export.
store = os.path.join(tmp, "store")
gs = fflib.genomes(400, 30, seed=41)
for g in gs[:150]:
    g[1:] = [x * 0.05 for x in g[1:]]  # nearer the front, so it is not 3 points
rc, out, err = fflib.run_eval(["--plugin", "zdt1", "--slots", "2", "--run", "fr", "--store", store],
                              fflib.jsonl(gs))
check.ok(rc == 0 and len(out) == 400, f"eval zdt1: {rc} {err[-500:]}")
text = "\n".join(json.dumps(o) for o in out) + "\n"
# One line not ok (as eval prints a failed one): it must be left out.
text += '{"id": 999, "line": 401, "replicate": 0, "status": "invalid", "fitness": null, "error": "x"}\n'
p = write("zdt1.jsonl", text)
pts = [o["fitness"] for o in out]
got = compare("zdt1 eval, given ref", p, pts, ref=[1.0, 11.0])
if got:
    check.ok(got["read"] == 401 and got["not_ok"] == 1, f"counts: {got['read']} read, {got['not_ok']} not ok")
compare("zdt1 eval, default ref", p, pts)

# The same run exported as CSV (fitness as a JSON array in one field).
r = subprocess.run([fflib.exe("fitfarm"), "export", "fr", "--store", store, "--format", "csv",
                    "--out", os.path.join(tmp, "fr.csv")], capture_output=True, text=True, timeout=60)
check.ok(r.returncode == 0, f"export: {r.stderr}")
compare("zdt1 export csv", os.path.join(tmp, "fr.csv"), pts, ref=[1.0, 11.0])

# dtlz2 with 3 objectives (exact sweep) and 4 (Monte Carlo).
for m, n in ((3, 300), (4, 120)):
    gs = fflib.genomes(n, m + 9, seed=50 + m)
    rc, out, err = fflib.run_eval(["--plugin", "dtlz2", "--params", json.dumps({"k": 10, "m": m}),
                                   "--slots", "2"], fflib.jsonl(gs))
    check.ok(rc == 0 and len(out) == n, f"eval dtlz2 m={m}: {rc} {err[-500:]}")
    p = write(f"dtlz2_{m}.jsonl", "\n".join(json.dumps(o) for o in out) + "\n")
    compare(f"dtlz2 m={m}", p, [o["fitness"] for o in out], ref=[2.5] * m)

# Replicates with --aggregate: only the aggregate lines stand for genomes.
gs = fflib.genomes(50, 30, seed=61)
rc, out, err = fflib.run_eval(["--plugin", "zdt1", "--slots", "2", "--replicates", "2",
                               "--aggregate", "mean"], fflib.jsonl(gs))
p = write("agg.jsonl", "\n".join(json.dumps(o) for o in out) + "\n")
aggs = [o["fitness"] for o in out if "aggregate" in o]
got = compare("zdt1 aggregate", p, aggs, ref=[1.0, 11.0])
if got:
    check.ok(got["read"] == 50, f"aggregate lines read: {got['read']}, not 50")

# fitfarm-nsga2's files: front.csv (f1, f2, x1.. columns) and population.jsonl
# (every generation, with "generation").
nsga = os.path.join(fflib.BUILD, "client", "nsga2", "fitfarm-nsga2")
out_dir = os.path.join(tmp, "nsga2")
r = subprocess.run([nsga, "--plugin", "zdt2", "--genes", "30", "--population", "40",
                    "--generations", "25", "--seed", "3", "--slots", "2", "--out", out_dir],
                   capture_output=True, text=True, timeout=300)
check.ok(r.returncode == 0, f"nsga2: {r.stderr[-1000:]}")
if r.returncode == 0:
    lines = open(os.path.join(out_dir, "front.csv")).read().splitlines()
    pts = [[float(v) for v in l.split(",")[:2]] for l in lines[1:]]
    compare("nsga2 front.csv", os.path.join(out_dir, "front.csv"), pts, ref=[1.5, 10.0])
    pop = [json.loads(l) for l in open(os.path.join(out_dir, "population.jsonl"))]
    got = compare("nsga2 population.jsonl", os.path.join(out_dir, "population.jsonl"),
                  [o["fitness"] for o in pop], ref=[1.5, 10.0])
    if got:
        check.ok(all("generation" in p for p in got["front"]), "front points carry their generation")

def count_near(rows, rgb, tol=12):
    return sum(1 for row in rows for p in row if all(abs(p[k] - rgb[k]) <= tol for k in range(3)))


if r.returncode == 0:
    pop_path = os.path.join(out_dir, "population.jsonl")
    png = os.path.join(tmp, "pop.png")
    r = front_cmd([pop_path, "--ref", "1.5,10", "--png", png, "--labels", "cost (EUR),mass (kg)"])
    check.ok(r.returncode == 0 and os.path.exists(png), f"--png: {r.returncode} {r.stderr}")
    if os.path.exists(png):
        w, h, rows = fflib.png_pixels(png)
        # Two panels (the pair and the curve) of 470 x 440 under a 50-pixel title.
        check.ok((w, h) == (940, 490), f"picture size {w}x{h}, not 940x490")
        left = [row[:470] for row in rows]
        right = [row[470:] for row in rows]
        check.ok(count_near(left, (230, 97, 13)) > 50, "no front-coloured pixels in the front panel")
        check.ok(count_near(left, (0, 0, 0), 8) > 30, "no knee ring in the front panel")
        check.ok(count_near(right, (15, 41, 107), 20) > 100, "no hypervolume curve in the right panel")
        check.ok(count_near(right, (230, 97, 13)) == 0, "front colour in the curve panel")
        print(f"picture {w}x{h}: {count_near(left, (230, 97, 13))} front pixels, "
              f"{count_near(right, (15, 41, 107), 20)} curve pixels")
    # The output folder itself stands for its population.jsonl.
    a = front_cmd([pop_path, "--ref", "1.5,10", "--json"])
    b = front_cmd([out_dir, "--ref", "1.5,10", "--json"])
    check.ok(b.returncode == 0 and a.stdout == b.stdout, f"folder argument: {b.stderr}")
    svg = os.path.join(tmp, "front.svg")
    r = front_cmd([os.path.join(out_dir, "front.csv"), "--svg", svg])
    check.ok(r.returncode == 0, f"--svg: {r.stderr}")
    text = open(svg).read() if os.path.exists(svg) else ""
    check.ok("<svg" in text and 'width="470' in text and 'height="490' in text,
             f"--svg: not a 470 x 490 SVG: {text[:300]}")
    r = front_cmd([pop_path, "--png", png, "--labels", "a,b,c"])
    check.ok(r.returncode == 2 and "--labels names 3" in r.stderr, f"labels arity: {r.stderr}")
    r = front_cmd([pop_path, "--png", os.path.join(tmp, "no", "such", "dir.png")])
    check.ok(r.returncode == 1 and "cannot write" in r.stderr, f"unwritable picture: {r.stderr}")


# A plain CSV table, quoted fields and a status column.
p = write("plain.csv", 'id,cost,mass,status\n1,0.5,2,ok\n2,"0.25",3,ok\n3,0.01,0.01,failed\n4,0.1,5,ok\r\n')
compare("plain csv", p, [[0.5, 2], [0.25, 3], [0.1, 5]])

# Bad input names the line; usage errors exit 2.
r = front_cmd([write("bad.jsonl", '{"fitness": [1, 2]}\n{"fitness": [1, "x"]}\n')])
check.ok(r.returncode == 1 and "line 2" in r.stderr, f"bad line: {r.returncode} {r.stderr}")
r = front_cmd([write("mixed.jsonl", '{"fitness": [1, 2]}\n{"fitness": [1, 2, 3]}\n')])
check.ok(r.returncode == 1 and "line 2 has 3 objectives" in r.stderr, f"mixed: {r.stderr}")
r = front_cmd([write("badcsv.csv", "f1,f2\n1,2\n3,abc\n")])
check.ok(r.returncode == 1 and 'line 3, column "f2"' in r.stderr, f"bad csv: {r.stderr}")
r = front_cmd([write("quote.csv", 'f1,f2\n1,2\n"3,4\n')])
check.ok(r.returncode == 1 and "CSV line 3 cannot be read" in r.stderr, f"open quote: {r.stderr}")
r = front_cmd([os.path.join(tmp, "zdt1.jsonl"), "--ref", "1,2,3"])
check.ok(r.returncode == 2 and "--ref has 3 values" in r.stderr, f"ref arity: {r.stderr}")
r = front_cmd([write("none.jsonl", '{"status": "failed", "fitness": null}\n')])
check.ok(r.returncode == 1 and "no ok result" in r.stderr, f"nothing ok: {r.stderr}")
r = front_cmd([os.path.join(tmp, "missing.jsonl")])
check.ok(r.returncode == 1 and "cannot read" in r.stderr, f"missing file: {r.stderr}")
check.done()
