#!/usr/bin/env python3
"""cantilever.py: a stepped cantilever beam as an external fitfarm simulator.

A fitfarm worker runs this program as a co-process (the exec plugin) and talks
to it in JSON Lines on stdin/stdout; the protocol is described at the top of
worker/exec_plugin.h. Python 3 standard library only.

The design problem: a cantilever of length L, clamped at x = 0 and loaded by a
force P at its free end x = L, is made of S segments of equal length L/S. Each
segment has a solid rectangular cross-section of width b and height h_i; the
genome holds one gene per segment in [0, 1], scaled to
h_i = h_min + gene_i * (h_max - h_min), segment 0 at the clamp. Two
objectives, both to be minimised:

  1. tip deflection (m), by the unit-load (virtual work) method:
         delta = integral_0^L M(x) m(x) / (E I(x)) dx
     with M(x) = P (L - x) the bending moment of the end load and m(x) = L - x
     the moment of a unit load at the tip. On segment i = [a_i, b_i], with
     I_i = b h_i^3 / 12 constant, the integral is exact:
         delta = P / (3 E) * sum_i ((L - a_i)^3 - (L - b_i)^3) / I_i
     For a uniform beam this is the textbook delta = P L^3 / (3 E I)
     (e.g. Gere & Goodno, Mechanics of Materials, table of cantilever
     deflections).
  2. mass (kg): rho * b * sum_i h_i * L / S.

Params (all optional, SI units): length, load, youngs_modulus, width, density,
h_min, h_max, and segments (when given, the genome must have that many genes).
The result does not depend on the seed, so the program declares itself
deterministic.

Run it in a pool with:  fitfarm-worker --exec 'cantilever=python3 cantilever.py'
"""
import json
import math
import sys

VERSION = "1.0"

DEFAULTS = {
    "length": 1.0,            # m
    "load": 1000.0,           # N, at the free end
    "youngs_modulus": 200e9,  # Pa (structural steel)
    "width": 0.02,            # m
    "density": 7850.0,        # kg/m^3 (structural steel)
    "h_min": 0.01,            # m
    "h_max": 0.05,            # m
}
MAX_SEGMENTS = 10000


class Invalid(Exception):
    """The request cannot be evaluated: answered with {"invalid": ...}."""


def read_params(params):
    """Merges params over DEFAULTS, checking every value."""
    if not isinstance(params, dict):
        raise Invalid("params must be a JSON object")
    p = dict(DEFAULTS)
    segments = None
    for key, value in params.items():
        if key == "segments":
            if not isinstance(value, int) or isinstance(value, bool) or not 1 <= value <= MAX_SEGMENTS:
                raise Invalid("params.segments must be an integer from 1 to %d" % MAX_SEGMENTS)
            segments = value
            continue
        if key not in DEFAULTS:
            raise Invalid("unknown parameter %r; known: %s"
                          % (key, ", ".join(sorted(list(DEFAULTS) + ["segments"]))))
        if isinstance(value, bool) or not isinstance(value, (int, float)) \
                or not math.isfinite(value) or value <= 0:
            raise Invalid("params.%s must be a positive number" % key)
        p[key] = float(value)
    if p["h_min"] > p["h_max"]:
        raise Invalid("params.h_min must not exceed params.h_max")
    return p, segments


def heights(genome, p, segments):
    """Scales genes in [0, 1] to segment heights, checking the genome."""
    if not isinstance(genome, list) or not genome:
        raise Invalid("the genome must hold at least one gene")
    if len(genome) > MAX_SEGMENTS:
        raise Invalid("the genome has %d genes; at most %d segments" % (len(genome), MAX_SEGMENTS))
    if segments is not None and len(genome) != segments:
        raise Invalid("the genome has %d genes but params.segments is %d" % (len(genome), segments))
    hs = []
    for i, g in enumerate(genome):
        if isinstance(g, bool) or not isinstance(g, (int, float)) or not 0.0 <= g <= 1.0:
            raise Invalid("gene %d is %r, outside [0, 1]" % (i, g))
        hs.append(p["h_min"] + g * (p["h_max"] - p["h_min"]))
    return hs


def evaluate(genome, params):
    """Returns [tip deflection (m), mass (kg)] of the stepped cantilever."""
    p, segments = read_params(params)
    hs = heights(genome, p, segments)
    L, P, E, b = p["length"], p["load"], p["youngs_modulus"], p["width"]
    seg = L / len(hs)
    deflection = 0.0
    for i, h in enumerate(hs):
        a, e = i * seg, (i + 1) * seg
        inertia = b * h ** 3 / 12.0
        # integral over [a, e] of P (L - x)^2 / (E I) dx, exactly.
        deflection += ((L - a) ** 3 - (L - e) ** 3) / inertia
    deflection *= P / (3.0 * E)
    mass = p["density"] * b * seg * sum(hs)
    return [deflection, mass]


def answer(obj):
    sys.stdout.write(json.dumps(obj, allow_nan=False) + "\n")
    sys.stdout.flush()


def main():
    answer({"fitfarm_exec": 1, "name": "cantilever", "version": VERSION,
            "objectives": 2, "deterministic": True})
    for line in sys.stdin:
        try:
            request = json.loads(line)
            if not isinstance(request, dict):
                raise ValueError("the request is not a JSON object")
            answer({"fitness": evaluate(request.get("genome"), request.get("params", {}))})
        except Invalid as e:
            answer({"invalid": str(e)})
        except (ValueError, TypeError, ArithmeticError) as e:
            answer({"error": "cantilever: %s" % e})


if __name__ == "__main__":
    main()
