"""Settings that would silently cancel each other are refused, naming both:
with FITFARM_BROKER (or 'broker =' in the config file) pointing at a broker,
`fitfarm eval --slots 2` or `--store DIR` used to go to that broker and ignore
the option. Now it exits 2 naming the option and where the broker came from;
`--local` runs the embedded pool whatever the environment says (and its
results are the sphere formula's, sum of squares, De Jong 1975), and
`--local --broker` is a usage error."""
import json
import os
import subprocess
import tempfile

import fflib

FITFARM = fflib.exe("fitfarm")
check = fflib.Check("test_cli_settings")
LINE = json.dumps({"id": 1, "genome": [1.5, -2.0, 0.25]}) + "\n"
WANT = 1.5 * 1.5 + 2.0 * 2.0 + 0.25 * 0.25


def run(args, env_extra):
    env = dict(os.environ)
    env.pop("FITFARM_BROKER", None)
    env.update(env_extra)
    return subprocess.run([FITFARM, "eval", "--plugin", "sphere"] + args, input=LINE, env=env,
                          capture_output=True, text=True, timeout=120)


tmp = tempfile.mkdtemp(prefix="fitfarm-settings-")
remote = {"FITFARM_BROKER": "tcp://127.0.0.1:9"}  # nothing listens there

for opt in (["--slots", "2"], ["--store", os.path.join(tmp, "st")]):
    r = run(opt, remote)
    check.ok(r.returncode == 2 and opt[0] in r.stderr and "FITFARM_BROKER" in r.stderr
             and "--local" in r.stderr and r.stdout == "",
             f"{opt[0]} with FITFARM_BROKER set is refused naming both: "
             f"exit {r.returncode} {r.stderr.strip()[:300]}")

cfg = os.path.join(tmp, "config")
with open(cfg, "w") as f:
    f.write("broker = tcp://127.0.0.1:9\n")
r = run(["--slots", "1", "--config", cfg], {})
check.ok(r.returncode == 2 and "'broker =' in the config file" in r.stderr,
         f"the same with the broker from the config file: exit {r.returncode} {r.stderr[:300]}")

r = run(["--local", "--slots", "1", "--store", os.path.join(tmp, "local-store")], remote)
out = [json.loads(l) for l in r.stdout.splitlines()]
check.ok(r.returncode == 0 and len(out) == 1 and out[0]["status"] == "ok"
         and out[0]["fitness"][0] == WANT,
         f"--local runs the embedded pool despite FITFARM_BROKER: exit {r.returncode} "
         f"{r.stdout[:200]} {r.stderr[-300:]}")
check.ok(os.path.isdir(os.path.join(tmp, "local-store")), "... and keeps its --store")

r = run(["--local", "--broker", "tcp://127.0.0.1:9"], {})
check.ok(r.returncode == 2 and "--local and --broker" in r.stderr,
         f"--local with --broker is a usage error: exit {r.returncode} {r.stderr[:200]}")

check.done()
