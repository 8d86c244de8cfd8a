"""fitfarm: farm fitness evaluations out to a pool of CPU machines, from Python.

    import fitfarm
    from scipy.optimize import differential_evolution
    with fitfarm.Pool() as pool:                       # embedded local pool
        f = pool.function("rastrigin", objective=0)
        res = differential_evolution(f, [(-5.12, 5.12)] * 4, workers=pool.map,
                                     updating="deferred", seed=1)

Pool, Run, Function, Result, Provenance and the exceptions are loaded on first use, so
`import fitfarm.simulator` (a simulator run by a worker) works without
libfitfarm; the first use of Pool raises ImportError naming every place the
library was looked for when it cannot be found. See client/python/README.md."""
from .errors import (ConnectError, Error, EvaluationError, InvalidArgumentError,  # noqa: F401
                     NotRecordedError, OutOfMemoryError, PluginError, PoolClosedError,
                     ProtocolError, QueueFullError, RefusedError, SystemCallError, TimeoutError)

__version__ = "0.1.0"

_LAZY = {"Pool", "Run", "Function", "Result", "Provenance", "library_version", "library_path"}


def __getattr__(name):
    if name in _LAZY:
        from . import pool as _pool
        from . import _lib
        if name == "library_version":
            return lambda: _lib.text(_lib.version())
        if name == "library_path":
            return _lib.LIBRARY_PATH
        return getattr(_pool, name)
    raise AttributeError(f"module 'fitfarm' has no attribute {name!r}")


def __dir__():
    return sorted(list(globals()) + list(_LAZY))
