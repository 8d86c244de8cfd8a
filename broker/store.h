/* store.h: the broker's durable store, SQLite in WAL mode in one file
 * (DIR/fitfarm.db). What goes in, and when:
 *
 *   - broker_client_submit notes each new run, each accepted request (run,
 *     tag -> key) and each new evaluation (plugin, params, genome, seed), and
 *     holds the ACCEPTED reply until the turn's commit;
 *   - broker_dispatch_outcome notes each final result (status, fitness, error,
 *     attempts, which worker, CPU seconds, peak memory);
 *   - an ACK marks its requests acknowledged (nothing is ever deleted):
 *     mostly by moving its run's mark (runs.acked_below, store_sql.c);
 *   - HELLO notes each plugin (so a restarted broker knows the catalog before
 *     any worker is back);
 *   - the loop's before-sleep step calls broker_store_commit once per turn,
 *     then sends ACCEPTED and RESULTS: only what the commit made durable goes
 *     out. A turn's writes are one transaction (group commit): BEGIN at the
 *     first write, COMMIT here.
 *
 * broker_store_load (store_load.c) rebuilds the catalog, the runs and the
 * pending evaluations at start; finished results are read back on demand
 * (cache.c), results owed to clients in pages (backlog.c). The schema is in
 * store_schema.c and in the README ("The store"). Not here: cache lookups in memory
 * (evals.h), what a request means (client_io.c). */
#ifndef BROKER_STORE_H
#define BROKER_STORE_H

#include <stddef.h>
#include <stdint.h>

#include "evals.h"
#include "msg.h"
#include "runs.h"
#include "stats.h"

typedef struct broker_store broker_store_t;
struct broker;

/* The largest request tag the broker takes: the store keeps tags as SQLite
 * integers (signed 64 bits) and orders them, and one past a tag must fit. */
#define BROKER_TAG_MAX ((uint64_t)INT64_MAX - 1)

/* Opens (creating if needed) DIR/fitfarm.db (an error SQLite reports as
 * damage refuses it with how to recover; the whole file is checked later,
 * while the broker serves: store_check.h); dir NULL: a private
 * in-memory database (unit tests). scratch: commit without fsync (broker.h says when
 * that is right). lock_wait_ms: how long to wait for another broker's lock
 * on the folder (store_lock.h). Caller closes it. Returns NULL after logging why when the
 * folder or database cannot be opened. */
broker_store_t *broker_store_open(const char *dir, int scratch, int lock_wait_ms);
/* Commits what is pending (unless failing: broker_main_run tried and reported
 * it) and closes. Accepts NULL. */
void broker_store_close(broker_store_t **self_p);

/* Rebuilds b's catalog, runs, results and queues from the store (store_load.c).
 * Returns 0, or -1 after logging why. */
int broker_store_load(struct broker *b);

/* A run was created or spoke (upsert; last_activity = now). */
void broker_store_note_run(broker_store_t *self, const broker_run_t *run);
/* An evaluation was created or reset for a no-cache request: its row holds
 * what a restarted broker needs to queue it again (status NULL = pending). */
void broker_store_note_eval(broker_store_t *self, const broker_eval_t *e);
/* Request tag of run asks for e; cached 1 when it was answered from a stored
 * result at once. */
void broker_store_note_request(broker_store_t *self, const broker_run_t *run, uint64_t tag,
                               uint64_t batch_tag, uint32_t replicate, const broker_eval_t *e,
                               int cached);
/* Looks up run_id (a run that left RAM, quota.h). Returns 1 and fills
 * *seed, *seed_mode and owner ("" = not recorded) when the store has it, else 0. */
int broker_store_find_run(broker_store_t *self, const char *run_id, uint64_t *seed,
                          uint32_t *seed_mode, char *owner, size_t owner_len);
/* Looks up request (run_id, tag). Returns 1 and fills key, *cached and *fresh
 * (1: a no-cache request) when it is recorded, 0 when not. */
int broker_store_find_request(broker_store_t *self, const char *run_id, uint64_t tag,
                              uint8_t key[PROTO_KEY_BYTES], int *cached, int *fresh);
/* One past the highest request tag recorded for run_id: 0 when none,
 * UINT64_MAX when no bound can be given (a tag past INT64_MAX, or the
 * store could not be read), which makes every tag worth looking up. */
uint64_t broker_store_request_tags_end(broker_store_t *self, const char *run_id);
/* The latest re-evaluation result of key paid for by run_id (results history,
 * fresh = 1). Returns 1 and fills *status, fitness[0..*n_fitness) (at most
 * PROTO_MAX_OBJECTIVES) and err (NUL-terminated, truncated to errlen) when
 * there is one, 0 when not. */
int broker_store_find_fresh_result(broker_store_t *self, const char *run_id,
                                   const uint8_t key[PROTO_KEY_BYTES], uint32_t *status,
                                   double *fitness, uint32_t *n_fitness, char *err, size_t errlen);
