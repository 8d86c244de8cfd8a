"""`fitfarm show granular` and objective names declared by plugins.

The picture is checked against the trace read here, independently of the
CLI: the trace `fitfarm show --trace-file` keeps must be the very trace
`fitfarm sim --trace` writes for the same genome, params and seed (same
fitness), every grain's centre pixel in the PNG (decoded with zlib by the PNG
specification, fflib.png_pixels) must carry the documented colour of its
material, and the material must be the genome's (a gene >= 0.5 is stiff:
worker/plugins/granular/pad.h). Every plotted displacement series (--json)
must equal the one computed here from the trace's samples by the documented
rule: a height minus its height at the end of the load phase, mm for load,
micrometres per shaking frequency. Labels: the names and units the granular
plugin declares; `fitfarm front --plugin granular` must draw exactly the
picture `--labels "transmissibility (dB),settlement (mm)"` draws, and broken
declarations (tests/plugins/objnames.c) must be refused with the reason."""
import json
import os
import random
import subprocess
import tempfile

import fflib

check = fflib.Check("test_show")
tmp = tempfile.mkdtemp(prefix="ff-show-")
ff = fflib.exe("fitfarm")


def run(*args, timeout=300):
    return subprocess.run([ff] + list(args), capture_output=True, text=True, timeout=timeout)


rnd = random.Random(7)
genome = [round(rnd.random(), 6) for _ in range(72)]
gtext = json.dumps(genome)
png = os.path.join(tmp, "pad.png")
kept = os.path.join(tmp, "kept.jsonl")
r = run("show", "granular", "--genome", gtext, "--seed", "5", "--png", png, "--trace",
        "--trace-file", kept, "--json")
check.ok(r.returncode == 0, f"show: exit {r.returncode}: {r.stderr}")
shown = json.loads(r.stdout) if r.returncode == 0 else None

# The same evaluation through fitfarm sim: the same trace, the same fitness.
simmed = os.path.join(tmp, "sim.jsonl")
s = run("sim", "granular", "--genome", gtext, "--seed", "5", "--trace", simmed)
check.ok(s.returncode == 0, f"sim: {s.stderr}")
if shown and s.returncode == 0:
    check.ok(open(kept).read() == open(simmed).read(), "show's trace differs from sim's")
    check.ok(json.loads(s.stdout)["fitness"] == shown["fitness"], "show's fitness is not sim's")
    check.ok(shown["labels"] == ["transmissibility (dB)", "settlement (mm)"],
             f"labels {shown['labels']}")

lines = [json.loads(x) for x in open(kept)] if os.path.exists(kept) else []
if shown and lines:
    w, h, rows = fflib.png_pixels(png)
    check.ok((w, h) == (940, shown["height"]) and shown["width"] == 940,
             f"PNG is {w}x{h}, --json says {shown['width']}x{shown['height']}")
    # The drawn state: the last grains line of the load phase.
    grains = [x for x in lines if x["type"] == "grains" and x["phase"] == "load"][-1]
    check.ok(abs(grains["t"] - shown["grains_t"]) < 1e-12, "drawn grains are not the load's last")
    px = shown["pad_pixels"]
    soft = tuple(round(255 * c) for c in shown["colours"]["soft"])
    stiff = tuple(round(255 * c) for c in shown["colours"]["stiff"])
    # The documented colours (fitfarm show --help: soft orange, stiff blue).
    check.ok(soft == (245, 158, 69) and stiff == (51, 92, 158), f"colours {soft} {stiff}")
    good = n_stiff = 0
    for i, (x, y) in enumerate(zip(grains["x"], grains["y"])):
        want = stiff if genome[i] >= 0.5 else soft
        n_stiff += genome[i] >= 0.5
        check.ok(grains["stiff"][i] == (1 if genome[i] >= 0.5 else 0), f"grain {i} material")
        p = rows[int(round(px["floor"] - y * px["scale"]))][int(round(px["x0"] + x * px["scale"]))]
        good += all(abs(p[k] - want[k]) <= 2 for k in range(3))
    check.ok(good == 72, f"{good} of 72 grain centres carry their material's colour")
    check.ok(shown["stiff"] == n_stiff and shown["soft"] == 72 - n_stiff, "grain counts")
    print(f"pad {w}x{h}: {good} of 72 grain centres coloured by material, {n_stiff} stiff")

    # The displacement series, recomputed from the samples.
    samples = [x for x in lines if x["type"] == "sample" and x["phase"] != "settle"]
    load = [x for x in samples if x["phase"] == "load"]
    rest_p, rest_f = load[-1]["plate_y"], load[-1]["floor_y"]
    want = []
    for x in samples:
        key = (x["phase"], x["frequency"])
        if not want or want[-1][0] != key:
            want.append((key, [], [], []))
        scale = 1e3 if x["phase"] == "load" else 1e6
        want[-1][1].append(x["t"])
        want[-1][2].append((x["floor_y"] - rest_f) * scale)
        want[-1][3].append((x["plate_y"] - rest_p) * scale)
    got = shown["series"]
    check.ok(len(got) == len(want) == 4, f"{len(got)} series drawn, {len(want)} in the trace")
    worst = 0.0
    for g, (key, t, fl, pl) in zip(got, want):
        check.ok((g["phase"], g["frequency"]) == key, f"series {key}")
        check.ok(g["unit"] == ("mm" if key[0] == "load" else "\u00b5m"), f"unit {g['unit']}")
        check.ok(len(g["t"]) == len(t) and g["t"] == t, f"series {key}: times differ")
        for a, b in zip(g["floor"] + g["plate"], fl + pl):
            worst = max(worst, abs(a - b) / max(abs(b), 1e-9))
    check.ok(worst < 1e-12, f"plotted displacement differs from the trace by {worst:g} relative")
    print(f"series: {[len(g['t']) for g in got]} samples, worst relative difference {worst:g}")
    # The load phase ends at rest by definition; its start is the settlement.
    check.ok(got[0]["plate"][-1] == 0.0, "load phase does not end at 0")

