#!/usr/bin/env python3
"""Independent reference values for the bundled benchmark plugins.

Computed from the published definitions, not from our C code:
  ZDT1, ZDT2, ZDT3: Zitzler, Deb, Thiele, "Comparison of Multiobjective
    Evolutionary Algorithms: Empirical Results", Evolutionary Computation 8(2), 2000.
  DTLZ2: Deb, Thiele, Laumanns, Zitzler, "Scalable Test Problems for
    Evolutionary Multi-Objective Optimization", 2002.
  Rastrigin: f(x) = 10 n + sum(x_i^2 - 10 cos(2 pi x_i)).
  Sphere: f(x) = sum(x_i^2).
  spin's u: xoshiro256** seeded by splitmix64 (Blackman & Vigna, "Scrambled
    linear pseudorandom number generators"), checked below against the
    published test values before use.

Protocol (stdin -> stdout, one line each): "PROBLEM [ARGS] HEX..." where HEX
are the IEEE 754 bits of each gene as 16 hex digits; the answer is the
objectives' bits, space separated. Lines: "zdt1 X...", "zdt2 X...",
"zdt3 X...", "dtlz2 M X...", "rastrigin X...", "sphere X...", "spin SEED"
(SEED decimal; answer: the first uniform draw)."""
import math
import struct
import sys

M64 = (1 << 64) - 1


def from_hex(h):
    return struct.unpack("<d", struct.pack("<Q", int(h, 16)))[0]


def to_hex(x):
    return "%016x" % struct.unpack("<Q", struct.pack("<d", x))[0]


def zdt(variant, x):
    n = len(x)
    f1 = x[0]
    g = 1.0 + 9.0 * sum(x[1:]) / (n - 1)
    if variant == 1:
        h = 1.0 - math.sqrt(f1 / g)
    elif variant == 2:
        h = 1.0 - (f1 / g) ** 2
    else:
        h = 1.0 - math.sqrt(f1 / g) - (f1 / g) * math.sin(10.0 * math.pi * f1)
    return [f1, g * h]


def dtlz2(m_obj, x):
    # Paper notation, 1-based: x_M is the first distance variable.
    n = len(x)
    g = sum((x[i - 1] - 0.5) ** 2 for i in range(m_obj, n + 1))
    out = []
    for m in range(1, m_obj + 1):
        f = 1.0 + g
        for i in range(1, m_obj - m + 1):
            f *= math.cos(x[i - 1] * math.pi / 2.0)
        if m > 1:
            f *= math.sin(x[m_obj - m + 1 - 1] * math.pi / 2.0)
        out.append(f)
    return out


def rastrigin(x):
    return [10.0 * len(x) + sum(xi * xi - 10.0 * math.cos(2.0 * math.pi * xi) for xi in x)]


def sphere(x):
    return [sum(xi * xi for xi in x)]


def splitmix64(state):
    state = (state + 0x9E3779B97F4A7C15) & M64
    z = state
    z = ((z ^ (z >> 30)) * 0xBF58476D1CE4E5B9) & M64
    z = ((z ^ (z >> 27)) * 0x94D049BB133111EB) & M64
    return state, z ^ (z >> 31)


def rotl(x, k):
    return ((x << k) | (x >> (64 - k))) & M64


def xoshiro_next(s):
    result = (rotl((s[1] * 5) & M64, 7) * 9) & M64
    t = (s[1] << 17) & M64
    s[2] ^= s[0]
    s[3] ^= s[1]
    s[1] ^= s[2]
    s[0] ^= s[3]
    s[2] ^= t
    s[3] = rotl(s[3], 45)
    return result


def self_check_rng():
    # Published values (CHECKS.md): xoshiro256** from state {1,2,3,4} and
    # splitmix64 from state 0.
    s = [1, 2, 3, 4]
    got = [xoshiro_next(s) for _ in range(4)]
    assert got == [11520, 0, 1509978240, 1215971899390074240], got
    assert splitmix64(0)[1] == 0xE220A8397B1DCDAF


def spin_u(seed):
    st = seed
    s = []
    for _ in range(4):
        st, z = splitmix64(st)
        s.append(z)
    return (xoshiro_next(s) >> 11) * 2.0 ** -53


def main():
    self_check_rng()
    for line in sys.stdin:
        w = line.split()
        if not w:
            continue
        p = w[0]
        if p in ("zdt1", "zdt2", "zdt3"):
            f = zdt(int(p[3]), [from_hex(h) for h in w[1:]])
        elif p == "dtlz2":
            f = dtlz2(int(w[1]), [from_hex(h) for h in w[2:]])
        elif p == "rastrigin":
            f = rastrigin([from_hex(h) for h in w[1:]])
        elif p == "sphere":
            f = sphere([from_hex(h) for h in w[1:]])
        elif p == "spin":
            f = [spin_u(int(w[1]))]
        else:
            raise SystemExit("unknown problem " + p)
        print(" ".join(to_hex(v) for v in f))


if __name__ == "__main__":
    main()
