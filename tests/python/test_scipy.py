"""scipy's differential_evolution driven through pool.map (workers=pool.map,
updating="deferred"): the same bits as the same search evaluated in-process,
a repeat answered from the cache, and a replay that evaluates nothing.

Outside references: scipy.optimize.differential_evolution (Storn & Price
1997, scipy's implementation) run in-process on the Rastrigin function
(Rastrigin 1974; Muehlenbein et al. 1991) written in conftest.rastrigin in the
plugin's order of operations; equality is bitwise (x bytes and fun.hex())."""
import os
import sqlite3

import numpy as np
import pytest
from scipy.optimize import differential_evolution

import fitfarm
from conftest import rastrigin

BOUNDS = [(-5.12, 5.12)] * 3
DE = dict(seed=1, maxiter=15, popsize=10, polish=False, tol=0.0, updating="deferred")


def reference():
    return differential_evolution(rastrigin, BOUNDS, **DE)


def same_bits(a, b):
    return a.x.tobytes() == b.x.tobytes() and float(a.fun).hex() == float(b.fun).hex()


def count(db, sql):
    con = sqlite3.connect(f"file:{db}?mode=ro", uri=True)
    try:
        return con.execute(sql).fetchone()[0]
    finally:
        con.close()


def test_de_through_pool_map_matches_in_process_bits(pool):
    ref = reference()
    f = pool.function("rastrigin", objective=0, seed=7)
    calls = []
    real_map = pool.map

    def spy(fn, xs):
        calls.append(type(fn).__name__)
        return real_map(fn, xs)

    got = differential_evolution(f, BOUNDS, workers=spy, **DE)
    assert same_bits(got, ref), (got.x, got.fun, ref.x, ref.fun)
    assert got.nfev == ref.nfev
    # scipy hands pool.map its own wrapper; every generation was one batch.
    assert calls and set(calls) == {"_FunctionWrapper"}
    st = f.run.stats()
    assert st["submitted"] == st["delivered"] == ref.nfev
    # Direct calls evaluate one genome: rastrigin(0) = 0 (its known minimum).
    assert f([0.0, 0.0, 0.0]) == 0.0
    assert f(np.array([1.5, -2.0, 0.25])) == rastrigin([1.5, -2.0, 0.25])


def test_repeat_search_is_answered_from_cache(pool):
    f1 = pool.function("rastrigin", objective=0, seed=11)
    a = differential_evolution(f1, BOUNDS, workers=pool.map, **DE)
    f2 = pool.function("rastrigin", objective=0, seed=12)  # a new run
    b = differential_evolution(f2, BOUNDS, workers=pool.map, **DE)
    assert same_bits(a, b)
    st = f2.run.stats()
    assert st["delivered"] == a.nfev and st["cached"] == st["delivered"], st
    # Result objects carry the flag too.
    res = f2.run.evaluate("rastrigin", [[0.5, 0.5, 0.5]])  # no test evaluated it before
    assert res[0].cached is False and res[0].status == "ok"
    again = f2.run.evaluate("rastrigin", [[0.5, 0.5, 0.5]])
    assert again[0].cached is True and again[0].fitness == res[0].fitness
    assert again[0].fitness == (rastrigin([0.5, 0.5, 0.5]),)


def test_replay_of_finished_search_evaluates_nothing(tmp_path):
    store = str(tmp_path / "store")
    db = os.path.join(store, "fitfarm.db")
    with fitfarm.Pool(slots=2, store=store) as p:
        f = p.function("rastrigin", objective=0, run=p.run("de-replay", seed=5))
        first = differential_evolution(f, BOUNDS, workers=p.map, **DE)
    simulated = count(db, "SELECT count(*) FROM simulations")
    evaluations = count(db, "SELECT count(*) FROM evaluations")
    assert simulated >= 1 and evaluations == simulated
    with fitfarm.Pool(slots=2, store=store) as p:
        run = p.run("de-replay", seed=5, replay=True)
        f = p.function("rastrigin", objective=0, run=run)
        second = differential_evolution(f, BOUNDS, workers=p.map, **DE)
        assert run.stats()["delivered"] == first.nfev
        # A request the recorded run never saw is refused, never simulated.
        with pytest.raises(fitfarm.NotRecordedError) as e:
            run.evaluate("rastrigin", [[0.125, 0.25, 0.375]])
        assert e.value.message
    assert same_bits(first, second)
    assert count(db, "SELECT count(*) FROM simulations") == simulated
    assert count(db, "SELECT count(*) FROM evaluations") == evaluations


def test_de_through_a_broker_matches_in_process_bits(broker_pool):
    ref = reference()
    f = broker_pool.function("rastrigin", objective=0, seed=3)
    got = differential_evolution(f, BOUNDS, workers=broker_pool.map, **DE)
    assert same_bits(got, ref)
