"""Independent implementations of the benchmark problems, straight from the
published definitions (see ../../../shared/CHECKS.md), for comparing what the
plugins return. Written apart from the C plugins on purpose: a shared bug would
need to be made twice."""
import hashlib
import math
import struct


def zdt(variant, x):
    """Zitzler, Deb, Thiele, 'Comparison of Multiobjective Evolutionary
    Algorithms: Empirical Results', Evolutionary Computation 8(2), 2000."""
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


def dtlz2(x, m):
    """Deb, Thiele, Laumanns, Zitzler, 'Scalable Test Problems for
    Evolutionary Multi-Objective Optimization', 2002: g = sum over the last
    k variables of (x_i - 0.5)^2; f_1 = (1+g) prod_{j<M} cos(x_j pi/2), ...,
    f_M = (1+g) sin(x_1 pi/2)."""
    g = sum((xi - 0.5) ** 2 for xi in x[m - 1:])
    f = []
    for i in range(m):
        v = 1.0 + g
        for j in range(m - 1 - i):
            v *= math.cos(x[j] * math.pi / 2)
        if i > 0:
            v *= math.sin(x[m - 1 - i] * math.pi / 2)
        f.append(v)
    return f


def close(a, b, rel=1e-12, abs_=1e-15):
    return all(abs(p - q) <= max(abs_, rel * max(abs(p), abs(q))) for p, q in zip(a, b)) and len(a) == len(b)


def seed(run_seed, genome, rep, mode="genome"):
    """The evaluation seed as proto/key.h documents it, recomputed with
    Python's hashlib (BLAKE2b, RFC 7693): keyed BLAKE2b-256 with key
    run_seed u64 LE || "ffseedv1" over 0x00 || BLAKE2b-256(genome as
    little-endian doubles) || rep u32 LE (genome mode) or 0x01 || rep u32 LE
    (common mode); the seed is the first 8 bytes, little-endian."""
    key = struct.pack("<Q", run_seed) + b"ffseedv1"
    if mode == "genome":
        gbytes = b"".join(struct.pack("<d", x) for x in (genome or []))
        msg = b"\x00" + hashlib.blake2b(gbytes, digest_size=32).digest() + struct.pack("<I", rep)
    else:
        msg = b"\x01" + struct.pack("<I", rep)
    return struct.unpack("<Q", hashlib.blake2b(msg, digest_size=32, key=key).digest()[:8])[0]


Z85 = "0123456789abcdefghijklmnopqrstuvwxyzABCDEFGHIJKLMNOPQRSTUVWXYZ.-:+=^!/*?&<>()[]{}@%$#"


def z85_decode(s):
    """Z85 (ZeroMQ RFC 32), written from the spec."""
    out = b""
    for i in range(0, len(s), 5):
        v = 0
        for c in s[i:i + 5]:
            v = v * 85 + Z85.index(c)
        out += v.to_bytes(4, "big")
    return out


def key_fingerprint(public_path):
    """A public key file's fingerprint as fitfarm prints it: the first 8 bytes
    of BLAKE2b-256 (RFC 7693, Python's hashlib) of the key, in hex."""
    line = [l for l in open(public_path).read().splitlines() if l and not l.startswith("#")][0]
    return hashlib.blake2b(z85_decode(line.strip()), digest_size=32).hexdigest()[:16]
