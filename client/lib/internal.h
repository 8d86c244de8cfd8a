/* internal.h: the private layout of the client library's objects, shared by
 * the files of client/lib/ and nothing else (not API: only fitfarm.h is).
 *
 * Ownership map: a client owns its ZeroMQ context and socket, the embedded pool
 * (if any) and the list of open runs (borrowed links, each run unlinks itself
 * on destroy). A run owns its outstanding SUBMIT chunks and its poll queue; it
 * links (borrows) the batches submitted through it. A batch owns its genomes
 * and the results that arrived for them. */
#ifndef CLIENT_INTERNAL_H
#define CLIENT_INTERNAL_H

#include <stddef.h>
#include <stdint.h>
#include <string.h>

#include "client/include/fitfarm.h"
#include "msg.h"
#include "names.h"
#include "pool.h"

#define CLIENT_ERR_BYTES 1200

/* Copies a filled full-size public struct into the caller's, only as far as
 * the caller's size field says (ABI growth: see fitfarm.h). */
#define CLIENT_COPY_OUT(out, full)                                                             \
    memcpy((out), &(full), (out)->size < sizeof(full) ? (out)->size : sizeof(full))
/* Reads a caller's public struct into a zeroed full-size one. */
#define CLIENT_COPY_IN(full, in)                                                               \
    do {                                                                                       \
        memset(&(full), 0, sizeof(full));                                                      \
        memcpy(&(full), (in), (in)->size < sizeof(full) ? (in)->size : sizeof(full));          \
    } while (0)

/* Chunk caps of one SUBMIT: small enough that the broker validates and commits
 * a chunk in one loop turn, large enough that messages stay few. */
#define CLIENT_CHUNK_ITEMS 4096u
#define CLIENT_CHUNK_BYTES (8u * 1024u * 1024u)

/* Life of one request slot (genome index, replicate) of a batch. */
enum {
    CLIENT_SLOT_UNSENT = 0,   /* not sent, or sent and refused / timed out */
    CLIENT_SLOT_SENT = 1,     /* in a SUBMIT chunk waiting for ACCEPTED/REFUSED */
    CLIENT_SLOT_ACCEPTED = 2, /* the broker holds it; result not yet here */
    CLIENT_SLOT_ARRIVED = 3,  /* result stored; later copies are duplicates */
};

typedef struct {
    uint8_t state; /* CLIENT_SLOT_* */
    uint8_t status;
    uint8_t cached;
    uint64_t seed;
    uint8_t key[PROTO_KEY_BYTES];
    uint32_t n_fitness;
    double *fitness; /* owned; NULL when n_fitness is 0 */
    char *error;     /* owned; NULL means "" */
    const char *worker, *host; /* in the batch's names; NULL means "" */
    double cpu_seconds;
    uint64_t peak_rss_kb;
    double finished_at;
} client_slot_t;

struct fitfarm_batch {
    char *plugin;
    char *params; /* canonical JSON */
    unsigned replicates;
    size_t n;     /* genomes */
    size_t cap;
    uint8_t **genomes;
    uint32_t *genome_len;
    client_slot_t *slots; /* n * replicates once submitted, index*replicates + r */
    client_names_t names; /* the slots' worker and host names */
    size_t arrived;       /* slots in state ARRIVED */
    int streaming;        /* results also go to the run's poll queue */
    fitfarm_run_t *run;   /* borrowed; NULL until submitted or after the run ended */
    uint64_t tag_base;    /* tag of slot s is tag_base + s */
};

/* One SUBMIT message in flight: which slots of which batch it carries. */
typedef struct {
    uint64_t batch_tag;
    fitfarm_batch_t *batch;
    uint32_t n_slots;
    uint32_t *slots;
    int answered;    /* 0 waiting, 1 accepted, 2 refused */
    int background;  /* a re-send after reconnect: nobody waits for it */
    int detached;    /* submit returned before its answer: handled in the background */
    uint32_t refuse_code;
    char *refuse_text;
    int refuse_has_tag; /* the refusal named one request of the chunk */
    uint64_t refuse_tag;
} client_chunk_t;

typedef struct {
    fitfarm_batch_t *batch;
    size_t slot;
} client_ready_t;

struct fitfarm_run {
    fitfarm_client_t *client; /* borrowed; NULL once the client is gone */
    fitfarm_run_t *next;      /* in client->runs */
    char *id;
    uint64_t seed;
    uint32_t seed_mode;
    uint32_t flags;
    unsigned timeout_s;
    unsigned attempts;
    uint64_t next_tag;
    fitfarm_batch_t **batches; /* submitted, ascending tag_base */
    size_t n_batches, cap_batches;
    client_chunk_t *chunks;
    size_t n_chunks, cap_chunks;
    client_ready_t *ready; /* poll queue (streaming batches) */
    size_t ready_head, ready_len, ready_cap;
    int64_t retry_at_ms;    /* re-send again then (a restarted broker refused); 0 = no */
    int64_t retry_until_ms; /* give up retrying after this */
    uint64_t n_duplicates; /* results dropped as already delivered */
    uint64_t n_resent;     /* requests re-sent after a reconnect or refusal */
    int async_rc; /* a background refusal to report on the next poll/evaluate */
    char async_err[CLIENT_ERR_BYTES];
    fitfarm_run_stats_t stats; /* public counters (duplicates and resent above) */
    /* the last refusal, structured (fitfarm_refusal) */
    int refusal_code;
    int refusal_has_request;
    const fitfarm_batch_t *refusal_batch; /* borrowed; cleared when that batch leaves */
    size_t refusal_slot;
    char refusal_text[CLIENT_ERR_BYTES];
};

