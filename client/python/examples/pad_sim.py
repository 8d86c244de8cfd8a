#!/usr/bin/env python3
"""pad_sim.py: a fitfarm simulator in Python, written with fitfarm.simulator.

A surrogate of a vibration-isolating pad under a machine: the pad is a mix of
soft and stiff grains, and the design trades isolation against sag. Genome,
two genes in [0, 1]:
  g0 = phi, the volume fraction of stiff grains;
  g1 sets the pad thickness t = t_min + g1 (t_max - t_min).
Model (a one-degree-of-freedom surrogate, not a grain simulation):
  effective modulus, series (Reuss) mixing of the two grain materials:
      E = 1 / (phi / E_stiff + (1 - phi) / E_soft)
  stiffness k = E A / t; damping ratio zeta = (1 - phi) zeta_soft + phi zeta_stiff;
  the machine (mass m) sits on the pad, whose base shakes at frequency f.
Two objectives, both minimised:
  1. the transmissibility |X / Y| of base motion to the machine in steady
     state, from the complex frequency response of m x'' + c (x' - y') +
     k (x - y) = 0, c = 2 zeta sqrt(k m):  |(k + i c w) / (k - m w^2 + i c w)|;
  2. the static sag m g / k (m).
The check in tests/python/test_simulator.py compares the first with the
textbook transmissibility T(r) = sqrt((1 + (2 zeta r)^2) / ((1 - r^2)^2 +
(2 zeta r)^2)), r = w / w_n (e.g. Rao, Mechanical Vibrations).

Params (all optional, SI units): mass, area, frequency, e_soft, e_stiff,
zeta_soft, zeta_stiff, t_min, t_max. Deterministic.

Run it in a pool:  fitfarm-worker ... --exec 'pad=/usr/bin/python3 pad_sim.py'
or fitfarm.Pool(exec_plugins=["pad=/usr/bin/python3 /path/to/pad_sim.py"]).
This is a research surrogate, not an engineering certification."""
import math
import os
import sys

try:
    import fitfarm.simulator as sim
except ImportError:  # run from a source tree: the package is beside this folder
    sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), ".."))
    import fitfarm.simulator as sim

DEFAULTS = {
    "mass": 50.0,        # kg, the machine
    "area": 0.01,        # m^2 of pad under it
    "frequency": 50.0,   # Hz, the base excitation
    "e_soft": 1.0e6,     # Pa, soft grains (rubber-like)
    "e_stiff": 1.0e8,    # Pa, stiff grains
    "zeta_soft": 0.15,
    "zeta_stiff": 0.02,
    "t_min": 0.005,      # m
    "t_max": 0.05,       # m
}
G = 9.80665  # m/s^2, standard gravity (CGPM 1901)


def evaluate(genome, params):
    unknown = set(params) - set(DEFAULTS)
    if unknown:
        raise sim.Invalid(f"unknown parameter(s) {sorted(unknown)}; it takes {sorted(DEFAULTS)}")
    p = dict(DEFAULTS, **params)
    if len(genome) != 2:
        raise sim.Invalid(f"the genome has {len(genome)} genes; pad_sim takes 2")
    for i, g in enumerate(genome):
        if not 0.0 <= g <= 1.0:
            raise sim.Invalid(f"gene {i} = {g!r} is outside [0, 1]")
    phi, g1 = genome
    t = p["t_min"] + g1 * (p["t_max"] - p["t_min"])
    e = 1.0 / (phi / p["e_stiff"] + (1.0 - phi) / p["e_soft"])
    k = e * p["area"] / t
    m = p["mass"]
    zeta = (1.0 - phi) * p["zeta_soft"] + phi * p["zeta_stiff"]
    c = 2.0 * zeta * math.sqrt(k * m)
    w = 2.0 * math.pi * p["frequency"]
    transmissibility = abs(complex(k, c * w) / complex(k - m * w * w, c * w))
    return [transmissibility, m * G / k]


if __name__ == "__main__":
    sim.serve(evaluate, name="pad", version="1.0", objectives=2, deterministic=True)
