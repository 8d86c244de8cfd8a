"""The Pool (one libfitfarm client: an embedded local pool or a broker), its
runs, and the callables it makes for optimizers.

Threading. libfitfarm allows one client and its runs to be used from one
thread at a time, so every C call of a Pool happens under the Pool's lock.
Waiting is done by whichever thread needs a result ("leader"): it waits on the
client's descriptor (select, outside the lock) in slices of at most
WAIT_SLICE_S, then, under the lock, lets the library process what arrived and
drains every run's results, handing each to the batch it belongs to. Other
threads waiting meanwhile ("followers") sleep on their batch's event and are
woken by the leader's deliveries. A background thread becomes leader while
Executor futures are outstanding. Short slices keep Ctrl-C (KeyboardInterrupt)
prompt in the main thread.

Exactly once. The library delivers each result once; the batch state here
also ignores a second result for an (index, replicate) it already has.

Not here: finding the library (_lib.py), exceptions (errors.py), the
simulator helper (simulator.py)."""
import atexit
import builtins
import collections
import concurrent.futures
import ctypes
import json
import math
import queue
import select
import statistics
import threading
import weakref

from . import _lib as L
from . import errors as E

try:  # numpy is optional: accepted and returned where given
    import numpy as _np
except ImportError:  # pragma: no cover
    _np = None

WAIT_SLICE_S = 0.1  # longest wait between two looks at Ctrl-C and shutdown
FOLLOWER_SLICE_S = 0.02  # a follower re-checks whether the leader left this often
SYNC_ACCEPT = False  # map: hand the batch to the socket; a refusal arrives with the results

STATUS_NAMES = ("ok", "invalid", "failed", "crashed", "timeout")
_SEED_MODES = {"genome": 0, "common": 1}


Provenance = collections.namedtuple("Provenance",
                                    "worker host cpu_seconds peak_rss_kb finished_at")
Provenance.__doc__ = """Who computed a result and what it cost: the worker's name and host,
the evaluation's CPU seconds and peak resident set (KiB) as the worker measured
them, and the Unix time the broker recorded it. For a cached answer, the
evaluation that first computed it; "" and 0 where the store did not record it."""


class Result:
    """One evaluation request's result (genome index x replicate).

    status: "ok", "invalid", "failed", "crashed" or "timeout" (status_code is
    the number); fitness: tuple of floats (a numpy array when the genomes were
    a numpy array; empty when not ok); cached: answered from the store without
    simulating; seed: the evaluation seed (int); key: the content key (hex);
    error: the worker's sentence ("" when none); provenance: a Provenance."""

    __slots__ = ("index", "replicate", "status_code", "fitness", "cached", "seed", "key_bytes",
                 "error", "provenance")

    def __init__(self, index, replicate, status_code, fitness, cached, seed, key_bytes, error,
                 provenance=None):
        self.index = index
        self.replicate = replicate
        self.status_code = status_code
        self.fitness = fitness
        self.cached = cached
        self.seed = seed
        self.key_bytes = key_bytes
        self.error = error
        self.provenance = provenance or Provenance("", "", 0.0, 0, 0.0)

    @property
    def key(self):
        """The content key, BLAKE2b-256, as 64 hex digits."""
        return self.key_bytes.hex()

    @property
    def status(self):
        c = self.status_code
        return STATUS_NAMES[c] if 0 <= c < len(STATUS_NAMES) else f"status {c}"

    @property
    def ok(self):
        return self.status_code == 0

    def __repr__(self):
        return (f"Result(index={self.index}, replicate={self.replicate}, status={self.status!r}, "
                f"fitness={self.fitness!r}, cached={self.cached}, seed={self.seed}, "
                f"error={self.error!r})")


def _params_json(params):
    if params is None:
        return None
    if isinstance(params, (str, bytes)):
        return params if isinstance(params, str) else params.decode()
    return json.dumps(params, sort_keys=True, allow_nan=False)


