"""Each Result carries its provenance: the worker that computed it, on this
machine (its host is what the standard library's socket.gethostname() says,
i.e. POSIX gethostname()), the CPU seconds and peak memory the worker measured,
and a time stamp between the call's start and end (time.time(), the POSIX
wall clock); a cached answer in another run carries the original's."""
import socket
import time

import fitfarm


def test_results_name_worker_host_and_time(pool):
    genomes = [[0.1 * i, 0.2, 0.3] for i in range(12)]
    t0 = time.time()
    first = pool.run("prov-a", seed=5).evaluate("sphere", genomes)
    t1 = time.time()
    second = pool.run("prov-b", seed=5).evaluate("sphere", genomes)
    host = socket.gethostname()
    for a, b in zip(first, second):
        assert a.ok and not a.cached and b.cached
        p = a.provenance
        assert isinstance(p, fitfarm.Provenance)
        assert p.worker != ""
        assert p.host == host
        assert 0.0 <= p.cpu_seconds < 10.0
        assert t0 - 0.01 <= p.finished_at <= t1 + 0.01
        assert b.provenance == p  # the original evaluation's, exactly


def test_store_keeps_provenance_across_restarts(tmp_path):
    """After the pool stops, a new one on the same store answers from the
    store (not RAM) with the provenance it recorded."""
    genomes = [[1.0 + i, -2.0, 0.5] for i in range(8)]
    store = str(tmp_path / "store")
    with fitfarm.Pool(store=store) as pool:
        first = pool.run("kept-a", seed=1).evaluate("sphere", genomes)
    with fitfarm.Pool(store=store) as pool:
        second = pool.run("kept-b", seed=1).evaluate("sphere", genomes)
    for a, b in zip(first, second):
        assert not a.cached and b.cached
        assert a.provenance.worker != ""
        assert b.provenance == a.provenance
