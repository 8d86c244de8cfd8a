/* handshake.h: what the worker learns of a refused connection. A broker that
 * refuses our key (not on its workers.allow, or a client key) answers the
 * CURVE handshake with an error and drops us; ZeroMQ then reconnects for
 * ever, so without this the worker would sit silent. libzmq's socket monitor
 * reports each failed handshake (ZMQ_EVENT_HANDSHAKE_FAILED_AUTH: the ZAP
 * handler said no; _PROTOCOL / _NO_DETAIL: a wrong broker key, a plaintext
 * peer); the worker logs the first and then one line per 30 seconds with a
 * count, and one line when a handshake succeeds again. Not here: the CURVE
 * options themselves (secure.c). Single-threaded, the worker's loop only. */
#ifndef WORKER_HANDSHAKE_H
#define WORKER_HANDSHAKE_H

#include <stdint.h>

#define WORKER_HANDSHAKE_QUIET_MS 30000 /* repeated refusals: one line per this long */

typedef struct {
    void *pair;          /* receives sock's monitor events; NULL: not monitored */
    const char *endpoint; /* borrowed: the broker endpoint, for the log */
    int64_t last_log_ms;
    uint64_t quiet;      /* failures not logged since the last line */
    int refused;         /* the last handshake failed */
} worker_handshake_t;

/* Starts monitoring sock's handshakes (before zmq_connect). Returns 0, or -1
 * (logged; the worker runs on without it). */
int worker_handshake_open(worker_handshake_t *h, void *ctx, void *sock, const char *endpoint);

/* Reads the events that arrived and logs them as above. */
void worker_handshake_handle(worker_handshake_t *h);

/* Closes the monitor socket (before zmq_ctx_term). Accepts one never opened. */
void worker_handshake_close(worker_handshake_t *h);

#endif
