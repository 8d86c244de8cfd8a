"""`fitfarm runs` and `fitfarm export` without --store read ./fitfarm-store,
the broker daemon's default store folder."""
import json
import os
import subprocess
import tempfile

import fflib

check = fflib.Check("test_store_default")
tmp = tempfile.mkdtemp(prefix="fitfarm-it-")
store = os.path.join(tmp, "fitfarm-store")
rc, out, err = fflib.run_eval(["--plugin", "sphere", "--slots", "1", "--store", store, "--run", "dflt"],
                              "[1, 2]\n[3]\n")
check.ok(rc == 0 and [r["fitness"] for r in out] == [[5], [9]], f"eval into the store: {rc} {out} {err}")
r = subprocess.run([fflib.exe("fitfarm"), "runs", "--json"], cwd=tmp, capture_output=True, text=True, timeout=60)
runs = [json.loads(l) for l in r.stdout.splitlines() if l.strip()]
check.ok(r.returncode == 0 and [x.get("run") for x in runs] == ["dflt"], f"runs without --store: {r.returncode} {r.stdout} {r.stderr}")
check.ok(runs and runs[0].get("requests") == 2, f"two requests recorded: {runs}")
r = subprocess.run([fflib.exe("fitfarm"), "export", "dflt", "--format", "jsonl"], cwd=tmp,
                   capture_output=True, text=True, timeout=60)
rows = [json.loads(l) for l in r.stdout.splitlines() if l.strip()]
check.ok(r.returncode == 0 and len(rows) == 2, f"export without --store: {r.returncode} {len(rows)} {r.stderr}")
empty = tempfile.mkdtemp(prefix="fitfarm-it-empty-")
r = subprocess.run([fflib.exe("fitfarm"), "runs"], cwd=empty, capture_output=True, text=True, timeout=60)
check.ok(r.returncode == 1 and "fitfarm-store" in r.stderr, f"no store here: exit 1 naming the folder: {r.returncode} {r.stderr}")
check.done()
