#!/usr/bin/python3
"""Reference DFT bins for test_granular_goertzel.c, from numpy.fft.rfft.

Usage: ref_granular_goertzel.py SEED
Prints, for several random signals (numpy's default generator seeded with
SEED, normal values plus a sinusoid so bins are not all noise):
    signal N
    <N values, repr (round-trips exactly)>
    bin K RE IM       (several lines: rfft(x)[K])
and finally "end". The C test runs Goertzel on the same values and compares.
"""
import sys

import numpy as np


def main():
    seed = int(sys.argv[1])
    rng = np.random.default_rng(seed)
    out = []
    for n in (8, 64, 257, 1000, 4096, 10007):
        k0 = int(rng.integers(1, n // 2)) if n > 4 else 1
        t = np.arange(n)
        x = rng.standard_normal(n) + 3.0 * np.sin(2 * np.pi * k0 * t / n + rng.uniform(0, 6))
        X = np.fft.rfft(x)
        out.append("signal %d" % n)
        out.append(" ".join(repr(float(v)) for v in x))
        bins = sorted({0, 1, k0, n // 2, int(rng.integers(0, n // 2 + 1))})
        for k in bins:
            out.append("bin %d %r %r" % (k, float(X[k].real), float(X[k].imag)))
    out.append("end")
    sys.stdout.write("\n".join(out) + "\n")


if __name__ == "__main__":
    main()