# SVG of the same size; three objectives get the third declared name.
svg = os.path.join(tmp, "pad.svg")
r = run("show", "granular", "--genome", gtext, "--svg", svg, "--json",
        "--params", '{"objectives": 3}')
check.ok(r.returncode == 0, f"--svg: {r.stderr}")
if r.returncode == 0:
    o = json.loads(r.stdout)
    text = open(svg).read()
    check.ok("<svg" in text and f'width="940pt" height="{o["height"]:.0f}pt"' in text,
             f"not a 940 x {o['height']} SVG: {text[:200]}")
    check.ok(o["labels"][2] == "stiff share" and o["series"] == [], f"labels {o['labels']}")

# Usage and refusals.
r = run("show", "zdt1", "--genome", "[0.5, 0.5]", "--png", png)
check.ok(r.returncode == 1 and "only granular" in r.stderr, f"zdt1: {r.returncode} {r.stderr}")
r = run("show", "granular", "--genome", "[0.5]", "--png", png)
check.ok(r.returncode == 1 and "expected 72 doubles" in r.stderr, f"short genome: {r.stderr}")
r = run("show", "granular", "--genome", gtext)
check.ok(r.returncode == 2 and "--png" in r.stderr, f"no output: {r.stderr}")

# fitfarm front: the plugin's declared names reach the axes.
res = os.path.join(tmp, "res.jsonl")
with open(res, "w") as f:
    for i in range(30):
        a = rnd.random()
        f.write(json.dumps({"status": "ok", "fitness": [a * 20 - 10, (1 - a) ** 2 * 3]}) + "\n")
pics = {}
for name, extra in (("plugin", ["--plugin", "granular"]),
                    ("labels", ["--labels", "transmissibility (dB),settlement (mm)"]),
                    ("plain", [])):
    pics[name] = os.path.join(tmp, f"front-{name}.png")
    r = run("front", res, "--png", pics[name], *extra)
    check.ok(r.returncode == 0, f"front {name}: {r.stderr}")
if all(os.path.exists(p) for p in pics.values()):
    data = {k: open(p, "rb").read() for k, p in pics.items()}
    check.ok(data["plugin"] == data["labels"], "--plugin granular draws other labels")
    check.ok(data["plugin"] != data["plain"], "--plugin granular draws the f1, f2 picture")

objdir = os.path.join(fflib.BUILD, "test-plugins-objnames")
r = run("front", res, "--png", pics["plain"], "--plugin", os.path.join(objdir, "objnames0.so"))
check.ok(r.returncode == 0, f"valid declaration refused: {r.stderr}")
for case, why in ((1, "the name is too long"), (2, "the unit is not printable UTF-8"),
                  (3, "the unit is not printable UTF-8"), (4, "is a NULL pointer")):
    r = run("front", res, "--png", pics["plain"], "--plugin",
            os.path.join(objdir, f"objnames{case}.so"))
    check.ok(r.returncode == 1 and why in r.stderr, f"objnames{case}: {r.returncode} {r.stderr}")

check.done()
