#!/usr/bin/env python3
"""ref_cantilever_check.py: checks client/examples/cantilever.py against
outside references, both as a module and through its JSON Lines protocol.

References:
  - uniform cantilever with an end load: delta = P L^3 / (3 E I), I = b h^3 / 12
    (Gere & Goodno, Mechanics of Materials, table of cantilever deflections;
    any mechanics of materials text);
  - stepped cantilever: the unit-load (virtual work) integral
    delta = integral_0^L M(x) m(x) / (E I(x)) dx with M = P (L - x), m = L - x
    (same texts, chapter on energy methods), integrated numerically with
    scipy.integrate.quad, independently of the program's closed-form sum;
  - mass: rho * b * sum(h_i * L / S), the volume of rectangular prisms.

Run by tests/unit/test_exec_plugin.c (ctest) with Debian's /usr/bin/python3,
which carries scipy. Exits 0 when every check passes, 1 otherwise.
"""
import json
import math
import os
import subprocess
import sys

from scipy import integrate

HERE = os.path.dirname(os.path.abspath(__file__))
SOURCE = os.environ.get("FITFARM_SOURCE_DIR", os.path.join(HERE, "..", ".."))
PROGRAM = os.path.join(SOURCE, "client", "examples", "cantilever.py")

sys.path.insert(0, os.path.dirname(PROGRAM))
import cantilever  # noqa: E402

failures = 0


def check(what, got, want, rel):
    global failures
    ok = math.isclose(got, want, rel_tol=rel, abs_tol=0.0)
    print("%-4s %-60s got %.17g want %.17g" % ("ok" if ok else "FAIL", what, got, want))
    if not ok:
        failures += 1


def stepped_quad(hs, p):
    """delta by numerical quadrature of the unit-load integral (scipy)."""
    L, P, E, b = p["length"], p["load"], p["youngs_modulus"], p["width"]
    seg = L / len(hs)

    def integrand(x):
        i = min(int(x / seg), len(hs) - 1)
        inertia = b * hs[i] ** 3 / 12.0
        return P * (L - x) * (L - x) / (E * inertia)

    total = 0.0
    # One quad per segment, so the integrand is smooth on each piece.
    for i in range(len(hs)):
        a, e = i * seg, (i + 1) * seg
        val, _ = integrate.quad(integrand, a, e, epsabs=0.0, epsrel=1e-13, limit=200)
        total += val
    return total


def main():
    p = dict(cantilever.DEFAULTS)
    # Uniform beams: every gene equal gives P L^3 / (3 E I).
    for gene in (0.0, 0.25, 0.5, 1.0):
        for segments in (1, 3, 8):
            h = p["h_min"] + gene * (p["h_max"] - p["h_min"])
            inertia = p["width"] * h ** 3 / 12.0
            want = p["load"] * p["length"] ** 3 / (3.0 * p["youngs_modulus"] * inertia)
            got = cantilever.evaluate([gene] * segments, {})
            check("uniform gene %.2f, %d segments: deflection" % (gene, segments),
                  got[0], want, 1e-12)
            check("uniform gene %.2f, %d segments: mass" % (gene, segments), got[1],
                  p["density"] * p["width"] * h * p["length"], 1e-12)

    # Uniform with other params: P L^3 / (3 E I) again.
    q = {"length": 2.5, "load": 350.0, "youngs_modulus": 70e9, "width": 0.05,
         "h_min": 0.02, "h_max": 0.1}
    h = 0.02 + 0.3 * (0.1 - 0.02)
    want = 350.0 * 2.5 ** 3 / (3.0 * 70e9 * (0.05 * h ** 3 / 12.0))
    check("uniform aluminium-like beam with params", cantilever.evaluate([0.3] * 4, q)[0],
          want, 1e-12)

    # Two steps: thick half at the clamp, thin half at the tip, and reversed.
    for genes in ([1.0, 0.0], [0.0, 1.0], [0.7, 0.2]):
        hs = [p["h_min"] + g * (p["h_max"] - p["h_min"]) for g in genes]
        got = cantilever.evaluate(genes, {})
        check("two-step %s against scipy.integrate.quad" % genes, got[0],
              stepped_quad(hs, p), 1e-10)
    # Five steps, params changed.
    genes = [0.9, 0.1, 0.5, 0.3, 0.8]
    pp = dict(p)
    pp.update(q)
    hs = [pp["h_min"] + g * (pp["h_max"] - pp["h_min"]) for g in genes]
    check("five-step with params against scipy.integrate.quad",
          cantilever.evaluate(genes, q)[0], stepped_quad(hs, pp), 1e-10)

    # Through the protocol, as a worker runs it.
    proc = subprocess.Popen([sys.executable, PROGRAM], stdin=subprocess.PIPE,
                            stdout=subprocess.PIPE, text=True)
    intro = json.loads(proc.stdout.readline())
    want_intro = {"fitfarm_exec": 1, "name": "cantilever", "version": cantilever.VERSION,
                  "objectives": 2, "deterministic": True}
    global failures
    if intro != want_intro:
        print("FAIL introduction %r" % intro)
        failures += 1
    genes = [1.0, 0.0]
    hs = [p["h_min"] + g * (p["h_max"] - p["h_min"]) for g in genes]
    proc.stdin.write(json.dumps({"genome": genes, "seed": "18446744073709551615",
                                 "params": {}}) + "\n")
    proc.stdin.flush()
    fit = json.loads(proc.stdout.readline())["fitness"]
    check("protocol: two-step deflection against quad", fit[0], stepped_quad(hs, p), 1e-10)
    for bad, word in (([0.5, 1.5], "outside"), ([], "at least one"), ([0.5], "segments")):
        params = {"segments": 2} if word == "segments" else {}
        proc.stdin.write(json.dumps({"genome": bad, "seed": "1", "params": params}) + "\n")
        proc.stdin.flush()
        got = json.loads(proc.stdout.readline())
        ok = "invalid" in got and word in got["invalid"]
        print("%-4s protocol: %r answered %r" % ("ok" if ok else "FAIL", bad, got))
        failures += 0 if ok else 1
    proc.stdin.close()
    rc = proc.wait(timeout=10)
    if rc != 0:
        print("FAIL the program exited with %d on end of input" % rc)
        failures += 1

    print("%d failure(s)" % failures)
    return 1 if failures else 0


if __name__ == "__main__":
    sys.exit(main())