class _BatchState:
    """One submitted batch: where its results go and who waits for it."""

    __slots__ = ("handle", "n", "replicates", "total", "results", "error", "done", "progress",
                 "on_result", "on_done", "as_numpy", "duplicates")

    def __init__(self, handle, n, replicates, as_numpy):
        self.handle = handle
        self.n = n
        self.replicates = replicates
        self.total = n * replicates
        self.results = {}
        self.error = None
        self.done = threading.Event()
        self.progress = threading.Event()
        self.on_result = None
        self.on_done = None
        self.as_numpy = as_numpy
        self.duplicates = 0

    def ordered(self):
        r = self.replicates
        return [self.results[(i, k)] for i in range(self.n) for k in range(r)]


class Run:
    """A run: the id and seed every evaluation seed derives from, spanning as
    many batches (generations) as the optimizer sends. Made by Pool.run().
    A context manager; close() ends it (the Pool's shutdown closes it too)."""

    def __init__(self, pool, run_id=None, seed=0, replay=False, seed_mode="genome",
                 no_cache=False, timeout=None, attempts=None, retry_failed=False, weight=1):
        if seed_mode not in _SEED_MODES:
            raise ValueError(f"seed_mode must be 'genome' or 'common', not {seed_mode!r}")
        if not 0 <= int(seed) < 2 ** 64:
            raise ValueError("seed must be in [0, 2**64)")
        self._pool = pool
        self._pending = {}  # batch address -> _BatchState
        self._zombies = []  # batches refused or abandoned: destroyed when the run closes
        self._closed = False
        opts = L.RunOptions()
        self._rid = run_id.encode() if run_id is not None else None
        opts.run_id = self._rid
        opts.seed = int(seed)
        opts.seed_mode = _SEED_MODES[seed_mode]
        opts.no_cache = 1 if no_cache else 0
        opts.replay = 1 if replay else 0
        opts.timeout_s = 0 if timeout is None else max(1, int(math.ceil(timeout)))
        opts.attempts = 0 if attempts is None else int(attempts)
        opts.retry_failed = 1 if retry_failed else 0
        if not 1 <= int(weight) <= 1000:
            raise ValueError("weight must be 1 to 1000")
        opts.weight = int(weight)
        self.seed = int(seed)
        self.replay = bool(replay)
        h = ctypes.c_void_p()
        with pool._lock:
            pool._check_open()
            rc = L.run_open(pool._h, ctypes.byref(opts), ctypes.byref(h))
            if rc != 0:
                raise pool._error(rc)
            self._h = h
            self.id = L.text(L.run_id(h))
            pool._runs.append(self)

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()
        return False

    def __repr__(self):
        return f"Run(id={self.id!r}, seed={self.seed}, replay={self.replay})"

    # ---- submitting and waiting -------------------------------------------
    def _submit(self, plugin, params_json, replicates, genomes, accept_wait=True):
        """Builds and submits one batch; returns its state. accept_wait: block
        (in slices) until the broker accepted it, raising its refusal; else
        hand it to the socket and learn of a refusal through the results."""
        pool = self._pool
        if replicates < 1:
            raise ValueError("replicates must be at least 1")
        as_numpy = _np is not None and isinstance(genomes, _np.ndarray)
        with pool._lock:
            self._check_open()
            bh = ctypes.c_void_p()
            rc = L.batch_new(plugin.encode(), params_json.encode() if params_json is not None else None,
                             replicates, ctypes.byref(bh))
            if rc != 0:
                raise pool._error(rc)
            try:
                n = _add_genomes(bh, genomes)
            except BaseException:
                L.batch_destroy(ctypes.byref(bh))
                raise
            st = _BatchState(bh, n, replicates, as_numpy)
            if n == 0:
                L.batch_destroy(ctypes.byref(bh))
                st.done.set()
                return st
            self._pending[bh.value] = st
        try:
            self._send(st, WAIT_SLICE_S * 1000 if accept_wait else 0)
        except BaseException:
            with pool._lock:
                if self._pending.pop(st.handle.value, None) is not None:
                    self._zombies.append(st.handle)
            raise
        return st

    def _send(self, st, slice_ms):
        pool = self._pool
        while True:
            with pool._lock:
                self._check_open()
                rc = L.submit(self._h, st.handle, int(slice_ms))
                if rc == 0:
                    return
                if rc == E.ETIMEDOUT and slice_ms > 0:
                    continue  # still on its way; the lock is released between slices
                raise self._refusal_error(rc)

    def _refusal_error(self, rc):
        """The exception for a refusal code (under the lock)."""
        ref = L.Refusal()
        msg = ""
        if L.refusal(self._h, ctypes.byref(ref)) == 0 and ref.code != 0 and ref.text:
            msg = L.text(ref.text)
        if not msg:
            msg = L.text(L.client_error(self._pool._h)) or L.text(L.strerror(rc))
        return E.error_for(rc, msg)

    def _drain(self):
        """Hands every result that is ready to its batch (under the lock).
        Returns how many were delivered."""
        if not self._pending or self._closed:
            return 0
        got = 0
        r = L.CResult()
        while self._pending:
            rc = L.poll(self._h, ctypes.byref(r), 0)
            if rc == 0:
                break
            if rc < 0:
                self._fail_refused(rc)
                got += 1
                continue
            got += 1
            self._deliver(r)
        return got

    def _fail_refused(self, rc):
        ref = L.Refusal()
        named = None
        if L.refusal(self._h, ctypes.byref(ref)) == 0 and ref.code != 0 and ref.batch:
            named = ref.batch
        exc = self._refusal_error(rc)
        targets = [self._pending[named]] if named in self._pending else list(self._pending.values())
        for st in targets:
            self._finish(st, exc)

    def _deliver(self, r):
        st = self._pending.get(r.batch)
        if st is None:
            return
        # Each field of r is read once: a ctypes field read costs about as
        # much as a Python call, and this runs once per result.
        index, replicate = r.index, r.replicate
        k = (index, replicate)
        results = st.results
        if k in results:
            st.duplicates += 1
            return
        nf = r.n_fitness
        if st.as_numpy:
            fit = _np.ctypeslib.as_array(r.fitness, shape=(nf,)).copy() if nf else _np.empty(0)
        else:
            fit = tuple(r.fitness[:nf]) if nf else ()
        err, worker, host = r.error, r.worker, r.host
        prov = Provenance(worker.decode("utf-8", "replace") if worker else "",
                          host.decode("utf-8", "replace") if host else "",
                          r.cpu_seconds, r.peak_rss_kb, r.finished_at)
        res = Result(index, replicate, r.status, fit, bool(r.cached), r.seed, bytes(r.key),
                     err.decode("utf-8", "replace") if err else "", prov)
        results[k] = res
        if st.on_result is not None:  # a stream: wake its reader
            st.on_result(res)
            st.progress.set()
        if len(st.results) == st.total:
            self._finish(st, None)

    def _finish(self, st, exc):
        self._pending.pop(st.handle.value, None)
        if exc is None:
            L.batch_destroy(ctypes.byref(st.handle))
        else:
            st.error = exc
            self._zombies.append(st.handle)
        st.done.set()
        st.progress.set()
        if st.on_done is not None:
            st.on_done(st)

    def _check_open(self):
        if self._closed:
            raise E.PoolClosedError(0, f"run {self.id} is closed")
        self._pool._check_open()

    # ---- public -------------------------------------------------------------
    def evaluate(self, plugin, genomes, params=None, replicates=1):
        """Evaluates genomes (a sequence of float sequences, a 2-D numpy array,
        or bytes objects) with plugin; blocks until every result is in.
        plugin is "name" or "name@VERSION" (the highest version the broker
        knows that is VERSION or starts with VERSION and a dot, e.g.
        "granular@1"; jobs go only to workers carrying it).
        Returns the Results in order: genome 0 replicates 0..K-1, genome 1 ...
        Raises an Error (PluginError, NotRecordedError, ...) for a refusal."""
        st = self._submit(plugin, _params_json(params), int(replicates), genomes)
        self._pool._wait(st)
        if st.error is not None:
            raise st.error
        return st.ordered()

    def stream(self, plugin, genomes, params=None, replicates=1):
        """Like evaluate, but yields each Result as soon as it arrives (each
        once, in arrival order)."""
        q = queue.SimpleQueue()
        st = self._submit(plugin, _params_json(params), int(replicates), genomes)
        with self._pool._lock:
            # Results that arrived before the hook was set are queued first.
            for res in list(st.results.values()):
                q.put(res)
            st.on_result = q.put
        given = 0
        while given < st.total:
            st.progress.clear()  # before looking, so a delivery after the look wakes us
            while given < st.total:
                try:
                    res = q.get_nowait()
                except queue.Empty:
                    break
                given += 1
                yield res
            if given >= st.total:
                break
            if st.error is not None:
                raise st.error
            self._pool._step(st.progress)

    def stats(self):
        """This process's counters for the run (fitfarm_run_stats): submitted,
        accepted, delivered, cached, duplicates, resent."""
        s = L.RunStats()
        with self._pool._lock:
            self._check_open()
            rc = L.run_stats(self._h, ctypes.byref(s))
            if rc != 0:
                raise self._pool._error(rc)
        return {f: int(getattr(s, f)) for f, _ in L.RunStats._fields_ if f != "size"}

    def close(self):
        pool = self._pool
        with pool._lock:
            if self._closed:
                return
            self._closed = True
            exc = E.PoolClosedError(0, f"run {self.id} was closed")
            for st in list(self._pending.values()):
                st.error = exc
                self._zombies.append(st.handle)
                st.done.set()
                st.progress.set()
                if st.on_done is not None:
                    st.on_done(st)
            self._pending.clear()
            # Runs first, then their batches: the run may refer to them.
            if pool._h:
                L.run_destroy(ctypes.byref(self._h))
            for h in self._zombies:
                L.batch_destroy(ctypes.byref(h))
            self._zombies.clear()
            if self in pool._runs:
                pool._runs.remove(self)


