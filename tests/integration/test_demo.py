"""`fitfarm demo` on the embedded pool, on a small budget (CI time): it must
leave the documented files, a summary whose three designs are points of the
front file with the right extremes (the lowest transmissibility, the lowest
settlement), grids of grains that match those designs' genomes (gene
r * 12 + c is site (r, c), row 0 on the floor; stiff when the gene is at
least 0.5, as the granular plugin reads a binary genome), and a PNG of the
documented size, and the same three designs drawn by `fitfarm show` with
their own seeds (the fitness of the drawn evaluation equals the front's, bit
for bit). The granular physics itself is checked elsewhere against
published results (test_granular_physics)."""
import json
import os
import re
import struct
import subprocess
import tempfile

import fflib

check = fflib.Check("test_demo")
tmp = tempfile.mkdtemp(prefix="ff-demo-")
out = os.path.join(tmp, "demo-out")
r = subprocess.run([fflib.exe("fitfarm"), "demo", "--out", out, "--population", "8",
                    "--generations", "2", "--slots", "2"], capture_output=True, text=True,
                   timeout=600)
check.ok(r.returncode == 0, f"demo: exit {r.returncode}: {r.stderr[-2000:]}")
for name in ("front.png", "front.csv", "front.txt", "summary.txt", "search/generations.csv",
             "search/population.jsonl", "search/front.jsonl"):
    check.ok(os.path.isfile(os.path.join(out, name)), f"demo-out/{name} missing")
check.ok("front.png" in r.stdout and "--broker tcp://" in r.stdout,
         f"the closing lines say where to look and how to use a real pool: {r.stdout[-800:]}")

if os.path.isfile(os.path.join(out, "summary.txt")):
    rows = [l.split(",") for l in open(os.path.join(out, "front.csv")).read().splitlines()[1:]]
    front = [([float(x) for x in row[:2]], [float(x) for x in row[2:]]) for row in rows]
    summary = open(os.path.join(out, "summary.txt")).read()
    blocks = re.findall(r"^(best isolation|least settlement|knee)[^:]*: transmissibility "
                        r"(-?[0-9.]+) dB, settlement (-?[0-9.]+) mm.*\n((?:    .*\n)+)", summary, re.M)
    check.ok(len(blocks) == 3, f"three designs in the summary, found {len(blocks)}")
    for what, t, s, grid in blocks:
        t, s = float(t), float(s)
        match = [g for f, g in front if abs(f[0] - t) < 0.006 and abs(f[1] - s) < 0.0006]
        check.ok(len(match) >= 1, f"{what}: ({t}, {s}) is not on front.csv")
        if what == "best isolation":
            check.ok(abs(t - min(f[0] for f, _ in front)) < 0.006, f"{what} is not the lowest dB")
        if what == "least settlement":
            check.ok(abs(s - min(f[1] for f, _ in front)) < 0.0006, f"{what} is not the lowest mm")
        lines = [l for l in grid.splitlines() if l.strip().startswith("row")]
        cells = {int(l.split()[1]): l.split()[2:] for l in lines}
        check.ok(len(cells) == 6, f"{what}: {len(cells)} rows of grains, not 6")
        if match and len(cells) == 6:
            want = {r_: ["S" if match[0][r_ * 12 + c] >= 0.5 else "o" for c in range(12)]
                    for r_ in range(6)}
            check.ok(cells == want, f"{what}: the grid does not show the genome")
    png = open(os.path.join(out, "front.png"), "rb").read(24)
    w, h = struct.unpack(">II", png[16:24])
    check.ok(png[:8] == b"\x89PNG\r\n\x1a\n" and (w, h) == (940, 490), f"front.png {w}x{h}")

    # The three designs drawn by fitfarm show, each one simulation with the
    # design's own seed from front.jsonl: its fitness must be the front's,
    # bit for bit (same genome, params and seed: same evaluation).
    fronts = [json.loads(l) for l in open(os.path.join(out, "search", "front.jsonl"))]
    for tag in ("isolation", "settlement", "knee"):
        png_path = os.path.join(out, f"design-{tag}.png")
        drawn = json.load(open(os.path.join(out, f"design-{tag}.json")))
        same = [f for f in fronts if f["fitness"] == drawn["fitness"]]
        check.ok(len(same) >= 1, f"design-{tag}: fitness {drawn['fitness']} is no front design's")
        check.ok(all(len(f["seed"]) > 0 and int(f["seed"]) < 2 ** 64 for f in fronts),
                 "front.jsonl records each design's seed")
        width, height, _ = fflib.png_pixels(png_path)
        check.ok((width, height) == (drawn["width"], drawn["height"]) and drawn["grains"] == 72,
                 f"design-{tag}.png is the drawing show describes: {width}x{height}")

r = subprocess.run([fflib.exe("fitfarm"), "demo", "--population", "7"], capture_output=True,
                   text=True, timeout=60)
check.ok(r.returncode == 2 and "--population" in r.stderr, f"odd population: {r.stderr}")
check.done()
