"""fitfarm.simulator: a Python simulator (client/python/examples/pad_sim.py)
in a real pool, and the helper's answers to bad requests.

Outside reference: the base-excitation transmissibility of a one-degree-of-
freedom mass-spring-damper, T(r) = sqrt((1 + (2 zeta r)^2) / ((1 - r^2)^2 +
(2 zeta r)^2)), r = w / w_n (Rao, Mechanical Vibrations); the simulator
computes it another way (the modulus of the complex frequency response), so
agreement to 1e-12 relative checks both. Static sag m g / k (Hooke's law)."""
import io
import json
import math

import pytest

import fitfarm
import fitfarm.simulator as sim
from conftest import PAD_SIM, PYTHON

P = dict(mass=50.0, area=0.01, frequency=50.0, e_soft=1.0e6, e_stiff=1.0e8, zeta_soft=0.15,
         zeta_stiff=0.02, t_min=0.005, t_max=0.05)


def textbook(phi, g1, p=P):
    t = p["t_min"] + g1 * (p["t_max"] - p["t_min"])
    k = p["area"] / t / (phi / p["e_stiff"] + (1 - phi) / p["e_soft"])  # Reuss (series) mixing
    zeta = (1 - phi) * p["zeta_soft"] + phi * p["zeta_stiff"]
    r = 2 * math.pi * p["frequency"] / math.sqrt(k / p["mass"])
    tr = math.sqrt((1 + (2 * zeta * r) ** 2) / ((1 - r * r) ** 2 + (2 * zeta * r) ** 2))
    return tr, p["mass"] * 9.80665 / k


GENOMES = [[0.0, 0.0], [0.3, 0.7], [1.0, 1.0], [0.05, 0.9], [0.8, 0.1]]


def check_pool(p):
    run = p.run(seed=4)
    res = run.evaluate("pad", GENOMES)
    for g, r in zip(GENOMES, res):
        assert r.status == "ok", r
        tr, sag = textbook(*g)
        assert r.fitness[0] == pytest.approx(tr, rel=1e-12)
        assert r.fitness[1] == pytest.approx(sag, rel=1e-12)
    bad = run.evaluate("pad", [[1.5, 0.5]])
    assert bad[0].status == "invalid" and "outside [0, 1]" in bad[0].error
    f = p.function("pad", objective=0, on_failure=1e300)
    assert f([2.0, 0.0]) == 1e300


def test_pad_simulator_in_embedded_pool():
    try:
        p = fitfarm.Pool(slots=2, exec_plugins=[f"pad={PYTHON} {PAD_SIM}"])
    except fitfarm.Error as e:
        pytest.fail(f"embedded pool with an exec plugin: {e.message}")
    with p:
        check_pool(p)


def test_pad_simulator_through_broker_and_worker(broker_pool):
    check_pool(broker_pool)


def test_helper_answers():
    out = io.StringIO()
    lines = [json.dumps({"genome": [1, 2], "seed": "18446744073709551615", "params": {"k": 2}}),
             json.dumps({"genome": [1], "seed": "3", "params": {}}),
             json.dumps({"genome": [0.5], "seed": "3", "params": {}}),
             "not json"]

    def evaluate(genome, params, seed):
        print("stray output must not reach the protocol")
        if len(genome) == 1 and genome[0] == 1:
            raise sim.Invalid("one gene of 1 is not allowed")
        if len(genome) == 1:
            raise RuntimeError("solver diverged")
        return [sum(genome) * params.get("k", 1), float(seed % 1000)]

    sim.serve(evaluate, name="t", version="2", objectives=2, deterministic=False,
              stdin=io.StringIO("\n".join(lines) + "\n"), stdout=out)
    got = [json.loads(l) for l in out.getvalue().splitlines()]
    assert got[0] == {"fitfarm_exec": 1, "name": "t", "version": "2", "objectives": 2,
                      "deterministic": False}
    # 2^64 - 1 survives as a decimal string (JSON, RFC 8259, numbers lose bits past 2^53).
    assert got[1] == {"fitness": [6.0, float((2 ** 64 - 1) % 1000)]}
    assert got[2] == {"invalid": "one gene of 1 is not allowed"}
    assert got[3] == {"error": "RuntimeError: solver diverged"}
    assert list(got[4]) == ["invalid"]
    assert len(got) == 5


def test_helper_refuses_non_finite_and_wrong_counts():
    call = sim._caller(lambda g: [float("nan")])
    assert "not a finite number" in sim.answer('{"genome":[1],"seed":"1","params":{}}', call, 1)["error"]
    call = sim._caller(lambda g: [1.0, 2.0])
    assert "declared 1 objectives" in sim.answer('{"genome":[1],"seed":"1","params":{}}', call, 1)["error"]
    call = sim._caller(lambda g: 3)  # a bare number is one objective
    assert sim.answer('{"genome":[1],"seed":"1","params":{}}', call, 1) == {"fitness": [3.0]}