def _add_genomes(bh, genomes):
    """Adds every genome to the batch; returns how many."""
    n = 0
    if (_np is not None and isinstance(genomes, (list, tuple)) and genomes
            and not isinstance(genomes[0], (bytes, bytearray, memoryview))):
        try:  # equal-length float genomes: one conversion, then the array path
            arr = _np.asarray(genomes, dtype=_np.float64)
            if arr.ndim == 2:
                genomes = arr
        except (ValueError, TypeError):
            pass
    if _np is not None and isinstance(genomes, _np.ndarray):
        arr = _np.ascontiguousarray(genomes, dtype=_np.float64)
        if arr.ndim == 1:
            raise ValueError("genomes must be a sequence of genomes (a 2-D array), "
                             "not one genome")
        if arr.ndim != 2:
            raise ValueError("genomes must be a 2-D array")
        rows, dim = arr.shape
        base = arr.ctypes.data
        stride = dim * 8
        add = L.batch_add_f64_at
        for i in range(rows):
            rc = add(bh, base + i * stride, dim)
            if rc < 0:
                raise E.error_for(int(rc), f"genome {i} was refused: {L.text(L.strerror(int(rc)))}")
        return rows
    for g in genomes:
        if isinstance(g, (bytes, bytearray, memoryview)):
            b = bytes(g)
            rc = L.batch_add_bytes(bh, b, len(b))
        else:
            if _np is not None and isinstance(g, _np.ndarray):
                a = _np.ascontiguousarray(g, dtype=_np.float64)
                rc = L.batch_add_f64(bh, a.ctypes.data_as(ctypes.POINTER(ctypes.c_double)), a.size)
            else:
                vals = [float(v) for v in g]
                arr = (ctypes.c_double * len(vals))(*vals)
                rc = L.batch_add_f64(bh, arr, len(vals))
        if rc < 0:
            raise E.error_for(int(rc), f"genome {n} was refused: {L.text(L.strerror(int(rc)))}")
        n += 1
    return n


