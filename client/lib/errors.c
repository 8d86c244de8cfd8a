/* errors.c: static texts of the public codes and statuses, and the version.
 * Not here: per-client error sentences (client.c). */
#include "client/include/fitfarm.h"

FITFARM_API const char *fitfarm_strerror(int code)
{
    switch (code) {
    case FITFARM_OK: return "success";
    case FITFARM_EINVAL: return "invalid argument";
    case FITFARM_ENOMEM: return "out of memory";
    case FITFARM_ETIMEDOUT: return "timed out";
    case FITFARM_ECONNECT: return "cannot reach or start the pool";
    case FITFARM_EPROTO: return "the broker answered out of protocol";
    case FITFARM_EREFUSED: return "the broker refused the request";
    case FITFARM_EPLUGIN: return "the pool has no such plugin";
    case FITFARM_EQUEUEFULL: return "the queue is full";
    case FITFARM_ESYSTEM: return "an operating-system call failed";
    case FITFARM_ENOTRECORDED: return "the run never recorded this request";
    default: return "unknown error";
    }
}

FITFARM_API const char *fitfarm_status_name(int status)
{
    switch (status) {
    case FITFARM_STATUS_OK: return "ok";
    case FITFARM_STATUS_INVALID: return "invalid";
    case FITFARM_STATUS_FAILED: return "failed";
    case FITFARM_STATUS_CRASHED: return "crashed";
    case FITFARM_STATUS_TIMEOUT: return "timeout";
    default: return "unknown";
    }
}

FITFARM_API const char *fitfarm_version(void)
{
    return FITFARM_VERSION_STRING;
}
