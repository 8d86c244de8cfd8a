"""A Python simulator joins a fitfarm pool through the worker's exec plugin:

    import fitfarm.simulator

    def evaluate(genome, params, seed):        # any subset of these names
        return [sum(x * x for x in genome)]    # a float or objectives floats

    fitfarm.simulator.serve(evaluate, name="mysim", version="1.0", objectives=1)

and on the worker:  fitfarm-worker ... --exec 'mysim=/usr/bin/python3 /path/mysim.py'
(or fitfarm.Pool(exec_plugins=["mysim=/usr/bin/python3 /path/mysim.py"])).

serve() speaks version 1 of the exec protocol (worker/exec_plugin.h): it
writes the introduction line, then answers each request line (genome, seed as
a decimal string, params) with exactly one line: {"fitness": [...]}, or
{"invalid": why} when evaluate raises Invalid (a bad request: not retried), or
{"error": why} for any other exception or a result that is not `objectives`
finite numbers. Nothing else is ever written to stdout: while evaluate runs,
sys.stdout is redirected to stderr (which lands in the worker's log), so a
stray print() cannot break the protocol. It returns when stdin closes.

This module does not load libfitfarm."""
import inspect
import json
import math
import sys

PROTOCOL = 1


class Invalid(Exception):
    """Raise from evaluate for a bad request (genome length or range,
    params): the result's status is "invalid" and it is not retried."""


def _caller(evaluate):
    """Adapts evaluate to f(genome, params, seed) whatever subset of those
    parameter names it takes (positional-only functions get the genome)."""
    try:
        sig = inspect.signature(evaluate)
    except (TypeError, ValueError):
        return lambda g, p, s: evaluate(g)
    names = sig.parameters
    takes_kw = any(p.kind == p.VAR_KEYWORD for p in names.values())
    want_params = takes_kw or "params" in names
    want_seed = takes_kw or "seed" in names

    def call(g, p, s):
        kw = {}
        if want_params:
            kw["params"] = p
        if want_seed:
            kw["seed"] = s
        return evaluate(g, **kw)
    return call


def _fitness(value, objectives):
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        vals = [value]
    else:
        try:
            vals = list(value)
        except TypeError:
            raise ValueError(f"evaluate returned {type(value).__name__}, not a number or "
                             "a sequence of numbers") from None
    if len(vals) != objectives:
        raise ValueError(f"evaluate returned {len(vals)} values; the simulator declared "
                         f"{objectives} objectives")
    out = []
    for i, v in enumerate(vals):
        if isinstance(v, bool):
            raise ValueError(f"objective {i} is a boolean, not a number")
        x = float(v)
        if not math.isfinite(x):
            raise ValueError(f"objective {i} is {x!r}, not a finite number")
        out.append(x)
    return out


def answer(line, call, objectives, as_array=False):
    """The answer (a dict) to one request line. For tests and for callers
    with their own loop."""
    try:
        req = json.loads(line)
        if not isinstance(req, dict) or not isinstance(req.get("genome"), list):
            return {"invalid": "the request is not an object with a genome list"}
        genome = [float(x) for x in req["genome"]]
        seed = int(req.get("seed", "0"))
        params = req.get("params") or {}
    except (ValueError, TypeError) as e:
        return {"invalid": f"unreadable request: {e}"}
    if as_array:
        import numpy
        genome = numpy.array(genome, dtype=numpy.float64)
    try:
        return {"fitness": _fitness(call(genome, params, seed), objectives)}
    except Invalid as e:
        return {"invalid": str(e) or "invalid request"}
    except Exception as e:  # any failure of the simulation becomes status "failed"
        return {"error": f"{type(e).__name__}: {e}"}


def serve(evaluate, name, version, objectives=1, deterministic=True, as_array=False,
          stdin=None, stdout=None):
    """Serves evaluate over the exec protocol until stdin closes.

    evaluate(genome, params, seed): genome a list of floats (a numpy array with
    as_array=True), params the job's dict, seed the evaluation seed (int);
    it may take any subset of these by name. Returns a float or a sequence of
    `objectives` floats. version must change whenever results may change;
    deterministic=False when results depend on the seed."""
    if not isinstance(objectives, int) or not 1 <= objectives <= 64:
        raise ValueError("objectives must be an integer in 1..64")
    version = str(version)
    if not 1 <= len(version) <= 127 or not all(" " <= c <= "~" for c in version):
        raise ValueError("version must be 1 to 127 printable ASCII characters")
    inp = stdin if stdin is not None else sys.stdin
    out = stdout if stdout is not None else sys.stdout
    real_stdout = sys.stdout
    sys.stdout = sys.stderr  # stray prints go to the worker's log, never to the protocol
    call = _caller(evaluate)

    def send(obj):
        out.write(json.dumps(obj, allow_nan=False, separators=(",", ":")) + "\n")
        out.flush()

    try:
        send({"fitfarm_exec": PROTOCOL, "name": str(name), "version": version,
              "objectives": objectives, "deterministic": bool(deterministic)})
        for line in inp:
            if not line.strip():
                continue
            send(answer(line, call, objectives, as_array))
    except (BrokenPipeError, KeyboardInterrupt):
        pass
    finally:
        sys.stdout = real_stdout
