#!/usr/bin/env python3
"""Independent hypervolume of random point sets, for test_nsga2_hypervolume.

Brute force by cell decomposition, with numpy (Debian's python3-numpy): the
distinct coordinates of the points and the reference cut the box into a grid
of cells; a cell is dominated (for minimisation) when some point is <= its
lower corner in every objective, and the hypervolume is the sum of the
dominated cells' volumes. Exact for any number of objectives and shares no
code or method with the sweeps under test (definition: Zitzler & Thiele,
1998, the measure of the dominated region bounded by the reference point).

Usage: ref_hypervolume.py SEED (tests/integration/test_front.py imports
hv_cells from here).  Prints, per set:
  set M N
  p X1 ... XM        (N lines, 17 significant digits)
  ref R1 ... RM
  hv V
and "end". Coordinates are drawn on a coarse grid so that ties and
duplicates occur, plus a few points outside the reference."""
import sys

import numpy as np


def hv_cells(pts, ref):
    m = len(ref)
    inside = [p for p in pts if all(p[j] < ref[j] for j in range(m))]
    if not inside:
        return 0.0
    P = np.array(inside)
    axes = [np.unique(np.append(P[:, j], ref[j])) for j in range(m)]
    lows = np.meshgrid(*[a[:-1] for a in axes], indexing="ij")
    sizes = np.meshgrid(*[np.diff(a) for a in axes], indexing="ij")
    lo = np.stack([l.ravel() for l in lows], axis=1)            # cells x m
    vol = np.prod(np.stack([s.ravel() for s in sizes], axis=1), axis=1)
    dom = np.zeros(len(lo), dtype=bool)
    for p in P:
        dom |= np.all(p <= lo, axis=1)
    return float(np.sum(vol[dom]))


def main():
    rng = np.random.default_rng(int(sys.argv[1]))
    out = []
    for m, n, count in ((2, 30, 20), (3, 25, 20), (4, 12, 6), (5, 8, 4)):
        for _ in range(count):
            k = int(rng.integers(1, n + 1))
            pts = (rng.integers(0, 20, size=(k, m)) / 20.0 + rng.random() * 0.01).tolist()
            # some points on a curved front too, so not everything is on the grid
            for _ in range(int(rng.integers(0, 4))):
                v = rng.random(m)
                pts.append((v / np.linalg.norm(v)).tolist())
            ref = (1.0 + rng.random(m) * 0.2).tolist()
            out.append(f"set {m} {len(pts)}")
            out += ["p " + " ".join(f"{x:.17g}" for x in p) for p in pts]
            out.append("ref " + " ".join(f"{x:.17g}" for x in ref))
            out.append(f"hv {hv_cells(pts, ref):.17g}")
    out.append("end")
    print("\n".join(out))


if __name__ == "__main__":
    main()