class Function:
    """A callable f(x) -> float (objective given) or tuple of floats, made by
    Pool.function(). Calling it evaluates one genome; Pool.map(f, xs) sends a
    whole population as one batch. Every call goes to the same run, opened on
    first use and reused (one round trip per generation)."""

    def __init__(self, pool, plugin, params=None, objective=None, run=None, seed=0, replicates=1,
                 seed_mode="genome", aggregate=None, on_failure="raise"):
        replicates = int(replicates)
        if replicates < 1:
            raise ValueError("replicates must be at least 1")
        if replicates > 1 and aggregate not in ("mean", "median"):
            raise ValueError("replicates > 1 needs aggregate='mean' or 'median' to combine them "
                             "into one value per objective")
        if aggregate not in (None, "mean", "median"):
            raise ValueError(f"aggregate must be None, 'mean' or 'median', not {aggregate!r}")
        if on_failure != "raise" and not isinstance(on_failure, (int, float)):
            raise ValueError("on_failure must be 'raise' or a number to return for failed genomes")
        if objective is not None and (not isinstance(objective, int) or objective < 0):
            raise ValueError("objective must be a non-negative index")
        if seed_mode not in _SEED_MODES:
            raise ValueError(f"seed_mode must be 'genome' or 'common', not {seed_mode!r}")
        self.pool = pool
        self.plugin = plugin
        self.params_json = _params_json(params)
        self.objective = objective
        self.replicates = replicates
        self.aggregate = aggregate
        self.on_failure = on_failure
        self._run_arg = run
        self._seed = seed
        self._seed_mode = seed_mode
        self._run = run if isinstance(run, Run) else None
        self._run_lock = threading.Lock()

    @property
    def run(self):
        """The Run every call of this function goes to (opened on first use)."""
        with self._run_lock:
            if self._run is None or (self._run._closed and not isinstance(self._run_arg, Run)):
                rid = self._run_arg if isinstance(self._run_arg, str) else None
                self._run = self.pool.run(run_id=rid, seed=self._seed, seed_mode=self._seed_mode)
            return self._run

    def __call__(self, x):
        return self._map([x])[0]

    def __repr__(self):
        return f"Function({self.plugin!r}, params={self.params_json!r}, objective={self.objective})"

    def _map(self, xs):
        if _np is not None and isinstance(xs, _np.ndarray) and xs.ndim == 2:
            genomes = xs
        else:
            genomes = [x for x in xs]
        st = self.run._submit(self.plugin, self.params_json, self.replicates, genomes,
                              accept_wait=SYNC_ACCEPT)
        self.pool._wait(st)
        if st.error is not None:
            raise st.error
        if st.replicates == 1:
            return [self._value_one(st.results[(i, 0)], i) for i in range(st.n)]
        return [self._value(st, i) for i in range(st.n)]

    def _value_one(self, r, i):
        """_value for one replicate, the common case, without the combining."""
        if r.status_code != 0:
            if self.on_failure == "raise":
                raise E.EvaluationError(r.status, r.error, i, r.replicate)
            return float(self.on_failure)
        fit = r.fitness
        obj = self.objective
        if obj is None:
            return tuple(map(float, fit))
        if obj >= len(fit):
            raise IndexError(f"objective {obj} out of range: {self.plugin} returned "
                             f"{len(fit)} objective(s)")
        return float(fit[obj])

    def _value(self, st, i):
        reps = [st.results[(i, k)] for k in range(st.replicates)]
        for r in reps:
            if not r.ok:
                if self.on_failure == "raise":
                    raise E.EvaluationError(r.status, r.error, i, r.replicate)
                return float(self.on_failure)
        if len(reps) == 1:
            fit = tuple(float(v) for v in reps[0].fitness)
        else:
            comb = statistics.fmean if self.aggregate == "mean" else statistics.median
            m = len(reps[0].fitness)
            fit = tuple(float(comb([float(r.fitness[j]) for r in reps])) for j in range(m))
        if self.objective is None:
            return fit
        if self.objective >= len(fit):
            raise IndexError(f"objective {self.objective} out of range: {self.plugin} returned "
                             f"{len(fit)} objective(s)")
        return fit[self.objective]


