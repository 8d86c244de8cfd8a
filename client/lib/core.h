/* core.h: the state the client library's core shares between its runs,
 * with no I/O: the open runs, the counter of SUBMIT chunk tags, the outbox
 * of encoded messages to send, and the last error sentence. The core (run.c,
 * batch.c) is fed decoded messages and emits messages here; the transport
 * (client.h) takes them out and hands them to the socket. Internal, not API.
 *
 * Layers, each using only those below it: the public blocking calls
 * (blocking.c, status.c) -> the client object and transport (client.c,
 * secure.c, pool.c) -> the runs (run.c) -> this state and the batches (core.c,
 * batch.c) -> ring.c, names.c, proto. */
#ifndef CLIENT_CORE_H
#define CLIENT_CORE_H

#include <stddef.h>
#include <stdint.h>

#include "client/include/fitfarm.h"
#include "msg.h"
#include "sized.h"

/* One encoded message the core produced and the transport has not yet
 * handed to the socket. */
typedef struct {
    uint8_t *buf;
    size_t len;
} client_frame_t;

typedef struct {
    fitfarm_run_t *runs;     /* open runs (run.c links and unlinks them) */
    uint64_t next_batch_tag; /* of the next SUBMIT chunk; starts at 1 */
    client_frame_t *outbox;  /* ring, oldest first */
    size_t out_head, out_len, out_cap;
    char err[CLIENT_ERR_BYTES];
} client_core_t;

void client_core_init(client_core_t *self);
/* Frees the queued messages. The runs are detached first (client_runs_detach). */
void client_core_fini(client_core_t *self);

/* Sets the error sentence from a printf format; returns code (for
 * "return client_core_fail(...)"). */
int client_core_fail(client_core_t *self, int code, const char *fmt, ...)
    __attribute__((format(printf, 3, 4)));

/* The core's only way out: encodes msg into the outbox. Never blocks, never
 * touches a socket. Returns 0, FITFARM_ENOMEM or FITFARM_EINVAL (msg out of
 * protocol), error set. */
int client_core_emit(client_core_t *self, const proto_msg_t *msg);

/* The oldest queued message (borrowed), or NULL when the outbox is empty;
 * client_core_drop_frame frees it once the socket took it. */
const client_frame_t *client_core_peek_frame(const client_core_t *self);
void client_core_drop_frame(client_core_t *self);

#endif
