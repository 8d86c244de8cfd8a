/* quota.h: caps that keep one run, one client key and all of them together
 * from filling the broker's memory, and the bookkeeping they need.
 *
 *   - requests: accepted and not yet answered, per run (--max-queued-per-run)
 *     and per client key (--max-queued-per-key, summed over the key's runs);
 *   - queued genome bytes: the genomes of QUEUED and RUNNING evaluations,
 *     charged to the run whose request created them, per run
 *     (--max-queued-bytes-per-run), per key (--max-queued-bytes-per-key) and in
 *     all (--max-queued-bytes); a batch is judged by the sum of its genomes'
 *     sizes (an upper bound: some may be cached or attach to running work);
 *   - runs held in RAM, per key (--max-runs-per-key) and in all (--max-runs).
 *     A run leaves RAM once it is idle (runs.h: nothing waiting, sent,
 *     unacknowledged or owed) and unused for BROKER_RUN_IDLE_MS, and comes
 *     back from the store on its next SUBMIT (broker_quota_find_run), so the
 *     cap bounds RAM, not how many runs the store may hold. After a restart
 *     only runs with unacknowledged requests are loaded.
 *
 * A SUBMIT past a cap is refused whole with PROTO_REFUSE_QUEUE_FULL and a
 * sentence giving the numbers and the flag ("queue full: ..." or "too many
 * runs: ..."), never dropped silently. Not here: decoder size limits (the
 * proto limits in broker_t, applied by the decoder), who may use a run
 * (access.h). */
#ifndef BROKER_QUOTA_H
#define BROKER_QUOTA_H

#include <stddef.h>
#include <stdint.h>

#include "core.h"

#define BROKER_RUN_IDLE_MS 60000     /* an idle run stays in RAM this long after its last use */
#define BROKER_RUN_SWEEP_MS 1000     /* how often idle runs are looked for */

/* 0 if s fits the caps for run (NULL: s makes a new run owned by who); else
 * -1 with the reason in text. */
int broker_quota_check(const broker_t *b, const char *who, const broker_run_t *run,
                       const proto_submit_t *s, char *text, size_t n);

/* Counts run (new or loaded) under its owner's totals; again after its owner
 * changed (a claim: detach first). */
/* The key of a broker_keyuse_t in b->key_use (table.h): its owner text. */
const void *broker_keyuse_key(const void *value, size_t *len);
void broker_quota_attach(broker_t *b, broker_run_t *run);
void broker_quota_detach(broker_t *b, broker_run_t *run);
/* e (QUEUED, new) holds its genome for run until DONE. */
void broker_quota_charge(broker_t *b, broker_run_t *run, broker_eval_t *e);
/* e is DONE (or freed): its genome no longer counts. No-op if not charged. */
void broker_quota_release(broker_t *b, broker_eval_t *e);

/* The run id from RAM, else rebuilt from the store (an idle run that left
 * RAM); NULL if the store has no such run. Borrowed, like broker_runs_get. */
broker_run_t *broker_quota_find_run(broker_t *b, const char *id);
/* Drops idle runs unused for BROKER_RUN_IDLE_MS (all idle ones when
 * idle_ms is 0); at most once per BROKER_RUN_SWEEP_MS unless forced. Call
 * only between turns (after the flush): nothing may hold a run pointer. */
void broker_quota_sweep(broker_t *b, int64_t idle_ms, int force);
/* Frees the per-key totals. */
void broker_quota_fini(broker_t *b);

#endif