def _ours(fn, args=(), kwargs=None):
    """fn if it is one of our Functions, or a wrapper holding one with no
    extra arguments (scipy's _FunctionWrapper: attributes f and args); else None."""
    if kwargs:
        return None
    if isinstance(fn, Function):
        return fn
    inner = getattr(fn, "f", None)
    if isinstance(inner, Function) and not list(getattr(fn, "args", ()) or ()) and not args:
        return inner
    return None


_live_pools = weakref.WeakSet()


@atexit.register
def _close_all():
    for p in list(_live_pools):
        try:
            p.shutdown(wait=False, cancel_futures=True)
        except Exception:
            pass


class Pool(concurrent.futures.Executor):
    """A pool of workers reached through one libfitfarm client.

    broker None starts the embedded local pool (fitfarm-broker and
    fitfarm-worker as child processes of this one, stopped by shutdown(), by
    leaving the with-block, at exit, or when this process dies). Otherwise
    broker is the broker's client endpoint, reached with CURVE (key: this
    client's secret key file, broker_key: the broker's public key file), or in
    plaintext on loopback/ipc with insecure=True.

    Embedded only: slots (worker slots; None = online CPUs), store (the
    durable store folder; None = a private temporary one), exec_plugins (a
    list of "NAME=COMMAND" external programs), plugin_dir, programs_dir.

    An Executor: submit(f, x) with one of our Functions returns a Future
    completed when the result arrives; map(f, xs) evaluates the whole iterable
    as one batch. Any other callable is evaluated here, in this process
    (builtins.map / a call), exactly as it would be without the pool."""

    def __init__(self, broker=None, key=None, broker_key=None, slots=None, store=None,
                 insecure=False, exec_plugins=None, connect_timeout=10.0, plugin_dir=None,
                 programs_dir=None):
        self._h = None
        self._lock = threading.RLock()
        self._token = threading.Lock()  # held by the thread that waits on the descriptor
        self._runs = []
        self._closed = False
        self._futures = set()
        self._bg = None
        self._bg_wake = threading.Event()
        self.broker = broker
        enc = lambda s: None if s is None else str(s).encode()
        self._keep = [enc(broker), enc(key), enc(broker_key), enc(store), enc(plugin_dir),
                      enc(programs_dir)]
        o = L.Options()
        o.broker, o.key_file, o.broker_key_file, o.store_dir, o.plugin_dir, o.programs_dir = self._keep
        o.slots = int(slots or 0)
        o.insecure = 1 if insecure else 0
        o.connect_timeout_ms = max(1, int(connect_timeout * 1000)) if connect_timeout else 0
        if exec_plugins:
            specs = [enc(s) for s in exec_plugins]
            arr = (ctypes.c_char_p * (len(specs) + 1))(*specs, None)
            self._keep.append(arr)
            o.exec_plugins = ctypes.cast(arr, ctypes.POINTER(ctypes.c_char_p))
        h = ctypes.c_void_p()
        err = ctypes.create_string_buffer(1024)
        rc = L.client_new(ctypes.byref(o), ctypes.byref(h), err, len(err))
        if rc != 0:
            raise E.error_for(rc, L.text(err.value) or L.text(L.strerror(rc)))
        self._h = h
        self.endpoint = L.text(L.client_endpoint(h))
        fd = ctypes.c_int(-1)
        self._fd = fd.value if L.client_fd(h, ctypes.byref(fd)) == 0 and fd.value >= 0 else None
        _live_pools.add(self)

    # ---- lifecycle ----------------------------------------------------------
    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.shutdown(wait=exc[0] is None, cancel_futures=exc[0] is not None)
        return False

    def __del__(self):
        try:
            self.shutdown(wait=False, cancel_futures=True)
        except Exception:
            pass

    def _check_open(self):
        if self._closed or not self._h:
            raise E.PoolClosedError(0, "the pool was shut down")

    def _error(self, rc):
        msg = L.text(L.client_error(self._h)) if self._h else ""
        return E.error_for(rc, msg or L.text(L.strerror(rc)))

    def shutdown(self, wait=True, *, cancel_futures=False):
        """Waits for outstanding futures (wait=True), then closes every run and
        destroys the client, which stops an embedded pool's processes."""
        if self._closed:
            return
        if wait and not cancel_futures:
            for fut in list(self._futures):
                try:
                    fut.exception()
                except concurrent.futures.CancelledError:
                    pass
        with self._lock:
            if self._closed:
                return
            self._closed = True
            for run in list(self._runs):
                run.close()
            if self._h:
                L.client_destroy(ctypes.byref(self._h))
            self._h = None
        self._bg_wake.set()
        for fut in list(self._futures):
            if not fut.done():
                fut.set_exception(E.PoolClosedError(0, "the pool was shut down"))
        self._futures.clear()
        _live_pools.discard(self)

    # ---- waiting --------------------------------------------------------------
    def _drain_all(self):
        """Under the lock: lets the library work, then drains every run."""
        got = 0
        for _ in range(64):
            n = L.client_process(self._h)
            d = 0
            for run in list(self._runs):
                d += run._drain()
            got += d
            if n <= 0 and d == 0:
                break
        return got

    def _pump(self, wait_s):
        """One leader step: deliver what is ready, else wait up to wait_s for
        the descriptor and deliver what then arrived."""
        with self._lock:
            self._check_open()
            if self._drain_all():
                return
            nt = L.client_next_timeout(self._h)
            fd = self._fd
            if fd is None:
                # No descriptor: wait inside the library on one run.
                for run in self._runs:
                    if run._pending:
                        r = L.CResult()
                        rc = L.poll(run._h, ctypes.byref(r), int(wait_s * 1000))
                        if rc > 0:
                            run._deliver(r)
                        elif rc < 0:
                            run._fail_refused(rc)
                        return
        w = wait_s if nt < 0 else min(wait_s, nt / 1000.0)
        if fd is not None and w > 0:
            select.select([fd], [], [], w)
        with self._lock:
            self._check_open()
            self._drain_all()

    def _step(self, event):
        """One slice of waiting for event: as leader, or as follower."""
        if self._token.acquire(blocking=False):
            try:
                self._pump(WAIT_SLICE_S)
            finally:
                self._token.release()
        else:
            event.wait(FOLLOWER_SLICE_S)

    def _wait(self, st):
        while not st.done.is_set():
            if self._closed:
                raise E.PoolClosedError(0, "the pool was shut down")
            if self._token.acquire(blocking=False):
                try:
                    while not st.done.is_set():
                        self._pump(WAIT_SLICE_S)
                finally:
                    self._token.release()
            else:
                st.done.wait(FOLLOWER_SLICE_S)

    def _background(self):
        """Drives results while futures are outstanding."""
        while not self._closed:
            if not self._futures:
                self._bg_wake.wait(WAIT_SLICE_S)
                self._bg_wake.clear()
                continue
            try:
                self._step(self._bg_wake)
            except E.PoolClosedError:
                return
            except Exception as e:  # a library failure ends every outstanding future
                for fut in list(self._futures):
                    if not fut.done():
                        fut.set_exception(e)
                self._futures.clear()

    # ---- public ------------------------------------------------------------
    def run(self, run_id=None, seed=0, replay=False, seed_mode="genome", no_cache=False,
            timeout=None, attempts=None, retry_failed=False, weight=1):
        """Opens (or resumes, when run_id exists in the store) a run. replay:
        answer only from what the run recorded, never simulate (a request it
        never saw raises NotRecordedError). timeout: per-evaluation limit in
        seconds; attempts: tries of an evaluation that crashes or times out;
        retry_failed: a resumed request the run recorded as crashed or timed out
        is evaluated again. weight: the run's share of the pool while other
        runs wait too (runs are served in turn, weight jobs from this one per
        turn; 1 to 1000)."""
        return Run(self, run_id, seed, replay, seed_mode, no_cache, timeout, attempts,
                   retry_failed, weight)

    def function(self, plugin, params=None, objective=None, run=None, seed=0, replicates=1,
                 seed_mode="genome", aggregate=None, on_failure="raise"):
        """A callable for optimizers: f(x) -> float (objective: an index) or a
        tuple of floats (objective None). plugin: "name" or "name@VERSION" as
        for evaluate. run: None (a new run with seed and
        seed_mode), a run id (resumed), or a Run. replicates > 1 needs
        aggregate "mean" or "median" (over the replicates, per objective).
        on_failure: "raise" (EvaluationError) or a number returned for a
        genome any replicate of which is not ok."""
        return Function(self, plugin, params, objective, run, seed, replicates, seed_mode,
                        aggregate, on_failure)

    def map(self, fn, *iterables, timeout=None, chunksize=1):
        """With one of our Functions (or scipy's wrapper of one): evaluates the
        whole iterable as one batch, in its run, and returns the values in
        order (a list). Any other callable runs here, in this process, as
        builtins.map would (a list too)."""
        f = _ours(fn)
        if f is not None and len(iterables) == 1:
            if f.pool is not self:
                raise ValueError("this function belongs to another Pool")
            return f._map(iterables[0])
        return list(builtins.map(fn, *iterables))

    def submit(self, fn, /, *args, **kwargs):
        """submit(f, x) with one of our Functions: a Future that completes when
        x's result arrives. Any other callable is called here, now, and its
        Future is returned already done."""
        f = _ours(fn, args[1:], kwargs)
        if f is None or len(args) != 1:
            fut = concurrent.futures.Future()
            fut.set_running_or_notify_cancel()
            try:
                fut.set_result(fn(*args, **kwargs))
            except BaseException as e:
                fut.set_exception(e)
            return fut
        if f.pool is not self:
            raise ValueError("this function belongs to another Pool")
        self._check_open()
        fut = concurrent.futures.Future()
        fut.set_running_or_notify_cancel()

        def done(st, fut=fut, f=f):
            self._futures.discard(fut)
            if fut.done():
                return
            if st.error is not None:
                fut.set_exception(st.error)
                return
            try:
                fut.set_result(f._value(st, 0))
            except Exception as e:
                fut.set_exception(e)

        run = f.run
        with self._lock:
            st = run._submit(f.plugin, f.params_json, f.replicates, [args[0]], accept_wait=False)
            self._futures.add(fut)
            if st.done.is_set():
                done(st)
            else:
                st.on_done = done
            if self._bg is None:
                self._bg = threading.Thread(target=self._background, name="fitfarm-results",
                                            daemon=True)
                self._bg.start()
        self._bg_wake.set()
        return fut

    def status(self, timeout=10.0):
        """The broker's status: {"workers": [...], "runs": [...], "warnings": [...]}."""
        sh = ctypes.c_void_p()
        with self._lock:
            self._check_open()
            rc = L.status_get(self._h, int(timeout * 1000), ctypes.byref(sh))
            if rc != 0:
                raise self._error(rc)
            try:
                out = {"workers": [], "runs": [], "warnings": []}
                for i in range(L.status_n_workers(sh)):
                    w = L.WorkerInfo()
                    if L.status_worker(sh, i, ctypes.byref(w)) == 0:
                        out["workers"].append({
                            "name": L.text(w.name), "host": L.text(w.host),
                            "arch": L.text(w.arch), "slots": w.slots, "busy": w.busy,
                            "plugins": [L.text(w.plugins[j]) for j in range(w.n_plugins)],
                            "speed": w.speed, "state": L.text(w.state),
                            "median_seconds": [w.median_seconds[j]
                                               for j in range(w.n_plugins)]})
                for i in range(L.status_n_runs(sh)):
                    r = L.RunInfo()
                    if L.status_run(sh, i, ctypes.byref(r)) == 0:
                        d = {f: int(getattr(r, f)) for f, _ in L.RunInfo._fields_
                             if f not in ("size", "run_id")}
                        d["run_id"] = L.text(r.run_id)
                        out["runs"].append(d)
                for i in range(L.status_n_warnings(sh)):
                    out["warnings"].append(L.text(L.status_warning(sh, i)))
                return out
            finally:
                L.status_destroy(ctypes.byref(sh))
