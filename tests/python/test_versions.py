"""The Python package takes "name@VERSION" as any plugin argument and passes
it to the broker, which resolves it (broker/catalog.h). A real broker with
two real workers carrying versions 1.0 and 2.0 of the test plugin
"versioned" (tests/plugins/versioned.c: objective 0 the sum of x_i^2,
objective 1 the version's mark, 10 or 20)."""
import os

import pytest

import fflib
import fitfarm
from fitfarm import errors


@pytest.fixture(scope="module")
def two_versions(tmp_path_factory):
    tmp = str(tmp_path_factory.mktemp("versions"))
    with fflib.Pool(tmp=tmp) as procs:
        procs.start_broker()
        # 1.0 registers first: the version a plain "versioned" means.
        for n, (v, name) in enumerate((("1.0", "v1"), ("2.0", "v2"))):
            procs.start_worker(slots=1, name=name,
                               extra=["--plugin-dir", os.path.join(fflib.BUILD, f"test-plugins-v{v}")])
            procs.wait_workers(n + 1)
        p = fitfarm.Pool(broker=procs.clients_ep, insecure=True)
        try:
            yield p
        finally:
            p.shutdown()


def test_constraint_picks_the_version(two_versions):
    genomes = [[0.5, 1.5], [2.0, -1.0]]
    for plugin, mark in (("versioned@1", 10.0), ("versioned@2.0", 20.0), ("versioned", 10.0)):
        res = two_versions.run().evaluate(plugin, genomes)
        # sum of squares recomputed here; the mark says which version ran it
        assert [r.fitness for r in res] == [(0.25 + 2.25, mark), (4.0 + 1.0, mark)], plugin
    f = two_versions.function("versioned@2", objective=1)
    assert f([1.0]) == 20.0


def test_unmatched_constraint_names_known_versions(two_versions):
    f = two_versions.function("versioned@3", objective=0)
    with pytest.raises(fitfarm.PluginError) as e:
        f([1.0])
    assert e.value.code == errors.EPLUGIN
    assert "matching 3" in e.value.message and "known versions: 1.0, 2.0" in e.value.message


def test_malformed_constraint_is_invalid(two_versions):
    with pytest.raises(fitfarm.Error) as e:
        two_versions.run().evaluate("versioned@", [[1.0]])
    assert e.value.code == errors.EINVAL
