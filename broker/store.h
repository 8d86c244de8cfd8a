/* store.h: the seam where the durable store goes. Today an in-memory stand-in
 * that only counts; a later step replaces store.c with SQLite (WAL, one
 * transaction per loop turn) without touching the callers:
 *
 *   - broker_client_submit calls broker_store_note_request for each accepted
 *     request and holds the ACCEPTED reply until the turn's commit;
 *   - broker_dispatch_complete calls broker_store_note_result;
 *   - the loop's before-sleep step calls broker_store_commit once, then sends
 *     ACCEPTED and RESULTS (only what the commit made durable goes out).
 *
 * Not here: the cache lookups themselves (evals.h keeps results in memory). */
#ifndef BROKER_STORE_H
#define BROKER_STORE_H

#include <stdint.h>

#include "evals.h"
#include "runs.h"

typedef struct broker_store broker_store_t;

/* Opens the store in dir (NULL: memory only). Today dir is accepted and
 * ignored (logged once). Caller destroys it. Returns NULL only on failure. */
broker_store_t *broker_store_open(const char *dir);
void broker_store_close(broker_store_t **self_p);

void broker_store_note_request(broker_store_t *self, const broker_run_t *run, uint64_t tag,
                               const broker_eval_t *e);
void broker_store_note_result(broker_store_t *self, const broker_eval_t *e);
/* Makes this turn's notes durable. Returns 0, or -1 (nothing may be sent). */
int broker_store_commit(broker_store_t *self);

#endif
