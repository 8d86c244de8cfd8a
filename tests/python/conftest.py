"""Shared fixtures of the Python package's tests: the real library, a real
embedded pool, and a real broker + worker on loopback (through
tests/integration/fflib.py, which ends every process it started by PID).

Run from CTest (python/pytest), or by hand:
  PYTHONPATH=build/client/python FITFARM_BUILD_DIR=build /usr/bin/python3 -m pytest -q tests/python
"""
import math
import os
import sys

import pytest

HERE = os.path.dirname(os.path.abspath(__file__))
SOURCE = os.environ.get("FITFARM_SOURCE_DIR", os.path.normpath(os.path.join(HERE, "..", "..")))
BUILD = os.environ.setdefault("FITFARM_BUILD_DIR", os.path.join(SOURCE, "build"))
sys.path.insert(0, os.path.join(SOURCE, "tests", "integration"))
if not any(os.path.isfile(os.path.join(p, "fitfarm", "__init__.py")) for p in sys.path if p):
    sys.path.insert(0, os.path.join(BUILD, "client", "python"))

import fflib  # noqa: E402
import fitfarm  # noqa: E402

PYTHON = "/usr/bin/python3"  # Debian's, with numpy and scipy
PAD_SIM = os.path.join(SOURCE, "client", "python", "examples", "pad_sim.py")


def child_env():
    """Environment for a Python subprocess that imports the same package."""
    env = dict(os.environ)
    pkg = os.path.dirname(os.path.dirname(fitfarm.__file__))
    env["PYTHONPATH"] = pkg + os.pathsep + env.get("PYTHONPATH", "")
    return env


def rastrigin(x):
    """Rastrigin, f(x) = 10 n + sum (x_i^2 - 10 cos(2 pi x_i)) (Rastrigin 1974;
    Muehlenbein et al. 1991), in worker/plugins/rastrigin.c's order of
    operations term by term (start at 10.0 * n, add x*x - 10.0*cos(2.0*pi*x)
    per gene, left to right; the plugin is built with -ffp-contract=off and
    calls the same libm cos), so the bits match."""
    f = 10.0 * float(len(x))
    for xi in x:
        xi = float(xi)
        f += xi * xi - 10.0 * math.cos(2.0 * math.pi * xi)
    return f


def sphere(x):
    """The sphere function f(x) = sum x_i^2 (De Jong 1975), in
    worker/plugins/sphere.c's order: f = 0.0, then f += x*x left to right."""
    f = 0.0
    for xi in x:
        xi = float(xi)
        f += xi * xi
    return f


@pytest.fixture(scope="session")
def pool():
    """One embedded local pool for the tests that need no store of their own."""
    p = fitfarm.Pool(slots=2)
    yield p
    p.shutdown()


@pytest.fixture(scope="session")
def broker_pool(tmp_path_factory):
    """A real broker and one worker (2 slots, plus the pad simulator through
    --exec) on loopback, plaintext, and a fitfarm.Pool connected to it."""
    tmp = str(tmp_path_factory.mktemp("broker"))
    with fflib.Pool(tmp=tmp) as procs:
        procs.start_broker()
        procs.start_worker(slots=2, extra=["--exec", f"pad={PYTHON} {PAD_SIM}"])
        procs.wait_workers(1)
        p = fitfarm.Pool(broker=procs.clients_ep, insecure=True)
        p.procs = procs
        try:
            yield p
        finally:
            p.shutdown()