/* Encoded messages the core produced and the transport has not yet handed
 * to the socket (it was full), oldest first. */
typedef struct {
    uint8_t *buf;
    size_t len;
} client_frame_t;

struct fitfarm_client {
    client_frame_t *outbox;
    size_t out_head, out_len, out_cap;
    void *zctx;
    void *sock;
    void *monitor; /* PAIR socket receiving connect/disconnect events */
    char *endpoint;
    client_pool_t *pool; /* embedded pool, or NULL */
    fitfarm_run_t *runs;
    proto_limits_t limits;
    int connect_timeout_ms;
    uint64_t next_batch_tag;
    proto_msg_t *status; /* latest STATUS, owned */
    uint64_t status_count;
    int disconnected;    /* seen a DISCONNECTED since the last CONNECTED */
    int reconnected;     /* CONNECTED after a drop: re-send unfinished work */
    char err[CLIENT_ERR_BYTES];
};

/* Sets self->err from a printf format; returns code (for "return s_fail(...)"). */
int client_fail(fitfarm_client_t *self, int code, const char *fmt, ...)
    __attribute__((format(printf, 3, 4)));

/* The core's only way out: encodes msg into the outbox; the transport sends
 * it at the next flush. Never blocks, never touches the socket. Returns 0,
 * FITFARM_ENOMEM or FITFARM_EINVAL (msg out of protocol), error set. */
int client_emit(fitfarm_client_t *self, const proto_msg_t *msg);

/* Transport: hands queued messages to the socket until it is full, waiting
 * up to timeout_ms (0: not at all) for room. Returns 0 or a FITFARM_E* code
 * (FITFARM_ETIMEDOUT when messages are still queued after a positive wait). */
int client_flush(fitfarm_client_t *self, int timeout_ms);

/* Waits up to timeout_ms (0: just look) for one message or socket event and
 * dispatches it to its run. Returns 1 if something was handled, 0 on time-out,
 * or a FITFARM_E* code (error set). */
int client_pump(fitfarm_client_t *self, int timeout_ms);

/* Asks the broker for STATUS and waits up to timeout_ms (negative: no limit).
 * On success *status_out is a PROTO_STATUS message the caller destroys. */
int client_status(fitfarm_client_t *self, proto_msg_t **status_out, int timeout_ms);

/* Run side of the dispatch (run.c). */
fitfarm_run_t *client_run_find(fitfarm_client_t *self, const char *run_id);
void client_run_on_results(fitfarm_run_t *run, const proto_results_t *results);
/* ACCEPTED (refused NULL) or REFUSED for the chunk sent as batch_tag. */
void client_run_on_answer(fitfarm_client_t *self, uint64_t batch_tag,
                          const proto_refused_t *refused);
void client_run_resend(fitfarm_run_t *run);

/* Submitting, in the core's steps (run.c); the waiting is blocking.c's.
 * start: registers the batch with the run (first time), cuts its unsent
 * slots into chunks and emits them; re-attaches chunks an earlier submit
 * left waiting. Returns 0, or FITFARM_EINVAL (misuse; again: a batch
 * already submitted is fine) or FITFARM_ENOMEM. */
int client_run_submit_start(fitfarm_run_t *run, fitfarm_batch_t *b, int streaming, int again);
/* 1 while a chunk of b sent by the current submit has no answer. */
int client_run_submit_pending(const fitfarm_run_t *run, const fitfarm_batch_t *b);
/* After the wait ended with rc: turns the first refusal into the returned
 * code and the error sentence, detaches chunks still unanswered (rc 0 or
 * ETIMEDOUT) and forgets the rest. Returns the final code. */
int client_run_submit_finish(fitfarm_run_t *run, fitfarm_batch_t *b, int rc);
/* A background refusal to report now (error set), or 0. */
int client_run_take_async(fitfarm_run_t *run);
/* Takes the next streamed result into out (1), or 0 when none is ready. */
int client_run_next_ready(fitfarm_run_t *run, fitfarm_result_t *out);

/* Batch side (batch.c). */
int client_batch_prepare(fitfarm_batch_t *batch); /* allocates slots */
/* Stores one result; returns 1 if new, 0 for a duplicate, negative on ENOMEM. */
/* seed: the request's own evaluation seed, reported in its result. */
int client_batch_store(fitfarm_batch_t *batch, size_t slot, const proto_result_t *r,
                       uint64_t seed);
void client_batch_fill(const fitfarm_batch_t *batch, size_t slot, fitfarm_result_t *out);
void client_batch_detach(fitfarm_batch_t *batch);

/* Milliseconds left until deadline (negative deadline: no limit, returns -1). */
int client_ms_left(int64_t deadline);
int64_t client_deadline(int timeout_ms);

#endif
