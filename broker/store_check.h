/* store_check.h: PRAGMA quick_check of the store's whole file, on a thread of
 * its own while the broker serves.
 *
 * The check reads every page (about 360 MB/s measured, so 10 s for a store
 * of 10 million evaluations: tests/bench/bench_restart.py), while loading
 * the pending work reads only its own pages and stops the start on any
 * SQLite error there (store_load.c), so no pending work is ever half loaded.
 * The pages the start does not read (finished evaluations, the history) are
 * checked here, on a read-only connection of this module's own; damage found
 * stops the broker (loop.c) with the report a damaged page at start gives
 * (store.h). The thread touches no broker state and does not log: the
 * verdict is read on the broker's thread. */
#ifndef BROKER_STORE_CHECK_H
#define BROKER_STORE_CHECK_H

typedef struct broker_store_check broker_store_check_t;

/* Starts the check of the SQLite file at path. NULL if it could not start
 * (logged; the broker then runs unchecked, as the load found no damage). */
broker_store_check_t *broker_store_check_start(const char *path);

/* Readable once the verdict is in. */
int broker_store_check_fd(const broker_store_check_t *self);

/* Interrupts a check still running (a stop must not wait for it), waits for
 * the thread and frees. Returns 1 if the file was found damaged (reported
 * here), else 0: sound, interrupted, or the check could not run (logged).
 * NULL-safe; sets *self to NULL. */
int broker_store_check_finish(broker_store_check_t **self);

#endif
