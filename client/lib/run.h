/* run.h: a run's private layout and the core's handling of runs: tags,
 * SUBMIT chunks, ACCEPTED/REFUSED answers, RESULTS stored exactly once,
 * ACKs, re-sends after a reconnect (see run.c). No I/O: fed decoded
 * messages, it emits into the core's outbox (core.h). Internal, not API.
 *
 * Ownership: a run owns its chunks and its poll queue and borrows the
 * batches submitted through it; the core's list of runs borrows the runs
 * (each unlinks itself on destroy). */
#ifndef CLIENT_RUN_H
#define CLIENT_RUN_H

#include <stddef.h>
#include <stdint.h>

#include "batch.h"
#include "core.h"

/* Chunk caps of one SUBMIT: small enough that the broker validates and commits
 * a chunk in one loop turn, large enough that messages stay few. */
#define CLIENT_CHUNK_ITEMS 4096u
#define CLIENT_CHUNK_BYTES (8u * 1024u * 1024u)

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
    client_core_t *core;      /* borrowed; NULL once the client is gone */
    fitfarm_client_t *client; /* the same client, for the blocking calls; never read here */
    fitfarm_run_t *next;      /* in core->runs */
    char *id;
    uint64_t seed;
    uint32_t seed_mode;
    uint32_t flags;
    unsigned timeout_s;
    unsigned attempts;
    unsigned weight; /* fair share, 1..PROTO_MAX_WEIGHT */
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

/* Opens a run in core (options already size-checked and copied in full);
 * client is kept for the blocking calls. On success *out is a new run the
 * caller destroys with fitfarm_run_destroy. Returns 0 or a code, error set. */
int client_run_new(client_core_t *core, fitfarm_client_t *client,
                   const fitfarm_run_options_t *options, fitfarm_run_t **out);
fitfarm_run_t *client_run_find(const client_core_t *core, const char *run_id);

/* Feeds one decoded message from the broker to the runs: RESULTS,
 * ACCEPTED, REFUSED. Returns 1 if it was one of those, 0 otherwise. */
int client_runs_on_message(client_core_t *core, const proto_msg_t *msg);
/* Re-sends unfinished work: every run's when all (a reconnect), else those
 * whose retry time (after a refused re-send) is due at now_ms. */
void client_runs_resend_due(client_core_t *core, int64_t now_ms, int all);
/* The earliest retry time of any run (monotonic ms), or -1. */
int64_t client_runs_next_retry(const client_core_t *core);
/* The client is going away: runs still open fail cleanly from now on. */
void client_runs_detach(client_core_t *core);

/* Submitting, in the core's steps; the waiting is blocking.c's.
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
/* Unlinks batch from its run (a destroyed batch): its chunks and queued
 * results are forgotten. */
void client_batch_detach(fitfarm_batch_t *batch);

#endif
