"""Pool as a concurrent.futures.Executor: submit() + as_completed() deliver
every result exactly once, with the value of the sphere function (De Jong
1975; conftest.sphere mirrors worker/plugins/sphere.c's order)."""
import concurrent.futures
import random
import threading

import pytest

import fitfarm
from conftest import sphere


def test_submit_as_completed_delivers_each_once(pool):
    f = pool.function("sphere", objective=0, seed=21)
    rnd = random.Random(5)
    xs = [[rnd.uniform(-3, 3) for _ in range(4)] for _ in range(300)]
    seen = {}
    lock = threading.Lock()
    futs = {}
    for i, x in enumerate(xs):
        fut = pool.submit(f, x)
        futs[fut] = i

        def cb(fu, i=i):
            with lock:
                seen[i] = seen.get(i, 0) + 1
        fut.add_done_callback(cb)
    got = {}
    for fut in concurrent.futures.as_completed(futs, timeout=120):
        i = futs[fut]
        assert i not in got
        got[i] = fut.result()
    assert sorted(got) == list(range(len(xs)))
    assert all(got[i] == sphere(xs[i]) for i in got)
    assert seen == {i: 1 for i in range(len(xs))}
    st = f.run.stats()
    assert st["delivered"] == len(xs)


def test_executor_map_and_local_fallback(pool):
    f = pool.function("sphere", objective=0)
    xs = [[1.0, 2.0], [3.0, 4.0]]
    assert pool.map(f, xs) == [5.0, 25.0]
    # Not one of ours: evaluated here, in-process, like builtins.map.
    assert pool.map(lambda x: x[0], xs) == [1.0, 3.0]
    assert pool.submit(sum, [1, 2]).result() == 3
    # A tuple of all objectives when no objective is chosen.
    g = pool.function("zdt1", params={"n": 2})
    v = g([0.25, 0.0])
    # ZDT1 (Zitzler, Deb, Thiele 2000): f1 = x1, g = 1 + 9 x2/(n-1), f2 = g (1 - sqrt(f1/g)).
    assert v == pytest.approx((0.25, 1.0 * (1 - (0.25 / 1.0) ** 0.5)), rel=1e-15)


def test_submit_failure_reaches_the_future(pool):
    f = pool.function("sphere", objective=0, params={"n": 3})
    fut = pool.submit(f, [1.0, 2.0])  # wrong length: status invalid
    with pytest.raises(fitfarm.EvaluationError) as e:
        fut.result(timeout=60)
    assert e.value.status == "invalid" and "expect 3" in e.value.error
