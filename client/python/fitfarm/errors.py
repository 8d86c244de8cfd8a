"""Exceptions of the fitfarm package. Importing this module does not load
libfitfarm, so simulators (fitfarm.simulator) can use the package without it.

Every library failure is an Error carrying the library's code (a negative
FITFARM_E* number) and its sentence (fitfarm_client_error, or the broker's
refusal text). A genome whose evaluation did not end "ok" is an
EvaluationError (only raised when the caller asked for on_failure="raise")."""

# The codes of client/include/fitfarm.h (the C contract).
OK = 0
EINVAL = -1
ENOMEM = -2
ETIMEDOUT = -3
ECONNECT = -4
EPROTO = -5
EREFUSED = -6
EPLUGIN = -7
EQUEUEFULL = -8
ESYSTEM = -9
ENOTRECORDED = -10


class Error(Exception):
    """A libfitfarm call failed. code: the FITFARM_E* code; message: the
    library's sentence."""

    def __init__(self, code, message):
        self.code = code
        self.message = message
        super().__init__(message)


class InvalidArgumentError(Error, ValueError):
    """FITFARM_EINVAL: the library refused an argument."""


class ConnectError(Error, ConnectionError):
    """FITFARM_ECONNECT: the pool cannot be reached or started."""


class ProtocolError(Error):
    """FITFARM_EPROTO: the broker answered out of protocol."""


class RefusedError(Error):
    """FITFARM_EREFUSED: the broker refused a request."""


class PluginError(RefusedError):
    """FITFARM_EPLUGIN: the pool has no such plugin (the message lists the
    plugins it has)."""


class QueueFullError(RefusedError):
    """FITFARM_EQUEUEFULL: over the run's or client's queue cap."""


class NotRecordedError(RefusedError):
    """FITFARM_ENOTRECORDED: a replay asked for a request the run never saw."""


class TimeoutError(Error, TimeoutError):  # noqa: A001 (also a builtins.TimeoutError)
    """FITFARM_ETIMEDOUT, or a wait of this package that ran out."""


class SystemCallError(Error, OSError):
    """FITFARM_ESYSTEM: an operating-system call failed."""


class OutOfMemoryError(Error, MemoryError):
    """FITFARM_ENOMEM."""


class PoolClosedError(Error, RuntimeError):
    """The Pool (or Run) was shut down; no library code, code is 0."""


class EvaluationError(Exception):
    """A genome's evaluation ended with a status other than "ok" and the
    function was made with on_failure="raise". status: "invalid", "failed",
    "crashed" or "timeout"; error: the worker's sentence; index: the genome's
    position in its batch; replicate: the replicate that failed."""

    def __init__(self, status, error, index=0, replicate=0):
        self.status = status
        self.error = error
        self.index = index
        self.replicate = replicate
        super().__init__(f"genome {index} replicate {replicate}: {status}: {error}")


_BY_CODE = {
    EINVAL: InvalidArgumentError,
    ENOMEM: OutOfMemoryError,
    ETIMEDOUT: TimeoutError,
    ECONNECT: ConnectError,
    EPROTO: ProtocolError,
    EREFUSED: RefusedError,
    EPLUGIN: PluginError,
    EQUEUEFULL: QueueFullError,
    ESYSTEM: SystemCallError,
    ENOTRECORDED: NotRecordedError,
}


def error_for(code, message):
    """The exception for a library code (an Error subclass)."""
    return _BY_CODE.get(code, Error)(code, message)
