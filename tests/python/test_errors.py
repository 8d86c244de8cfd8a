"""Library failures become exceptions carrying the library's code and
sentence (FITFARM_E* codes of client/include/fitfarm.h)."""
import pytest

import fitfarm
from fitfarm import errors


def test_unknown_plugin_names_the_pool_plugins(pool):
    f = pool.function("no_such_plugin", objective=0)
    with pytest.raises(fitfarm.PluginError) as e:
        f([1.0])
    assert e.value.code == errors.EPLUGIN
    assert "no_such_plugin" in e.value.message
    assert "sphere" in e.value.message and "rastrigin" in e.value.message
    # The pool goes on working after a refusal.
    assert pool.function("sphere", objective=0)([3.0]) == 9.0


def test_failed_genome_raises_or_returns_the_given_number(pool):
    f = pool.function("rastrigin", objective=0, params={"n": 2})
    with pytest.raises(fitfarm.EvaluationError) as e:
        f([1.0, 2.0, 3.0])
    assert e.value.status == "invalid" and "expect 2" in e.value.error
    g = pool.function("rastrigin", objective=0, params={"n": 2}, on_failure=float("inf"))
    assert pool.map(g, [[1.0, 2.0, 3.0], [0.0, 0.0]]) == [float("inf"), 0.0]


def test_bad_params_fail_each_genome(pool):
    res = pool.run().evaluate("sphere", [[1.0]], params={"dim": 3})
    assert res[0].status != "ok" and "unknown parameter" in res[0].error


def test_remote_broker_without_keys_is_refused():
    # fitfarm.h: a remote broker needs key files unless insecure on loopback/ipc.
    with pytest.raises(fitfarm.Error) as e:
        fitfarm.Pool(broker="tcp://192.0.2.1:5555", connect_timeout=1)
    assert e.value.code == errors.EINVAL and e.value.message


def test_argument_checks():
    with pytest.raises(ValueError):
        fitfarm.Pool.function(None, "spin", replicates=3)  # needs an aggregate


def test_replicates_aggregate(pool):
    # spin's first objective is the sum of the genome whatever the seed, its
    # second a uniform draw in [0, 1) from the evaluation seed (README, plugins).
    f = pool.function("spin", params={"ms": 0}, replicates=5, aggregate="median", seed=9)
    res = f.run.evaluate("spin", [[1.0, 2.0]], params={"ms": 0}, replicates=5)
    draws = sorted(r.fitness[1] for r in res)
    assert len({r.seed for r in res}) == 5
    assert f([1.0, 2.0]) == (3.0, draws[2])


def test_objective_out_of_range_and_the_whole_vector(pool):
    # sphere has one objective, the sum of squares (De Jong 1975).
    with pytest.raises(IndexError) as e:
        pool.function("sphere", objective=1)([3.0])
    assert "objective 1 out of range" in str(e.value)
    whole = pool.function("sphere")
    assert whole([3.0]) == (9.0,)
    np = pytest.importorskip("numpy")
    got = pool.map(whole, np.array([[1.0, 2.0], [0.5, 0.0]]))
    assert got == [(5.0,), (0.25,)] and all(type(v[0]) is float for v in got)