/* e is DONE: records its result. o and worker may be NULL (not from a worker). */
void broker_store_note_result(broker_store_t *self, const broker_eval_t *e,
                              const proto_outcome_t *o, const char *worker, const char *host,
                              const char *arch);
/* Request tags first..last of run (each owed until now) were acknowledged. */
void broker_store_note_ack(broker_store_t *self, const broker_run_t *run, uint64_t first,
                           uint64_t last);
/* A new request of run is about to be noted at a tag below the run's last
 * recorded one (a gap the client fills): the run's acknowledgement mark
 * comes down to it first, so the store records it as owed. */
void broker_store_note_request_below(broker_store_t *self, const broker_run_t *run,
                                     uint64_t tag);
/* A recorded request is answered again by a re-evaluation of its own (a
 * crash or time-out retried on resume): it now reads its run's latest
 * re-evaluation, as a no-cache request does, and is owed again. */
void broker_store_note_request_fresh(broker_store_t *self, const broker_run_t *run, uint64_t tag);
/* Request tag of run is owed to its client again (a re-sent request answered
 * past the delivery cap, runs.h): acked back to 0 so the backlog reads it. */
void broker_store_note_unack(broker_store_t *self, const broker_run_t *run, uint64_t tag);
void broker_store_note_plugin(broker_store_t *self, const broker_plugin_t *p);
/* Writes the notes still waiting to share a statement (new requests,
 * store.c) inside the turn's transaction; a reader of requests on the
 * store's connection calls it first (the store's own reads do). */
void broker_store_flush(broker_store_t *self);
/* Makes this turn's notes durable. Returns 0, or -1: nothing that depends
 * on a note since the last successful commit may be sent. After a failure
 * the store is failing (sticky): every note since the last successful
 * commit is kept in memory, and each later call retries all of them in one
 * transaction once the back-off allows (broker_store_retry_in_ms), until one
 * commits. */
int broker_store_commit(broker_store_t *self);
/* When this turn's writes must commit, in milliseconds from now_ms
 * (common_clock_ms): 0 when something noted since the last commit must be
 * durable before an answer goes out (every note but an acknowledgement),
 * or while failing; the time left of BROKER_STORE_LAZY_MS when only
 * acknowledgements wait; -1 when nothing waits.
 *
 * Why acknowledgements may wait: delivery is at-least-once on the wire and
 * the client drops duplicates by tag (DESIGN.md, reliability), so an
 * acknowledgement lost in a crash costs a re-sent result, never a wrong
 * one. Left open, they ride on the next commit that must happen anyway:
 * an optimizer's generation, whose ACK arrives just before its next
 * SUBMIT, pays one fsync fewer. */
long broker_store_commit_due_in_ms(const broker_store_t *self, int64_t now_ms);
/* How long (microseconds at now_us, common_clock_us) the oldest note an
 * answer depends on has waited for a commit; -1 when none waits. */
int64_t broker_store_waiting_us(const broker_store_t *self, int64_t now_us);
#define BROKER_STORE_LAZY_MS 100 /* longest acknowledgements wait for a commit */
/* 1 while the store cannot write (a failed write or commit not yet
 * retried successfully); 0 when writable or self is NULL. */
int broker_store_failing(const broker_store_t *self);
/* Milliseconds until the next retry is due (0: now), or -1 when not
 * failing: the loop's poll time-out must not pass it. */
long broker_store_retry_in_ms(const broker_store_t *self);
/* The next commit retries at once, whatever the back-off (the final commit
 * at shutdown). */
void broker_store_retry_now(broker_store_t *self);
/* Results noted since the last successful commit (while failing: the ones
 * not written). */
uint64_t broker_store_unwritten(const broker_store_t *self);
/* One sentence for clients and status: "store cannot write: database or
 * disk is full at PATH; N results waiting to be written (...)", or that
 * the store is writable. */
void broker_store_describe(const broker_store_t *self, char *buf, size_t len);
/* DIR/fitfarm.db (or ":memory:"). Borrowed, valid until close. */
const char *broker_store_path(const broker_store_t *self);
/* Logs that the store at path is damaged (what failed, SQLite's message)
 * and how to recover it: the one wording for store.c, store_load.c and
 * backlog.c. */
void broker_store_report_damage(const char *path, const char *what, const char *msg);
/* Counters for the log: commits made, statements written. */
uint64_t broker_store_commits(const broker_store_t *self);
/* The summed wall time of those commits, in seconds (each pays an fsync). */
double broker_store_commit_seconds(const broker_store_t *self);
/* How long each successful COMMIT took (a turn with nothing written makes
 * none). Borrowed, valid until the store is closed. */
const broker_hist_t *broker_store_commit_times(const broker_store_t *self);

/* The raw handle for store_load.c. Borrowed. */
struct sqlite3 *broker_store_db(broker_store_t *self);

#endif
