"""Bad input lines get status "invalid" with an error saying what was wrong,
and every other line is still evaluated; exit statuses 0/1/2 as documented."""
import subprocess

import fflib
import refs

check = fflib.Check("test_invalid_lines")
good = [[0.5] * 30, [0.25] * 30]
lines = [
    fflib.jsonl([good[0]]).strip(),          # 1 ok
    "this is not json",                      # 2 not JSON
    '{"id": "x", "genome": "abc"}',          # 3 genome not an array
    '[1, "two", 3]',                         # 4 element not a number
    '[NaN, 1]',                              # 5 NaN is not JSON
    '{"id": [1], "genome": [0.5]}',          # 6 id not a scalar
    "[" + ",".join(["0.5"] * 5) + "]",       # 7 wrong length for zdt1 n=30 (plugin says so)
    "[" + ",".join(["1.5"] * 30) + "]",      # 8 out of [0,1] for zdt1
    "[]",                                    # 9 empty genome
    '{"genome": [' + ",".join(["0.25"] * 30) + '], "id": 7}',  # 10 ok
]
rc, out, err = fflib.run_eval(["--plugin", "zdt1", "--slots", "1"], "\n".join(lines) + "\n")
check.ok(rc == 1, f"exit status 1 when a line is not ok, got {rc}: {err}")
check.ok(len(out) == len(lines), f"one output line per input line: {len(out)}")
by_line = {r["line"]: r for r in out}
check.ok([r["line"] for r in out] == list(range(1, len(lines) + 1)), "output in input order")
for n in (1, 10):
    r = by_line.get(n, {})
    check.ok(r.get("status") == "ok" and refs.close(r.get("fitness", []), refs.zdt(1, good[0 if n == 1 else 1])),
             f"line {n} evaluated: {r}")
check.ok(by_line.get(10, {}).get("id") == 7, "id carried through")
for n in (2, 3, 4, 5, 6, 7, 8, 9):
    r = by_line.get(n, {})
    check.ok(r.get("status") == "invalid" and len(r.get("error", "")) > 5, f"line {n} invalid with an error: {r}")
check.ok("30" in by_line.get(7, {}).get("error", ""), f"wrong length names the expected count: {by_line.get(7)}")

# Unknown plugin: a clear error naming the plugins the pool has; usage error.
r = subprocess.run([fflib.exe("fitfarm"), "eval", "--plugin", "nosuch", "--slots", "1"],
                   input="[1]\n", capture_output=True, text=True, timeout=120)
check.ok(r.returncode == 2, f"unknown plugin exit status {r.returncode}")
check.ok("nosuch" in r.stderr and "zdt1" in r.stderr and "sphere" in r.stderr,
         f"unknown plugin message names the pool's plugins: {r.stderr}")

# Usage errors.
for args in (["eval"], ["eval", "--plugin", "zdt1", "--replicates", "zero"], ["eval", "--bogus"],
             ["eval", "--plugin", "zdt1", "--in", "/nonexistent/file"], ["frobnicate"]):
    r = subprocess.run([fflib.exe("fitfarm")] + args, input="", capture_output=True, text=True, timeout=60)
    check.ok(r.returncode == 2 and r.stderr.strip(), f"{args}: usage error exit 2 with a message, got {r.returncode} {r.stderr!r}")

# All ok: exit 0.
rc, out, err = fflib.run_eval(["--plugin", "sphere", "--slots", "1"], "[1,2]\n[3]\n")
check.ok(rc == 0 and [r["fitness"] for r in out] == [[5], [9]], f"sphere ok lines: {rc} {out} {err}")
check.done()
