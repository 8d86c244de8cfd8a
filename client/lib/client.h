/* client.h: the client object's private layout and its transport: the
 * connection to a broker (remote, or the embedded pool's), the flush of the
 * core's outbox to the socket, and the pump that decodes what the broker
 * says and feeds it to the runs (see client.c). Internal, not API.
 *
 * Ownership: a client owns its core state (core.h: the outbox, the list of
 * runs it borrows), its ZeroMQ context and socket, the embedded pool (if
 * any) and the latest STATUS. */
#ifndef CLIENT_CLIENT_H
#define CLIENT_CLIENT_H

#include <stdint.h>

#include "common/keyfile.h"
#include "core.h"
#include "msg.h"
#include "pool.h"

struct fitfarm_client {
    client_core_t core; /* runs, outbox, error sentence */
    void *zctx;
    void *sock;
    void *monitor; /* PAIR socket receiving connect/disconnect events */
    char *endpoint;
    client_pool_t *pool; /* embedded pool, or NULL */
    proto_limits_t limits;
    int connect_timeout_ms;
    proto_msg_t *status; /* latest STATUS, owned */
    uint64_t status_count;
    int disconnected;    /* seen a DISCONNECTED since the last CONNECTED */
    int reconnected;     /* CONNECTED after a drop: re-send unfinished work */
    /* What the handshake said, so a refusal is reported as what it is,
     * not as silence (see s_handshake_reason in client.c). */
    int curve;               /* this client speaks CURVE (secure.c) */
    char fingerprint[COMMON_KEY_FINGERPRINT]; /* of its public key, when curve */
    char broker_key_file[512];                /* --broker-key, for the sentence */
    unsigned hs_connects;    /* TCP/ipc connections made */
    unsigned hs_succeeded;   /* security handshakes completed */
    unsigned hs_failed_event;/* last ZMQ_EVENT_HANDSHAKE_FAILED_*, 0 = none */
    uint32_t hs_failed_value;/* its value: ZAP status code or protocol error */
    unsigned hs_failed_runs; /* handshake failures since the last success */
};

/* Sets the client's error sentence from a printf format; returns code. */
int client_fail(fitfarm_client_t *self, int code, const char *fmt, ...)
    __attribute__((format(printf, 3, 4)));

/* Hands queued messages to the socket until it is full, waiting up to
 * timeout_ms (0: not at all) for room. Returns 0 or a FITFARM_E* code
 * (FITFARM_ETIMEDOUT when messages are still queued after a positive wait). */
int client_flush(fitfarm_client_t *self, int timeout_ms);

/* Waits up to timeout_ms (0: just look) for one message or socket event and
 * dispatches it to its run. Returns 1 if something was handled, 0 on time-out,
 * or a FITFARM_E* code (error set). */
int client_pump(fitfarm_client_t *self, int timeout_ms);

/* Asks the broker for STATUS and waits up to timeout_ms (negative: no limit).
 * On success *status_out is a PROTO_STATUS message the caller destroys. */
int client_status(fitfarm_client_t *self, proto_msg_t **status_out, int timeout_ms);

/* Milliseconds left until deadline (negative deadline: no limit, returns -1). */
int client_ms_left(int64_t deadline);
int64_t client_deadline(int timeout_ms);

#endif
