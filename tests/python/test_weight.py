"""Run weights from Python: Pool.run(weight=W) reaches the broker (a run of
weight 5 evaluates like any other) and out-of-range weights are refused
before anything is sent. The scheduling itself is checked across real
processes in tests/integration/test_fair_share.py.
Run with /usr/bin/python3 -m pytest (Debian's python3-pytest)."""
import pytest


def test_weighted_run_evaluates(pool):
    with pool.run(seed=3, weight=5) as run:
        res = run.evaluate("sphere", [[1.0, 2.0], [3.0, 0.5]])
    # sphere: sum of squares (De Jong 1975)
    assert [r.fitness[0] for r in res] == [5.0, 9.25]


@pytest.mark.parametrize("bad", [0, 1001, -1])
def test_weight_out_of_range(pool, bad):
    with pytest.raises(ValueError):
        pool.run(weight=bad)
